"""Our own files are checked against their published JSON Schemas before use.

Valid reports, rules, state files and policies are damaged the ways files get damaged
(a value of another type, a key dropped, the file cut short) by hypothesis. Whatever
the damage, check, diff and schema exit 2 with a message naming the file and a JSON
pointer (never a traceback, never 1, which means a policy violation), a damaged state
file is set aside with a note, and the damaged file is left byte for byte as it was. The
compiled checks in driftline.core.validation are held to the `jsonschema` package's verdict on
every mutated document.
"""

from __future__ import annotations

import copy
import json
import re
import tempfile
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from jsonschema import Draft202012Validator
from referencing import Registry
from referencing.jsonschema import DRAFT202012
from typer.testing import CliRunner

import driftline
from conftest import ROOT
from driftline.cli import app
from driftline.core.options import ReadOptions
from driftline.core.validation import SCHEMAS, problem_in, schema_document
from driftline.emit.schemas import json_schema
from driftline.emit.schemas.rules_json import dumps as rules_dumps
from driftline.errors import DamagedFileError, DriftlineError, PolicyError, ReportVersionError
from driftline.gate.policy import DATASET_TABLES, Policy, keys, load_policy
from driftline.gate.state import load_state, scan_incremental, state_bytes
from driftline.results.report import dumps, load_report

# source: RFC 6901 section 3 — a JSON pointer is "" or a sequence of "/"-prefixed tokens
POINTER = re.compile(r'\bat (?:"" \(the whole document\)|(?:/[^\s:/]*)+)')
FUZZ = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def reference(kind: str) -> Draft202012Validator:
    """jsonschema's validator for one of our schemas, the others registered for cross-file $refs."""
    registry = Registry().with_resources(
        (schema_document(k)["$id"], DRAFT202012.create_resource(schema_document(k))) for k in SCHEMAS
    )
    return Draft202012Validator(schema_document(kind), registry=registry)


def _data(d: Path) -> Path:
    land = d / "land"
    (land / "day=1").mkdir(parents=True)
    (land / "day=1" / "a.jsonl").write_text(
        '{"id": 1, "tag": "x", "at": "2026-11-30T10:00:00Z", "m": {"k": [1, 2]}}\n'
        '{"id": 2.5, "tag": null}\n{"id": "3", "tag": "y"}\n',
        encoding="utf-8",
    )
    (land / "day=1" / "b.csv").write_text("id,tag\n4,z\n5,\n", encoding="utf-8")
    return land


