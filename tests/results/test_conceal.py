"""Values stay home when asked: --example-values hide / hash, checked on every output format.

The keyed hash is HMAC-SHA256 (RFC 2104, FIPS 180-4), computed here by Python's hmac and
hashlib for the expected text; an example's value is the JSON text of the value.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

import driftline
from driftline.core.stats import type_sample
from driftline.core.valuepolicy import ValuePolicy, output_values
from driftline.errors import OptionError
from driftline.results.conceal import conceal

SECRETS = ["alice@example.com", "bob.secret@example.org", "ABC-SECRET-77", "Zx9-private-note"]
KEY = b"team key 2026"


def hashed(value: object) -> str:
    text = json.dumps(value, ensure_ascii=False, separators=(",", ":"))
    return "hmac:" + hmac.new(KEY, text.encode(), hashlib.sha256).hexdigest()[:16]


@pytest.fixture
def data(tmp_path: Path) -> Path:
    d = tmp_path / "data"
    (d / "day=1").mkdir(parents=True)
    (d / "day=2").mkdir()
    (d / "day=1" / "a.jsonl").write_text(
        json.dumps({"email": SECRETS[0], "code": 1, "note": SECRETS[3]})
        + "\n"
        + json.dumps({"email": SECRETS[1], "code": 2})
        + "\n"
    )
    (d / "day=2" / "a.jsonl").write_text(json.dumps({"email": SECRETS[0], "code": SECRETS[2]}) + "\n")
    (d / "day=2" / "b.csv").write_text(f"name,when\n{SECRETS[3]},2026-01-01\n")
    # Numbers and a string that does not parse: the rules file lists it as an unparsed example.
    (d / "day=1" / "c.jsonl").write_text("".join(json.dumps({"amount": v}) + "\n" for v in [12, "13", SECRETS[2]]))
    return d


def run(*args: str, env_extra: dict[str, str] | None = None) -> subprocess.CompletedProcess[str]:
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path), COLUMNS="200")
    env.pop("DRIFTLINE_HASH_KEY", None)  # only the key a test gives
    env.update(env_extra or {})
    return subprocess.run(
        [sys.executable, "-m", "driftline.cli", *args], capture_output=True, text=True, env=env, timeout=120
    )


def outputs_of_every_verb(
    data: Path, out: Path, *flags: str, env_extra: dict[str, str] | None = None
) -> dict[str, str]:
    """Every output format, written with the flags: JSON report, HTML, terminal (scan, check,
    schema, diff), verdict JSON, JUnit, rules file, JSON Schema with annotations."""
    schema = out / "contract.json"
    schema.write_text(
        json.dumps({"type": "object", "properties": {"email": {"type": "integer"}, "code": {"type": "integer"}}})
    )
    texts: dict[str, str] = {}
    r = run(  # --events-detail: the terminal lists each event's example
        "scan",
        str(data),
        "--events-detail",
        "--json",
        str(out / "r.json"),
        "--html",
        str(out / "r.html"),
        *flags,
        env_extra=env_extra,
    )
    assert r.returncode == 0, r.stderr
    texts["scan terminal"] = r.stdout + r.stderr
    r = run(
        "check",
        str(data),
        "-b",
        str(schema),
        "--json",
        str(out / "v.json"),
        "--junit",
        str(out / "v.xml"),
        *flags,
        env_extra=env_extra,
    )
    assert r.returncode == 1, r.stderr  # the email field is not an integer: a violation with an example
    texts["check terminal"] = r.stdout + r.stderr
    r = run(
        "schema",
        str(data),
        "--to",
        "json-schema",
        "--out",
        str(out / "s.json"),
        "--rules",
        str(out / "rules.json"),
        "--max-null-share",
        "0.5",
        *flags,
        env_extra=env_extra,
    )
    assert r.returncode == 0, r.stderr
    texts["schema terminal"] = r.stdout + r.stderr
    r = run("diff", str(data), "--by", "day", *flags, env_extra=env_extra)
    assert r.returncode == 0, r.stderr
    texts["diff terminal"] = r.stdout + r.stderr
    for name in ("r.json", "r.html", "v.json", "v.xml", "s.json", "rules.json"):
        texts[name] = (out / name).read_text()
    return texts


def test_shown_by_default(data: Path, tmp_path: Path):
    texts = outputs_of_every_verb(data, tmp_path)
    # The default shows examples: the checks below would see a leak.
    for name in ("r.json", "v.json", "v.xml", "check terminal"):
        assert SECRETS[0] in texts[name], name
    for name in ("r.html", "scan terminal", "diff terminal", "rules.json"):  # the drift to a string
        assert SECRETS[2] in texts[name], name


@pytest.mark.parametrize("mode", ["hide", "hash"])
def test_no_value_in_any_output(data: Path, tmp_path: Path, mode: str):
    before = {p: p.read_bytes() for p in data.rglob("*") if p.is_file()}
    (tmp_path / "key").write_bytes(KEY + b"\n")
    flags = ["--example-values", mode] + (["--hash-key-file", str(tmp_path / "key")] if mode == "hash" else [])
    texts = outputs_of_every_verb(data, tmp_path, *flags)
    for name, text in texts.items():
        for secret in SECRETS:
            assert secret not in text, (name, secret)
    report = json.loads(texts["r.json"])
    assert report["options"]["example_values"] == mode
    example = report["fields"]["email"]["samples"]["type:string"][0]
    assert (example["file"], example["row"], example["line"]) == ("day=1/a.jsonl", 0, 1)  # the place stays
    if mode == "hide":
        assert "value" not in example and example["text"] == ""  # docs/report.schema.json $defs.example
        assert all(e["example"] is None for e in report["events"])
    else:
        assert example["text"] == hashed(SECRETS[0])  # the same value, the same text
        assert hashed(SECRETS[0]) in texts["v.json"] and hashed(SECRETS[0]) in texts["v.xml"]
        assert hashed(SECRETS[2]) in texts["r.html"]
    assert {p: p.read_bytes() for p in data.rglob("*") if p.is_file()} == before


def test_hash_is_stable_and_keyed(data: Path):
    a = driftline.scan(data, example_values="hash", hash_key=KEY)
    b = driftline.scan(data, example_values="hash", hash_key=KEY)
    c = driftline.scan(data, example_values="hash", hash_key=b"another key")
    first = a.fields["email"].stats.first(type_sample("string"))
    assert first is not None and first.value == hashed(SECRETS[0])
    assert b.fields["email"].stats.first(type_sample("string")).value == first.value  # type: ignore[union-attr]
    assert c.fields["email"].stats.first(type_sample("string")).value != first.value  # type: ignore[union-attr]
    assert a == driftline.scan(data)  # values are not content: counts, types and places are the same


def test_hash_without_a_key_is_a_usage_error(data: Path, tmp_path: Path):
    with pytest.raises(OptionError, match="needs a key"):
        driftline.scan(data, example_values="hash")
    with pytest.raises(OptionError, match="example_values must be one of show, hide, hash"):
        driftline.scan(data, example_values="blur")
    r = run("scan", str(data), "--example-values", "hash")
    assert r.returncode == 2 and r.stderr.startswith("error: example_values") and "Traceback" not in r.stderr
    r = run("scan", str(data), "--example-values", "hash", "-q", "--json", "-", env_extra={"DRIFTLINE_HASH_KEY": "k"})
    assert r.returncode == 0 and SECRETS[0] not in r.stdout


def test_set_in_the_config_files(data: Path, tmp_path: Path):
    (tmp_path / "key").write_bytes(KEY)
    (tmp_path / "gate.toml").write_text('widening = "warn"\n\n[output]\nexample_values = "hide"\n')
    (tmp_path / "recommend.toml").write_text(
        '[recommend]\nprefer_decimal = true\n\n[output]\nexample_values = "hash"\nhash_key_file = "key"\n'
    )
    schema = tmp_path / "contract.json"
    schema.write_text(json.dumps({"type": "object", "properties": {"email": {"type": "integer"}}}))
    r = run("check", str(data), "-b", str(schema), "-p", str(tmp_path / "gate.toml"), "--json", "-")
    assert r.returncode == 1 and SECRETS[0] not in r.stdout and '"example": null' in r.stdout
    r = run("schema", str(data), "--config", str(tmp_path / "recommend.toml"), "--rules", "-")
    assert r.returncode == 0 and SECRETS[0] not in r.stdout + r.stderr
    assert output_values(tmp_path / "recommend.toml") == ValuePolicy("hash", KEY)
    (tmp_path / "bad.toml").write_text('[output]\nexample_value = "hide"\n')
    with pytest.raises(OptionError, match="unknown key 'example_value'"):
        output_values(tmp_path / "bad.toml")


def test_parser_messages_lose_the_cells_they_quote():
    from driftline.core.files import FileIssue, FileResult
    from driftline.results.profile import Profile

    # source: pyarrow's CSV reader quotes the row in "Expected N columns, got M: <row>"
    issue = FileIssue(
        "a.csv", "malformed-csv", f"parsing stopped: CSV parse error: Expected 2 columns, got 3: {SECRETS[0]},x,y"
    )
    p = Profile("r", (FileResult("a.csv", "csv", None, (), 10, 0, issues=(issue,)),))
    hidden = conceal(p, ValuePolicy("hide")).files[0].issues[0].message
    assert hidden == "parsing stopped: (value hidden)"
    hashed_msg = conceal(p, ValuePolicy("hash", KEY)).files[0].issues[0].message
    assert SECRETS[0] not in hashed_msg and hashed_msg.startswith("parsing stopped: hmac:")
