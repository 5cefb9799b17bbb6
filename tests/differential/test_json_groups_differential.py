"""Small JSON files observed in groups give the same report as each file observed alone.

A JSON file read in one batch is walked as it is read and its strings classified with those
of the other small files of its group (observe/fast/recordgroups.py).  Each scan here runs
with the grouping on (a spy counts the groups of more than one file, so a shortcut that
never fires fails the test instead of passing it) and forced off (DRIFTLINE_JSON_GROUPS=0),
and the reports are compared as JSON text without duration_s: every event, file, row, line,
example and count.  The folders: generated small nested files with drift, the JSON parsing
test suite and the CSV edge cases' JSON files as folders, and files with bad lines and bad
documents, whose problems must still name their file and line.
"""

from __future__ import annotations

import json
import random
from pathlib import Path
from typing import Any

import orjson
import pytest

from conftest import SHARED_TESTDATA
from driftline.core import jsonnum
from driftline.core.observation import Observation
from driftline.core.options import ReadOptions
from driftline.observe.fast import recordgroups
from driftline.results.report import to_dict
from driftline.scanning.run import scan_paths
from driftline.sources import readers
from driftline.sources.jsonfile import EXACT_ENV


@pytest.fixture
def groups(monkeypatch: pytest.MonkeyPatch) -> list[int]:
    """The sizes of the groups observed together (only groups of two files or more are a shortcut)."""
    monkeypatch.delenv(EXACT_ENV, raising=False)
    monkeypatch.delenv(recordgroups.GROUPS_ENV, raising=False)
    sizes: list[int] = []
    real = recordgroups.observe_walked

    def spy(items: Any) -> list[Observation]:
        sizes.append(len(items))
        return real(items)

    monkeypatch.setattr(readers, "observe_walked", spy)
    return sizes


def _report(paths: list[Path], *, grouped: bool, jobs: int = 1, **read: Any) -> bytes:
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv(recordgroups.GROUPS_ENV, "1" if grouped else "0")
        profile = scan_paths([str(p) for p in paths], read=ReadOptions(**read), jobs=jobs)
        data = to_dict(profile)
    data.pop("duration_s")
    return jsonnum.dumps(data, option=orjson.OPT_SORT_KEYS)


def _same_both_ways(
    paths: list[Path], sizes: list[int], *, jobs: int = 1, fires: bool = True, **read: Any
) -> dict[str, Any]:
    before = len(sizes)
    on = _report(paths, grouped=True, jobs=jobs, **read)
    if fires:
        assert any(n > 1 for n in sizes[before:]), "no group of small files was observed together"
    off = _report(paths, grouped=False, jobs=jobs, **read)
    assert on == off
    doc: dict[str, Any] = json.loads(on)
    return doc


def _event(rng: random.Random, k: int, i: int) -> dict[str, Any]:
    """A nested record whose shape drifts by file: a field that appears, a number quoted, nulls,
    lists of structs, strings of many classes (numerals, dates, timestamps, a leap second)."""
    texts = ("7", "007", "-1.25", "2026-02-30", "2026-02-28", "1990-12-31T23:59:60Z", "2026-01-02t03:04:05z", "", "x")
    rec: dict[str, Any] = {
        "id": f"e{k}-{i}",
        "kind": rng.choice(("click", "view", "buy")),
        "n": rng.randrange(-5, 2**60) if k % 9 == 4 else rng.randrange(100),
        "who": {"uid": rng.randrange(1000), "geo": {"cc": rng.choice(("PT", "JP", None)), "lat": rng.uniform(-9, 9)}},
        "items": [{"sku": rng.choice(texts), "qty": rng.choice((1, 2.0, None))} for _ in range(rng.randrange(3))],
        "note": rng.choice(texts),
    }
    if k % 4 == 1:
        rec["n"] = str(rec["n"])  # one producer in four quotes the number
    if k >= 6:
        rec["who"]["plan"] = rng.choice(("free", "pro"))  # a nested field appears
    if rng.random() < 0.2:
        rec["who"] = None
    return rec


def _small_folder(folder: Path, files: int = 24, seed: int = 7) -> list[list[Any]]:
    """Small nested files, JSON arrays and JSON Lines (every third file), 1 to 30 records each."""
    rng = random.Random(seed)
    folder.mkdir()
    written = []
    for k in range(files):
        events = [_event(rng, k, i) for i in range(rng.randint(1, 30))]
        written.append(events)
        if k % 3 == 2:
            (folder / f"ev-{k:03d}.jsonl").write_bytes(b"".join(orjson.dumps(e) + b"\n" for e in events))
        else:
            (folder / f"ev-{k:03d}.json").write_bytes(orjson.dumps(events, option=orjson.OPT_INDENT_2))
    return written


