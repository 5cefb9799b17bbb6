"""The incremental state: a rescan reads only new or changed files and equals a full rescan."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from conftest import write_lines
from driftline.core.options import ReadOptions
from driftline.errors import InputPathError, OutputError, ReportVersionError
from driftline.gate.state import STATE_FORMAT, STATE_VERSION, load_state, scan_incremental
from driftline.results.report import dumps, to_dict
from driftline.scanning.run import scan_paths


def _day(folder: Path, day: int, rows: int, *, bad: bool = False) -> Path:
    lines = []
    for i in range(rows):
        value = f'"{i}b"' if bad and i == rows // 2 else str(i * day)
        temp = f"{20 + i / 4}" if day >= 2 else str(20 + i)
        lines.append(f'{{"seq": {value}, "temp": {temp}, "day": {day}, "tags": ["t{i % 3}"]}}')
    return write_lines(folder / f"day={day}" / "part-0.jsonl", lines)


def _same_as_full(run_profile, folder: Path, opts: ReadOptions | None = None) -> None:
    full = scan_paths([folder], read=opts)
    assert run_profile == full
    a, b = to_dict(run_profile), to_dict(full)
    a.pop("duration_s"), b.pop("duration_s")
    assert a == b  # every view, events and examples included, byte for byte in the report


def test_gain_change_and_lose_files(tmp_path):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    for d in (1, 2, 3):
        _day(land, d, 40)
    first = scan_incremental([land], state, read=ReadOptions(batch_rows=16))
    assert (first.read, first.reused, first.dropped) == (3, 0, 0)
    _same_as_full(first.profile, land, ReadOptions(batch_rows=16))

    _day(land, 4, 25, bad=True)  # gains a file
    _day(land, 2, 55)  # changes one (more rows, so a new size)
    (land / "day=3" / "part-0.jsonl").unlink()  # loses one
    again = scan_incremental([land], state, read=ReadOptions(batch_rows=16))
    assert (again.read, again.reused, again.dropped) == (2, 1, 1)
    assert [f.rel for f in again.profile.files] == ["day=1/part-0.jsonl", "day=2/part-0.jsonl", "day=4/part-0.jsonl"]
    _same_as_full(again.profile, land, ReadOptions(batch_rows=16))
    assert any(e.kind == "type-conflict" and e.file == "day=4/part-0.jsonl" for e in again.profile.events)

    still = scan_incremental([land], state, read=ReadOptions(batch_rows=16))
    assert (still.read, still.reused, still.dropped) == (0, 3, 0)
    _same_as_full(still.profile, land, ReadOptions(batch_rows=16))


def test_the_state_file_carries_format_version_and_options(tmp_path):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 3)
    scan_incremental([land], state, verify=True)
    doc = json.loads(state.read_text())
    assert (doc["format"], doc["version"], doc["digest"]) == (STATE_FORMAT, STATE_VERSION, "blake2b-128")
    assert doc["read"]["batch_rows"] == 65_536 and doc["root"] == str(land)
    [entry] = doc["files"]
    assert entry["path"] == "day=1/part-0.jsonl" and len(entry["digest"]) == 32
    loaded = load_state(state)
    assert loaded is not None and loaded.files["day=1/part-0.jsonl"].digest == entry["digest"]


def test_verify_catches_a_rewrite_with_the_same_size_and_mtime(tmp_path):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    f = write_lines(land / "a.jsonl", ['{"x": 1}', '{"x": 2}'])
    scan_incremental([land], state, verify=True)
    st = f.stat()
    f.write_text('{"x": 3}\n{"x": "z"}\n'[: st.st_size].ljust(st.st_size, " "), encoding="utf-8")
    os.utime(f, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert (f.stat().st_size, f.stat().st_mtime_ns) == (st.st_size, st.st_mtime_ns)
    run = scan_incremental([land], state, verify=True)
    assert (run.read, run.reused) == (1, 0)
    _same_as_full(run.profile, land)
    # Without --verify, size and mtime alone cannot see such a rewrite: this is what --verify is for.
    write_lines(land / "a.jsonl", ['{"x": 1}', '{"x": 2}'])
    os.utime(f, ns=(st.st_atime_ns, st.st_mtime_ns))
    scan_incremental([land], state)
    f.write_text('{"x": 3}\n{"x": 4}\n', encoding="utf-8")
    os.utime(f, ns=(st.st_atime_ns, st.st_mtime_ns))
    assert scan_incremental([land], state).reused == 1


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (b"\x00\x01 not json", r"is not a driftline state file \(it is not JSON\); give --state another file name"),
        (
            b'{"format": "driftline-state", "version": 7, "files": []}',
            r"has format version 7; this driftline reads versions 1 and 2; run with --rebuild",
        ),
        (b'{"format": "something", "files": []}', r"is not a driftline state file \(its format is 'something'\)"),
        (b"[1, 2]", r"is not a driftline state file; give --state another file name, or --rebuild"),
    ],
)
def test_foreign_state_is_an_error_and_rebuild_starts_over(tmp_path, content, message):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 4)
    state.write_bytes(content)
    with pytest.raises(ReportVersionError, match=message):
        scan_incremental([land], state)
    assert state.read_bytes() == content  # left as it was
    run = scan_incremental([land], state, rebuild=True)
    assert (run.read, run.reused) == (1, 0)
    assert load_state(state) is not None


@pytest.mark.parametrize(
    ("content", "message"),
    [
        (
            b'{"format": "driftline-state", "version": 1, "root": "/x", "read": {}, "digest": null, '
            b'"tool": {"name": "driftline", "version": "0"}, "files": [{"path": "a"}]}',
            "is damaged at /files/0/format: expected a required key, found none",
        ),
        (
            b'{"format": "driftline-state", "version": 1, "files": [',
            "is damaged at /files/0: expected JSON, found unexpected end of data at line 1, column",
        ),
        (b'{"format": "drift', "is damaged at /format: expected JSON, found unexpected end of data"),
        (b"", 'is damaged at "" (the whole document): expected JSON, found'),
    ],
)
def test_a_damaged_state_is_set_aside_and_everything_is_read_again(tmp_path, content, message):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 4)
    state.write_bytes(content)
    run = scan_incremental([land], state)
    assert (run.read, run.reused) == (1, 0)
    assert run.note is not None and run.note.startswith("warning: state file ") and message in run.note
    assert f"set aside as '{state}.damaged'" in run.note
    assert Path(f"{state}.damaged").read_bytes() == content  # kept as it was, for a look
    assert scan_incremental([land], state).reused == 1  # the new state is whole


def test_a_report_is_not_a_state(tmp_path):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 4)
    state.write_bytes(dumps(scan_paths([land])))
    with pytest.raises(ReportVersionError, match="its format is 'driftline-report'"):
        scan_incremental([land], state)


def test_a_state_of_another_root_is_refused_before_reading(tmp_path):
    state = tmp_path / "state.json"
    _day(tmp_path / "one", 1, 4)
    _day(tmp_path / "two", 1, 4)
    scan_incremental([tmp_path / "one"], state)
    with pytest.raises(ReportVersionError, match="was made for .*one.*, not .*two"):
        scan_incremental([tmp_path / "two"], state)


def test_changed_read_options_read_everything_again(tmp_path):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 30)
    scan_incremental([land], state, read=ReadOptions(batch_rows=8))
    run = scan_incremental([land], state, read=ReadOptions(batch_rows=10))
    assert (run.read, run.reused) == (1, 0) and "read options changed" in (run.note or "")
    _same_as_full(run.profile, land, ReadOptions(batch_rows=10))


def test_parallel_reading_gives_the_same_result(tmp_path):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    for d in (1, 2, 3, 4):
        _day(land, d, 20)
    scan_incremental([land], state, jobs=2)
    _day(land, 5, 20, bad=True)
    run = scan_incremental([land], state, jobs=2)
    assert (run.read, run.reused) == (1, 4)
    _same_as_full(run.profile, land)


def test_an_interrupted_write_keeps_the_earlier_state(tmp_path, monkeypatch):
    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 4)
    scan_incremental([land], state)
    before = state.read_bytes()
    _day(land, 2, 4)

    def fail(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", fail)
    with pytest.raises(OutputError, match="the disk is full; the earlier file, if any, is unchanged"):
        scan_incremental([land], state)
    monkeypatch.undo()
    assert state.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".state.json")] == []  # no temporary left


def test_a_state_file_the_scan_would_read_is_refused(tmp_path):
    land = tmp_path / "landing"
    _day(land, 1, 4)
    with pytest.raises(OutputError, match="lies inside the scanned folder .*pass --write-inside"):
        scan_incremental([land], land / "state.json")
    run = scan_incremental([land], land / ".driftline-state")  # hidden: the scan skips it
    assert run.read == 1
    run = scan_incremental([land], land / "state.json", write_inside=True)  # it carries the marker: skipped
    assert (run.read, [(s.rel, s.reason) for s in run.profile.skipped]) == (1, [(".driftline-state", "hidden")])
    again = scan_incremental([land], land / "state.json", write_inside=True)
    assert (again.reused, [(s.rel, s.reason) for s in again.profile.skipped]) == (
        1,
        [(".driftline-state", "hidden"), ("state.json", "own-output")],
    )
    with pytest.raises(InputPathError, match="--state needs a file name"):
        scan_incremental([land], "-")


def test_a_read_cut_short_is_read_again(tmp_path):
    import gzip

    land, state = tmp_path / "landing", tmp_path / "state.json"
    _day(land, 1, 5)
    whole = gzip.compress(b"".join(b'{"x": %d}\n' % i for i in range(2000)))
    (land / "cut.jsonl.gz").write_bytes(whole[: len(whole) // 2])  # a gzip stream that ends early
    first = scan_incremental([land], state)
    assert not first.profile.file("cut.jsonl.gz").complete
    again = scan_incremental([land], state)
    assert (again.read, again.reused) == (1, 1)  # the cut file again, the whole one from the state
    _same_as_full(again.profile, land)
