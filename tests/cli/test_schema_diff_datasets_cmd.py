"""`driftline schema ROOT` and `driftline diff A B` on roots of several datasets, through the real
console script: one schema file per dataset equal to `schema` of that dataset's folder alone, the
JSON Schema files checked against each dataset's records by the jsonschema package, --dataset, the
usage errors, and a diff dataset by dataset (the issue's Done-when root written by
tests/fixtures/datasets/make_layouts.py, copied as landing/).
"""

from __future__ import annotations

import doctest
import gzip
import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import jsonschema
import pyarrow.csv as pacsv
import pyarrow.parquet as pq
import pytest

import driftline
import driftline.emit.dataset_files
import driftline.gate.dataset_diff
from _cli import ENV, EXE, make_layouts
from conftest import ROOT
from driftline.emit.dataset_files import dataset_files

FORMATS = ("json-schema", "arrow", "arrow-text", "sql", "avro")
# Each dataset of make_layouts.done_when, its folder (or lone file) and its own columns.
DATASETS = {
    "depot_exports": ("depot_exports", {"depot", "sku", "qty", "counted_at"}),
    "readings": ("readings", {"station_id", "ts", "temp_c", "humidity"}),
    "stations.parquet": ("stations.parquet", {"station_id", "lat", "lon"}),
}
SUFFIX = {
    "json-schema": ".schema.json",
    "arrow": ".arrow-schema",
    "arrow-text": ".arrow-schema.txt",
    "sql": ".sql",
    "avro": ".avsc",
}


def run(*args: str, cwd: Path) -> subprocess.CompletedProcess[bytes]:
    return subprocess.run([*EXE, *args], capture_output=True, timeout=120, env=ENV, cwd=cwd)