def test_small_nested_files_same_grouped_and_alone(tmp_path: Path, groups: list[int]) -> None:
    written = _small_folder(tmp_path / "land")
    doc = _same_both_ways([tmp_path / "land"], groups)
    # source: Python's json module (RFC 8259) reads the same records from each file
    rows = {f["path"]: f["rows"] for f in doc["files"]}
    assert rows == {f"ev-{k:03d}.{'jsonl' if k % 3 == 2 else 'json'}": len(events) for k, events in enumerate(written)}
    assert doc["summary"]["rows"] == sum(len(e) for e in written)


@pytest.mark.parametrize("batch_rows", [1, 4, 65_536])
def test_batch_sizes_and_a_cap_on_paths(tmp_path: Path, groups: list[int], batch_rows: int) -> None:
    # files of several batches are observed alone, files of one batch in groups (a group ends at
    # batch_rows rows: with a few rows per batch, nearly every file is a group of its own)
    _small_folder(tmp_path / "land", files=12)
    _same_both_ways([tmp_path / "land"], groups, fires=batch_rows > 4, batch_rows=batch_rows, max_paths=6)
    _same_both_ways([tmp_path / "land"], groups, fires=False, batch_rows=batch_rows, batch_bytes=300)


def test_a_pool_gives_the_same_report(tmp_path: Path, groups: list[int]) -> None:
    _small_folder(tmp_path / "land", files=40)
    one = _report([tmp_path / "land"], grouped=True)
    assert _report([tmp_path / "land"], grouped=True, jobs=2) == one  # the workers' groups are not seen here
    assert _report([tmp_path / "land"], grouped=False, jobs=2) == one


def test_json_parsing_suite_as_a_folder(groups: list[int]) -> None:
    # y_ (must parse), n_ (must not) and i_ (either) documents, one folder: the n_ ones are problems
    folder = SHARED_TESTDATA / "json-parsing" / "test_parsing"
    doc = _same_both_ways([folder], groups)
    named = {f["path"]: f for f in doc["files"]}
    # source: JSONTestSuite (test_parsing): y_ documents are valid JSON (RFC 8259)
    valid = sorted(p.name for p in folder.glob("y_*.json"))
    assert valid and all(named[n]["complete"] for n in valid)
    assert all(not any(i["severity"] == "error" for i in named[n]["issues"]) for n in valid)


def test_csv_edge_cases_json_as_a_folder(groups: list[int]) -> None:
    folder = SHARED_TESTDATA / "csv-edge-cases" / "json"
    doc = _same_both_ways([folder], groups)
    # source: Python's json module: each document is an array, one row per element
    for f in doc["files"]:
        got = json.loads((folder / f["path"]).read_text(encoding="utf-8"))
        assert f["rows"] == (len(got) if isinstance(got, list) else 1), f["path"]


def test_bad_lines_are_named_with_their_file_and_line(tmp_path: Path, groups: list[int]) -> None:
    land = tmp_path / "land"
    _small_folder(land, files=9)
    (land / "ev-004.jsonl").write_bytes(b'{"id": "a", "n": 1}\n{"id": "b", "n": 2}\n{"id": "c", n: 3}\n{"id": "d"}\n')
    (land / "ev-005.json").write_bytes(b'[{"id": "a"},\n {"id": "b",}\n]')
    doc = _same_both_ways([land], groups)
    files = {f["path"]: f for f in doc["files"]}
    # source: RFC 8259 section 4: an object's names are strings; a comma must be followed by a member
    bad_line = [(i["kind"], i["line"]) for i in files["ev-004.jsonl"]["issues"]]
    assert bad_line == [("malformed-json", 3)]
    assert files["ev-004.jsonl"]["rows"] == 3  # the lines before and after it are read
    bad_doc = [(i["kind"], i["line"]) for i in files["ev-005.json"]["issues"]]
    assert bad_doc == [("malformed-json", 2)]
    assert files["ev-005.json"]["rows"] == 0
    # the other files are all read: their rows are what Python's json module finds in them
    for name, f in files.items():
        if name not in ("ev-004.jsonl", "ev-005.json"):
            text = (land / name).read_text(encoding="utf-8")
            want = len(text.splitlines()) if name.endswith(".jsonl") else len(json.loads(text))
            assert (f["rows"], f["issues"]) == (want, []), name