@pytest.fixture(scope="module")
def valid(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    """One valid document of each kind, made by driftline from the same small folder."""
    d = tmp_path_factory.mktemp("valid")
    land = _data(d)
    profile = driftline.scan(land, batch_rows=2)
    run = scan_incremental([land], d / "state.json", read=ReadOptions(batch_rows=2), verify=True)
    contract = d / "contract.schema.json"
    contract.write_bytes(json_schema.dumps(json_schema.json_schema(profile.recommend())))
    return {
        "land": land,
        "contract": contract,
        "report": json.loads(dumps(profile)),
        "rules": json.loads(rules_dumps(profile.recommend())),
        "state": json.loads(state_bytes(run.profile, ReadOptions(batch_rows=2), verify=True)),
        "policy": Policy(widening="warn", max_cast_loss=3).to_dict(),
    }


# -- mutations ---------------------------------------------------------------------------------------

Path_ = tuple[str | int, ...]


def _paths(doc: Any, at: Path_ = ()) -> Iterator[Path_]:
    if isinstance(doc, dict):
        for k, v in doc.items():
            yield (*at, k)
            yield from _paths(v, (*at, k))
    elif isinstance(doc, list):
        for i, v in enumerate(doc):
            yield (*at, i)
            yield from _paths(v, (*at, i))


def _other_types(v: Any) -> list[Any]:
    # One value of every JSON type (RFC 8259 section 3) but the one v has.
    kinds = {"string": "12", "integer": 12, "number": 1.5, "true": True, "null": None, "object": {}, "array": []}
    mine = (
        "true"
        if isinstance(v, bool)
        else "null"
        if v is None
        else "string"
        if isinstance(v, str)
        else "integer"
        if isinstance(v, int)
        else "number"
        if isinstance(v, float)
        else "object"
        if isinstance(v, dict)
        else "array"
    )
    return [x for k, x in kinds.items() if k != mine]


@st.composite
def mutated(draw: st.DrawFn, doc: Any, keep: tuple[Path_, ...] = ()) -> tuple[bytes, str]:
    """(bytes of a damaged copy of doc, how it was damaged)."""
    raw = json.dumps(doc, indent=1).encode()
    how = draw(st.sampled_from(["retype", "drop", "truncate"]))
    if how == "truncate":
        cut = draw(st.integers(min_value=40, max_value=len(raw) - 1))
        return raw[:cut], f"cut at byte {cut}"
    paths = [p for p in _paths(doc) if p not in keep and (how == "retype" or isinstance(p[-1], str))]
    path = draw(st.sampled_from(paths))
    out = copy.deepcopy(doc)
    parent = out
    for token in path[:-1]:
        parent = parent[token]
    if how == "drop":
        del parent[path[-1]]
        return json.dumps(out, indent=1).encode(), f"dropped {path}"
    value = draw(st.sampled_from(_other_types(parent[path[-1]])))
    parent[path[-1]] = value
    return json.dumps(out, indent=1).encode(), f"{path} became {value!r}"


def _assert_damage_message(message: str, name: str, why: str) -> None:
    assert name in message, (why, message)
    assert POINTER.search(message) or "(at /version)" in message, (why, message)
    assert "Traceback" not in message


def _invoke(*args: str | Path) -> tuple[int, str, str]:
    res = CliRunner().invoke(app, [*map(str, args), "--jobs", "1"])
    if res.exception is not None and not isinstance(res.exception, SystemExit):
        raise AssertionError(f"{args}: {type(res.exception).__name__}: {res.exception}") from res.exception
    return res.exit_code, res.stdout, res.stderr


# -- the schemas themselves ---------------------------------------------------------------------------


@pytest.mark.parametrize("kind", sorted(SCHEMAS))
def test_the_packaged_schemas_are_the_published_ones_and_are_valid(kind: str):
    published = (ROOT / "docs" / SCHEMAS[kind]).read_text(encoding="utf-8")
    assert json.loads(published) == schema_document(kind)
    assert (ROOT / "src" / "driftline" / "jsonschemas" / SCHEMAS[kind]).read_text(encoding="utf-8") == published
    # source: JSON Schema 2020-12 meta-schema, checked by jsonschema
    Draft202012Validator.check_schema(schema_document(kind))


@pytest.mark.parametrize("kind", ["report", "rules", "state", "policy"])
def test_what_driftline_writes_is_valid(valid: dict[str, Any], kind: str):
    assert reference(kind).is_valid(valid[kind])
    assert problem_in(valid[kind], kind) is None


def test_the_policy_schema_names_every_key_with_its_default():
    doc = schema_document("policy")
    flat = {k: v for k, v in doc["properties"].items() if k not in DATASET_TABLES}
    assert list(flat) == list(keys())
    assert {k: v["default"] for k, v in flat.items()} == Policy().to_dict()
    # the two tables of a root of several datasets (gate/baselines.py), after the flat keys
    assert list(doc["properties"])[len(flat) :] == ["baselines", "datasets"]
    switches = doc["properties"]["datasets"]["properties"]
    assert {k: v["default"] for k, v in switches.items()} == {"no_baseline": "warn", "changed_dataset": "warn"}


@pytest.mark.parametrize("kind", ["report", "rules", "state", "policy"])
@FUZZ
@given(data=st.data())
def test_the_compiled_checks_agree_with_jsonschema(valid: dict[str, Any], kind: str, data: st.DataObject):
    raw, why = data.draw(mutated(valid[kind]))
    try:
        doc = json.loads(raw)
    except ValueError:
        return  # a cut file is not JSON: no schema to ask
    ours, theirs = problem_in(doc, kind), reference(kind).is_valid(doc)
    assert (ours is None) == theirs, (why, ours)
    if ours is not None:
        # The pointer names a place of the document, or a required key missing there.
        at = [t.replace("~1", "/").replace("~0", "~") for t in ours[0].split("/")[1:]]
        node = doc
        for i, token in enumerate(at):
            if isinstance(node, list):
                node = node[int(token)]
            elif token in node:
                node = node[token]
            else:
                assert i == len(at) - 1 and ours[1] == "a required key", (why, ours)


# -- the verbs on damaged files ------------------------------------------------------------------------


@FUZZ
@given(data=st.data())
def test_check_diff_and_schema_on_a_damaged_report(valid: dict[str, Any], data: st.DataObject):
    raw, why = data.draw(mutated(valid["report"], keep=(("format",),)))
    with tempfile.TemporaryDirectory() as d:
        f = Path(d) / "saved-report.json"
        f.write_bytes(raw)
        try:
            expect_valid = reference("report").is_valid(json.loads(raw))
        except ValueError:
            expect_valid = False
        runs = [
            ("check", valid["land"], "--baseline", f, "--quiet"),
            ("diff", f, valid["land"], "--quiet"),
            ("schema", f, "--to", "sql", "--quiet"),
            ("check", f, "--baseline", valid["contract"], "--quiet"),
        ]
        for args in runs:
            code, _, err = _invoke(*args)
            # Exit 1 is a policy violation: only a valid (if altered) report can give one.
            assert code != 1 or (args[0] == "check" and expect_valid), (why, args, err)
            if code == 2:
                _assert_damage_message(err, str(f), why)
            else:
                assert expect_valid, (why, args, code, err)
        assert f.read_bytes() == raw  # an input: never touched
        if not expect_valid:
            with pytest.raises((DamagedFileError, ReportVersionError)) as exc:
                load_report(f)
            _assert_damage_message(str(exc.value), str(f), why)


@FUZZ
@given(data=st.data())
def test_check_on_a_damaged_rules_baseline(valid: dict[str, Any], data: st.DataObject):
    raw, why = data.draw(mutated(valid["rules"], keep=(("format",),)))
    with tempfile.TemporaryDirectory() as d:
        f = Path(d) / "rules.json"
        f.write_bytes(raw)
        code, _, err = _invoke("check", valid["land"], "--baseline", f, "--quiet")
        try:
            expect_valid = reference("rules").is_valid(json.loads(raw))
        except ValueError:
            expect_valid = False
        if not expect_valid:
            assert code == 2, (why, err)
        if code == 2:
            _assert_damage_message(err, str(f), why)
        assert f.read_bytes() == raw


@FUZZ
@given(data=st.data())
def test_check_on_a_damaged_json_schema_baseline(valid: dict[str, Any], data: st.DataObject):
    contract = json.loads(valid["contract"].read_bytes())
    raw, why = data.draw(mutated(contract, keep=(("$comment",),)))
    with tempfile.TemporaryDirectory() as d:
        f = Path(d) / "contract.schema.json"
        f.write_bytes(raw)
        code, _, err = _invoke("check", valid["land"], "--baseline", f, "--quiet")
        try:
            doc = json.loads(raw)
            # source: the JSON Schema 2020-12 meta-schema, checked by jsonschema
            meta_valid = isinstance(doc, dict) and Draft202012Validator(Draft202012Validator.META_SCHEMA).is_valid(doc)
        except ValueError:
            meta_valid = False
        if not meta_valid:
            assert code == 2, (why, code, err)  # never 1: a damaged contract is not a failed gate
        if code == 2:
            assert str(f) in err and ("at /" in err or 'at ""' in err or "is not JSON" in err), (why, err)
            assert "Traceback" not in err
        assert f.read_bytes() == raw


@FUZZ
@given(data=st.data())
def test_a_damaged_state_is_set_aside_and_the_scan_reads_everything(valid: dict[str, Any], data: st.DataObject):
    raw, why = data.draw(mutated(valid["state"], keep=(("format",), ("version",), ("root",), ("read",))))
    with tempfile.TemporaryDirectory() as d:
        state = Path(d) / "state.json"
        state.write_bytes(raw)
        try:
            expect_valid = reference("state").is_valid(json.loads(raw))
        except ValueError:
            expect_valid = False
        run = scan_incremental([valid["land"]], state, read=ReadOptions(batch_rows=2), verify=True)
        aside = Path(f"{state}.damaged")
        if aside.exists():
            assert aside.read_bytes() == raw  # set aside as it was
            assert run.note is not None and "it was set aside as" in run.note
            _assert_damage_message(run.note, str(state), why)
            full = driftline.scan(valid["land"], batch_rows=2)
            assert (run.read, run.reused) == (len(full.files), 0)
            assert run.profile == full and run.profile.fields == full.fields  # a full rescan
        else:
            # Valid but altered (a field dropped from a batch) is trusted as a state is: no crash.
            assert expect_valid, (why, run.note)
        assert load_state(state) is not None  # the new state is whole


def _toml(data: dict[str, Any]) -> str:
    def value(v: Any) -> str:
        if isinstance(v, bool):
            return "true" if v else "false"
        if v is None:
            return '"null"'  # TOML has no null (TOML v1.0.0): the nearest damage is a string
        if isinstance(v, dict | list):
            return "[]"
        return json.dumps(v)

    return "".join(f"{k} = {value(v)}\n" for k, v in data.items())


@FUZZ
@given(data=st.data())
def test_a_damaged_policy_names_the_file_and_the_key(valid: dict[str, Any], data: st.DataObject):
    raw, why = data.draw(mutated(valid["policy"]))
    try:
        doc = json.loads(raw)
    except ValueError:
        return  # TOML files are not cut as JSON; a TOML syntax error is tested in test_gate_policy
    with tempfile.TemporaryDirectory() as d:
        f = Path(d) / "gate.toml"
        f.write_text(_toml(doc), encoding="utf-8")
        text = f.read_bytes()
        try:
            load_policy(f)
        except PolicyError as exc:
            _assert_damage_message(str(exc), str(f), why)
            assert not reference("policy").is_valid(doc) or "[]" in _toml(doc)
        except DriftlineError as exc:  # pragma: no cover - any other error class is a finding
            raise AssertionError(f"{why}: {type(exc).__name__}: {exc}") from exc
        else:
            assert reference("policy").is_valid(doc), why
        assert f.read_bytes() == text


# -- fixed cases the issue names -----------------------------------------------------------------------


@pytest.mark.parametrize(
    ("damage", "message"),
    [
        (
            lambda r: r["files"][0].update(rows="12"),
            'is damaged at /files/0/rows: expected an integer ≥ 0, found the string "12"',
        ),
        (lambda r: r["files"][1].pop("path"), "is damaged at /files/1/path: expected a required key, found none"),
        (
            lambda r: r["files"][0]["batches"][0]["fields"]["id"]["types"].update({"int63": 1}),
            "is damaged at /files/0/batches/0/fields/id/types/int63: expected a type key such as int64, string or "
            'list, found the string "int63"',
        ),
        (
            lambda r: r["files"].append(dict(r["files"][0])),
            'is damaged at /files/2/path: expected each file listed once, found the string "day=1/a.jsonl" again',
        ),
    ],
)
def test_the_issue_s_damaged_reports(valid: dict[str, Any], tmp_path: Path, damage: Any, message: str):
    report = copy.deepcopy(valid["report"])
    damage(report)
    f = tmp_path / "report.json"
    f.write_text(json.dumps(report), encoding="utf-8")
    before = f.read_bytes()
    for args in (("check", valid["land"], "--baseline", f), ("diff", f, valid["land"]), ("schema", f)):
        code, out, err = _invoke(*args)
        assert code == 2 and out == "", (args, err)
        assert " ".join(err.split()) == f"error: report '{f}' {message}" or message in " ".join(err.split()), (
            args,
            err,
        )
    assert f.read_bytes() == before