@pytest.fixture(scope="module")
def work(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("cli-schema-diff")
    make_layouts().main(out, ["done_when", "uneven_depth"])
    (out / "done_when").rename(out / "landing")
    # The copy: one readings file gains a field, the reference file is gone, the rest as it was.
    shutil.copytree(out / "landing", out / "landing-copy")
    (out / "landing-copy" / "stations.parquet").unlink()
    part = out / "landing-copy" / "readings" / "region=south" / "day=2026-03-02" / "part-0.jsonl.gz"
    rows = [json.loads(line) for line in gzip.decompress(part.read_bytes()).decode().splitlines()]
    part.write_bytes(gzip.compress("".join(json.dumps({**r, "pressure_hpa": 1013.5}) + "\n" for r in rows).encode()))
    return out


def test_the_modules_examples_run() -> None:
    for module in (driftline.emit.dataset_files, driftline.gate.dataset_diff):
        failed, tried = doctest.testmod(module, optionflags=doctest.ELLIPSIS)
        assert (failed, tried > 0) == (0, True), module.__name__


@pytest.mark.parametrize("fmt", FORMATS)
def test_out_folder_writes_one_file_per_dataset_equal_to_its_folder_alone(work: Path, fmt: str) -> None:
    target = work / f"schemas-{fmt}"
    res = run("schema", "landing/", "--to", fmt, "--out", f"{target.name}/", "--rules", f"{target.name}/", cwd=work)
    assert res.returncode == 0, res.stderr
    expected = {f"{name}{SUFFIX[fmt]}" for name in DATASETS} | {f"{name}.rules.json" for name in DATASETS}
    assert set(os.listdir(target)) == expected
    for name, (folder, _) in DATASETS.items():
        alone = run("schema", f"landing/{folder}", "--to", fmt, "--out", "-", cwd=work)
        assert alone.returncode == 0, alone.stderr
        assert (target / f"{name}{SUFFIX[fmt]}").read_bytes() == alone.stdout
        rules = run("schema", f"landing/{folder}", "--rules", "-", cwd=work)
        assert (target / f"{name}.rules.json").read_bytes() == rules.stdout
    text = res.stdout.decode()
    headings = [ln.split(" ─")[0] for ln in text.splitlines() if ln.startswith("dataset ")]
    assert headings == ["dataset depot_exports", "dataset readings", "dataset stations.parquet"]
    assert f"{fmt} written to {target.name}/readings{SUFFIX[fmt]}" in text


def _records(landing: Path, name: str) -> list[dict[str, object]]:
    """A dataset's records read without driftline: gzip + json, pyarrow's CSV reader (its typed
    cells, dates as ISO 8601 text as JSON carries them), the Parquet file through pyarrow."""
    if name == "readings":
        return [
            json.loads(line)
            for part in sorted((landing / "readings").rglob("*.jsonl.gz"))
            for line in gzip.decompress(part.read_bytes()).decode().splitlines()
        ]
    if name == "depot_exports":
        rows = [r for f in sorted((landing / name).glob("*.csv")) for r in pacsv.read_csv(f).to_pylist()]
        return [{k: v.isoformat() if hasattr(v, "isoformat") else v for k, v in r.items()} for r in rows]
    return pq.read_table(landing / name).to_pylist()


def test_json_schema_files_validate_their_own_records_and_name_no_other_fields(work: Path) -> None:
    res = run("schema", "landing/", "--to", "json-schema", "--out", "js/", "-q", cwd=work)
    assert res.returncode == 0, res.stderr
    for name, (_, columns) in DATASETS.items():
        schema = json.loads((work / "js" / f"{name}.schema.json").read_text())
        # source: JSON Schema 2020-12, checked by the jsonschema package (with its format checker)
        validator = jsonschema.Draft202012Validator(schema, format_checker=jsonschema.FormatChecker())
        records = _records(work / "landing", name)
        assert records and all(validator.is_valid(r) for r in records), name
        assert set(schema["properties"]) == columns
        others = set().union(*(c for n, (_, c) in DATASETS.items() if n != name)) - columns
        text = json.dumps(schema)
        assert [f for f in sorted(others) if f'"{f}"' in text] == []
        # Another table's records lack this one's required fields.
        foreign = next(n for n in DATASETS if n != name)
        assert not any(validator.is_valid(r) for r in _records(work / "landing", foreign))


def test_a_picked_dataset_writes_a_file_or_stdout_as_its_folder_alone(work: Path) -> None:
    picked = run("schema", "landing/", "--dataset", "readings", "--to", "sql", cwd=work)
    alone = run("schema", "landing/readings", "--to", "sql", cwd=work)
    assert picked.returncode == alone.returncode == 0
    assert picked.stdout == alone.stdout and picked.stdout.startswith(b"-- driftline-output: driftline schema: ")
    assert picked.stderr == alone.stderr
    res = run("schema", "landing/", "--dataset", "stations.parquet", "--to", "avro", "--out", "st.avsc", cwd=work)
    assert res.returncode == 0, res.stderr
    assert (work / "st.avsc").read_bytes() == run("schema", "landing/stations.parquet", "--to", "avro", cwd=work).stdout
    two = run(
        "schema",
        "landing/",
        "--dataset",
        "readings",
        "--dataset",
        "depot_exports",
        "--to",
        "sql",
        "--out",
        "two/",
        cwd=work,
    )
    assert two.returncode == 0, two.stderr
    assert sorted(os.listdir(work / "two")) == ["depot_exports.sql", "readings.sql"]


def test_several_datasets_to_one_file_or_stdout_is_a_usage_error(work: Path) -> None:
    root = work / "landing"
    listed = "(depot_exports, readings, stations.parquet)"
    res = run("schema", "landing/", "--to", "json-schema", cwd=work)
    assert res.returncode == 2 and res.stdout == b""
    assert res.stderr.decode().strip() == (
        f"error: --out -: '{root}' holds 3 datasets {listed} and --out writes standard output; give a folder "
        "(--out DIR/, one file per dataset) or pick one with --dataset NAME"
    )
    one = run("schema", "landing/", "--rules", "rules.json", cwd=work)
    assert one.returncode == 2 and "and --rules writes one file ('rules.json')" in one.stderr.decode()
    assert not (work / "rules.json").exists()
    table = run("schema", "landing/", "--to", "sql", "--out", "t/", "--table", "raw", cwd=work)
    assert table.returncode == 2 and "--table names one table" in table.stderr.decode()
    both = run("schema", "landing/", "--dataset", "readings", "--one-table", cwd=work)
    assert both.returncode == 2 and "--dataset picks datasets of one root folder" in both.stderr.decode()
    unknown = run("schema", "landing/", "--dataset", "telemetry", cwd=work)
    assert unknown.returncode == 2 and "no dataset named 'telemetry'" in unknown.stderr.decode()
    folder = run("schema", "uneven_depth", "--to", "sql", "--out", "u/", cwd=work)
    assert folder.returncode == 2 and "reads as one table; give a file name" in folder.stderr.decode()
    inside = run("schema", "landing/", "--to", "sql", "--out", "landing/schemas/", cwd=work)
    assert inside.returncode == 2 and "lies inside the scanned folder" in inside.stderr.decode()
    assert not (root / "schemas").exists()


def test_a_root_of_one_table_and_one_table_flag_are_the_blended_schema(work: Path) -> None:
    plain = run("schema", "uneven_depth", "--to", "json-schema", cwd=work)
    whole = run("schema", "uneven_depth", "--one-table", "--to", "json-schema", cwd=work)
    assert plain.returncode == whole.returncode == 0
    assert (plain.stdout, plain.stderr) == (whole.stdout, whole.stderr)
    blended = run("schema", "landing/", "--one-table", "--to", "json-schema", cwd=work)
    props = json.loads(blended.stdout)["properties"]
    assert {"temp_c", "depot", "lat"} <= set(props)


def test_dataset_file_names() -> None:
    names = ["crm/orders", "crm.orders", "Readings", "readings", ".", "x" * 300, "stations.parquet"]
    files = dataset_files("out", names, "sql", root="/data/landing")
    assert files["stations.parquet"] == "out/stations.parquet.sql" and files["."] == "out/landing.sql"
    assert len(set(files.values())) == len(names)
    # A name a file system that ignores case would confuse, or one that meets another once '/' is
    # '.', gets the SHA-256 mark of its name (source: FIPS 180-4, through hashlib).
    assert files["crm/orders"] == "out/crm.orders~afcae01c.sql" and files["crm.orders"] == "out/crm.orders~aed234bf.sql"
    assert files["Readings"].startswith("out/Readings~") and files["readings"].startswith("out/readings~")
    # common practice: a file name holds at most 255 bytes (NAME_MAX on Linux file systems)
    assert len(os.path.basename(files["x" * 300]).encode()) == 255
    alone = dataset_files("out", ["crm/orders"], "json-schema", root="/r")
    assert alone == {"crm/orders": "out/crm.orders.schema.json"}


def test_diff_of_two_roots_goes_dataset_by_dataset(work: Path) -> None:
    res = run("diff", "landing/", "landing-copy/", cwd=work)
    assert res.returncode == 0, res.stderr
    lines = res.stdout.decode().splitlines()
    assert lines[0] == "2 datasets compared, 1 with changes; only in landing/: stations.parquet"
    at = lines.index(next(ln for ln in lines if ln.startswith("dataset readings ")))
    assert lines[at + 1] == "landing/readings → landing-copy/readings: 1 added"
    assert lines[at + 2].split()[:4] == ["added", "pressure_hpa:", "–", "→"]
    at = lines.index(next(ln for ln in lines if ln.startswith("dataset depot_exports ")))
    assert lines[at + 1] == "landing/depot_exports → landing-copy/depot_exports: no changes"
    doc = json.loads(run("diff", "landing/", "landing-copy/", "--json", "-", "-q", cwd=work).stdout)
    assert doc["datasets"] == {
        "compared": ["depot_exports", "readings"],
        "only_before": ["stations.parquet"],
        "only_after": [],
    }
    assert [(d["dataset"], [(c["kind"], c["path"]) for c in d["changes"]]) for d in doc["diffs"]] == [
        ("depot_exports", []),
        ("readings", [("added", "pressure_hpa")]),
    ]
    # Each dataset's diff is the library's diff of the two folders alone.
    alone = driftline.diff(work / "landing" / "readings", work / "landing-copy" / "readings")
    assert [c.to_json() for c in alone.changes] == doc["diffs"][1]["changes"]


def test_diff_of_report_sets_and_the_one_table_cases(work: Path) -> None:
    assert run("scan", "landing/", "--json", "set.json", "-q", cwd=work).returncode == 0
    res = run("diff", "set.json", "landing-copy/", cwd=work)
    assert res.returncode == 0, res.stderr
    out = res.stdout.decode()
    assert out.splitlines()[0] == "2 datasets compared, 1 with changes; only in set.json: stations.parquet"
    assert "set.json#readings → landing-copy/readings: 1 added" in out
    mixed = run("diff", "set.json", "landing-copy/readings", cwd=work)
    assert mixed.returncode == 2 and "'set.json' is a report set of several datasets" in mixed.stderr.decode()
    # --one-table, and a side that is one table: both sides read whole, as diff always did.
    whole = json.loads(run("diff", "landing/", "landing-copy/", "--one-table", "--json", "-", cwd=work).stdout)
    library = driftline.diff(work / "landing", work / "landing-copy")
    assert whole["diffs"] == [{**library.to_json(), "before": "landing/", "after": "landing-copy/"}]
    assert "datasets" not in whole
    one = run("diff", "landing/readings", "landing-copy/", cwd=work)
    assert one.returncode == 0 and one.stdout.decode().startswith("landing/readings → landing-copy/: ")
    # A root of several datasets against one table: the root is read whole, as diff always read it.
    rest = json.loads(run("diff", "landing/", "landing-copy/readings", "--json", "-", cwd=work).stdout)
    blended = driftline.diff(work / "landing", work / "landing-copy" / "readings")
    assert rest["diffs"] == [{**blended.to_json(), "before": "landing/", "after": "landing-copy/readings"}]
    assert ("removed", "lat") in [(c.kind, c.path) for c in blended.changes]


def _blocks(doc: str) -> list[list[str]]:
    text = (ROOT / doc).read_text(encoding="utf-8")
    return [b.split("\n")[:-1] for b in re.findall(r"^```[a-z]*\n(.*?)^```$", text, re.M | re.S)]


def test_the_documented_commands_run_as_written(work: Path) -> None:
    readme = next(b for b in _blocks("README.md") if b[0].startswith("driftline schema landing/ --to json-schema"))
    datasets_doc = next(b for b in _blocks("docs/datasets.md") if b[0].startswith("driftline schema landing/"))
    commands = [line.split("  #")[0].split() for line in readme + datasets_doc]
    for argv in commands:
        assert argv[0] == "driftline"
        res = run(*argv[1:], cwd=work)
        assert res.returncode == 0, (argv, res.stderr)
    assert sorted(os.listdir(work / "schemas")) == [f"{n}.schema.json" for n in DATASETS]
    assert (work / "readings.sql").read_bytes() == run("schema", "landing/readings", "--to", "sql", cwd=work).stdout
    # docs/datasets.md shows diff's output: each line as printed (a heading's rule as long as the terminal).
    shown = next(b for b in _blocks("docs/datasets.md") if b[0] == "driftline diff landing/ landing-copy/")
    printed = run(*shown[0].split()[1:], cwd=work).stdout.decode().splitlines()
    assert len(printed) == len(shown) - 1
    for doc_line, line in zip(shown[1:], printed, strict=True):
        if doc_line.startswith("dataset "):
            assert line.split(" ─")[0] == doc_line.split(" ─")[0] and set(line.split(" ", 2)[2]) == {"─"}
        else:
            assert line == doc_line


def test_strict_writes_the_datasets_without_conflict_and_exits_1(tmp_path: Path) -> None:
    (tmp_path / "root" / "a").mkdir(parents=True)
    (tmp_path / "root" / "b").mkdir()
    # v holds a number then a word: a type conflict that strict mode refuses (docs/recommend.md).
    (tmp_path / "root" / "a" / "x.jsonl").write_text('{"id": 1, "v": 1}\n{"id": 2, "v": "abc"}\n')
    (tmp_path / "root" / "b" / "y.jsonl").write_text('{"k": 1}\n')
    res = run("schema", "root", "--strict", "--to", "sql", "--out", "out/", "-q", cwd=tmp_path)
    alone = run("schema", "root/a", "--strict", "--to", "sql", "-q", cwd=tmp_path)
    assert (res.returncode, alone.returncode) == (1, 1)
    assert os.listdir(tmp_path / "out") == ["b.sql"]
    assert (tmp_path / "out" / "b.sql").read_bytes() == run("schema", "root/b", "--to", "sql", cwd=tmp_path).stdout
    message = " ".join(alone.stderr.decode().split())
    assert " ".join(res.stderr.decode().split()) == message.replace("error: ", "error: dataset a: ", 1)


def test_a_report_set_gives_the_same_files_as_its_root(work: Path) -> None:
    assert run("scan", "landing/", "--json", "set-for-schema.json", "-q", cwd=work).returncode == 0
    res = run("schema", "set-for-schema.json", "--to", "sql", "--out", "from-set/", cwd=work)
    assert res.returncode == 0, res.stderr
    assert run("schema", "landing/", "--to", "sql", "--out", "from-root/", "-q", cwd=work).returncode == 0
    names = sorted(os.listdir(work / "from-set"))
    assert names == ["depot_exports.sql", "readings.sql", "stations.parquet.sql"]
    assert [(work / "from-set" / n).read_bytes() for n in names] == [
        (work / "from-root" / n).read_bytes() for n in names
    ]
    picked = run("schema", "set-for-schema.json", "--dataset", "readings", "--to", "sql", cwd=work)
    assert picked.stdout == (work / "from-root" / "readings.sql").read_bytes()
    bad = run("schema", "set-for-schema.json", "--dataset", "nope", cwd=work)
    assert bad.returncode == 2 and bad.stderr.decode().strip() == (
        "error: no dataset named 'nope' in the report set; its datasets: 'depot_exports', 'readings', "
        "'stations.parquet'"
    )


@pytest.mark.parametrize("extra", [[], ["--to", "json-schema"], ["--to", "sql"], ["--rules", "-"]])
def test_the_demo_a_root_of_one_table_writes_as_before(demo_dir: Path, extra: list[str]) -> None:
    # --one-table takes the path every schema of a folder took before datasets.
    plain = run("schema", "landing", *extra, cwd=demo_dir)
    whole = run("schema", "landing", "--one-table", *extra, cwd=demo_dir)
    assert plain.returncode == whole.returncode == 0
    assert (plain.stdout, plain.stderr) == (whole.stdout, whole.stderr)
