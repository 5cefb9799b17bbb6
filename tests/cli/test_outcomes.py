"""Outcomes that used to be silent or to contradict themselves, as the command line says them:
files of other extensions, a folder of bad files, --where that keeps nothing, one file named,
click's own usage errors, byte sizes in the config file."""

from __future__ import annotations

import gzip
import os
import subprocess
import sys
from pathlib import Path

EXE = [sys.executable, "-m", "driftline.cli"]


def run(*args: str, cwd: Path) -> subprocess.CompletedProcess[str]:
    # A wide terminal: a line of the summary is one line however long the temporary path is.
    env = {**os.environ, "COLUMNS": "200"}
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120, cwd=cwd, env=env)


def _partitioned(root: Path) -> Path:
    """Two day=... partitions of JSON Lines; the second holds a notes.txt beside its data."""
    for day, rows in (("2026-11-01", '{"x": 1}\n{"x": 2}\n'), ("2026-11-02", '{"x": 3}\n')):
        folder = root / "landing" / f"day={day}"
        folder.mkdir(parents=True)
        (folder / "part-0.jsonl").write_text(rows)
    # Comma-separated text: Python's csv.Sniffer would take it for CSV (two columns).
    (root / "landing" / "day=2026-11-02" / "notes.txt").write_text("checked by, Ana\nnext run, Monday\n")
    return root / "landing"


def test_a_text_file_in_a_partition_is_skipped_and_named_not_read_as_csv(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing", cwd=tmp_path)
    assert res.returncode == 0
    lines = res.stdout.splitlines()
    # common practice: a .txt is not a data format; only the sniffing option reads it
    assert lines[1].startswith("2 files (2 jsonl), 3 rows, ")
    assert ", 1 field, 1 skipped, 0 file errors, " in lines[1]
    assert "skipped for their extension: day=2026-11-02/notes.txt (--sniff-unknown reads them)" in " ".join(lines)
    sniffed = run("scan", "landing", "--sniff-unknown", cwd=tmp_path)
    # source: RFC 4180 section 2 item 3 (a header line, then records): the notes give 1 row of their 2 lines
    assert sniffed.stdout.splitlines()[1].startswith("3 files (1 csv, 2 jsonl), 4 rows, ")


def test_a_text_file_is_listed_as_skipped_in_the_json_report(tmp_path: Path):
    import json

    _partitioned(tmp_path)
    res = run("scan", "landing", "--json", "-", "-q", cwd=tmp_path)
    report = json.loads(res.stdout)
    assert report["skipped"] == [{"path": "day=2026-11-02/notes.txt", "reason": "other-extension"}]
    assert [f["path"] for f in report["files"]] == ["day=2026-11-01/part-0.jsonl", "day=2026-11-02/part-0.jsonl"]


def test_a_one_table_scan_of_a_root_of_datasets_names_the_text_file_too(tmp_path: Path):
    _partitioned(tmp_path)
    (tmp_path / "landing").rename(tmp_path / "orders")
    (tmp_path / "root").mkdir()
    (tmp_path / "orders").rename(tmp_path / "root" / "orders")
    (tmp_path / "root" / "users").mkdir()
    (tmp_path / "root" / "users" / "u.csv").write_text("id,name\n1,a\n")
    for extra in ((), ("--one-table",)):
        res = run("scan", "root", *extra, cwd=tmp_path)
        assert res.returncode == 0
        joined = " ".join(res.stdout.split())
        assert "skipped for their extension: orders/day=2026-11-02/notes.txt" in joined or (
            "skipped for their extension: day=2026-11-02/notes.txt" in joined
            and "Skipped: 1 other-extension (orders/day=2026-11-02/notes.txt)" in joined
        )


def _bad_folder(root: Path) -> Path:
    """5 JSON Lines files, none giving a row: 3 not JSON at all, 2 empty."""
    folder = root / "bad"
    folder.mkdir()
    for i in (1, 2, 3):
        (folder / f"f{i}.jsonl").write_bytes(b"\x00\x01garbage{{{\n")
    for i in (4, 5):
        (folder / f"f{i}.jsonl").write_bytes(b"")
    return folder


def test_a_folder_of_bad_and_empty_files_counts_them_one_way(tmp_path: Path):
    _bad_folder(tmp_path)
    res = run("scan", "bad", cwd=tmp_path)
    assert res.returncode == 2
    # The summary goes to stderr when nothing was read (stdout holds no data).
    assert res.stdout == ""
    lines = res.stderr.splitlines()
    assert ", 0 rows, " in lines[1] and ", 3 file errors, " in lines[1] + " "
    assert "No drift" not in res.stderr
    assert "Nothing to compare: no file gave a row." in lines
    assert "Fields" not in res.stderr  # no empty field table
    assert lines[-1] == (
        "error: nothing readable: 3 of the 5 files failed and the other 2 hold no row (see the problems above)"
    )


def test_the_html_of_a_folder_of_bad_files_gives_no_drift_verdict(tmp_path: Path):
    _bad_folder(tmp_path)
    res = run("scan", "bad", "--html", "r.html", cwd=tmp_path)
    assert res.returncode == 2
    page = (tmp_path / "r.html").read_text()
    # The changes list and the timelines say the same as the terminal.
    assert page.count("Nothing to compare: no file gave a row.") == 2
    assert "No drift:" not in page


def test_several_errors_per_file_are_counted_over_their_files(tmp_path: Path):
    folder = tmp_path / "cut"
    folder.mkdir()
    whole = gzip.compress(b'{"a": 1}\n')
    for i in range(1, 6):
        # source: RFC 1952 section 2.2 (a member ends with CRC32 and ISIZE): cut, it is truncated
        (folder / f"f{i}.jsonl.gz").write_bytes(whole[:15])
    res = run("scan", "cut", cwd=tmp_path)
    assert res.returncode == 2
    head = " ".join(res.stderr.split("\n\n")[0].split())
    assert ", 10 file errors in 5 files, " in head
    assert res.stderr.endswith("error: nothing readable: every one of the 5 files failed (see the problems above)\n")
    assert "No drift" not in res.stderr


def test_where_with_an_unknown_key_names_it_and_the_known_keys(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing", "--where", "daye>=2026-11-01", cwd=tmp_path)
    assert (res.returncode, res.stdout) == (2, "")
    assert res.stderr == (
        "error: --where 'daye>=2026-11-01' names the partition key 'daye', which no file has; "
        "the partition keys are: day\n"
    )


def test_where_with_a_reversed_operator_is_malformed_and_lists_the_operators(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing", "--where", "day=>2026-11-01", cwd=tmp_path)
    assert (res.returncode, res.stdout) == (2, "")
    assert res.stderr == (
        "error: malformed --where 'day=>2026-11-01': '=>' is not an operator; write key OP value, "
        "e.g. 'day>=2026-11-01', with OP one of = == != < <= > >=\n"
    )


def test_where_that_keeps_no_file_says_the_filter_removed_every_file(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing", "--where", "day>=2026-12-01", cwd=tmp_path)
    assert (res.returncode, res.stdout) == (2, "")
    # source: ISO 8601 calendar dates (YYYY-MM-DD) order as text: 2026-12-01 is after both days
    assert res.stderr == (
        "error: the filter removed every file (2 files matched none of --where 'day>=2026-12-01'; "
        "day runs from 2026-11-01 to 2026-11-02)\n"
    )
    kept = run("scan", "landing", "--where", "day>=2026-11-02", cwd=tmp_path)
    assert kept.returncode == 0 and kept.stdout.splitlines()[1].startswith("1 file (1 jsonl), 1 row, ")


def test_the_header_names_the_path_as_typed(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing/day=2026-11-01/part-0.jsonl", cwd=tmp_path)
    assert res.returncode == 0
    lines = res.stdout.splitlines()
    assert lines[0] == "driftline scan landing/day=2026-11-01/part-0.jsonl"  # the file, not its folder
    assert lines[1].startswith("1 file (1 jsonl), 2 rows, ")
    folder = run("scan", "landing/day=2026-11-01/", cwd=tmp_path)
    assert folder.stdout.splitlines()[0] == "driftline scan landing/day=2026-11-01/"  # not the absolute path
    both = run("scan", "landing/day=2026-11-01", "landing/day=2026-11-02", cwd=tmp_path)
    assert both.stdout.splitlines()[0] == f"driftline scan {tmp_path / 'landing'}"  # several: their common folder


# source: click's usage errors keep their usage line and help hint (click.exceptions.UsageError.show);
# only the last line reads as ours, and the exit code stays 2 (README exit codes: 2 = usage error).
USAGE = "Usage: driftline scan [OPTIONS] PATH...\nTry 'driftline scan -h' for help.\n\n"


def test_an_unknown_option_reads_error_like_ours(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing", "--format", "json", cwd=tmp_path)
    assert (res.returncode, res.stdout) == (2, "")
    assert res.stderr == USAGE + "error: no such option: --format\n"


def test_a_missing_argument_reads_error_like_ours(tmp_path: Path):
    res = run("scan", "-q", cwd=tmp_path)
    assert (res.returncode, res.stderr) == (2, USAGE + "error: missing argument 'PATH...'\n")


def test_a_bad_value_and_an_unknown_verb_read_error_like_ours(tmp_path: Path):
    _partitioned(tmp_path)
    res = run("scan", "landing", "--batch-rows", "0", cwd=tmp_path)
    assert res.returncode == 2
    assert res.stderr.startswith(USAGE + "error: invalid value for '--batch-rows': ")
    verb = run("scna", "landing", cwd=tmp_path)
    assert (verb.returncode, verb.stderr) == (
        2,
        "Usage: driftline [OPTIONS] COMMAND [ARGS]...\nTry 'driftline -h' for help.\n\n"
        "error: no such command 'scna'. Did you mean 'scan', 'schema'?\n",
    )


def test_a_usage_error_names_its_class_with_debug(tmp_path: Path):
    res = run("--debug", "scan", "x", "--fromat", "json", cwd=tmp_path)
    assert (res.returncode, res.stderr) == (2, USAGE + "error (NoSuchOption): no such option: --fromat\n")


def test_help_and_version_still_exit_0(tmp_path: Path):
    assert run("--version", cwd=tmp_path).returncode == 0
    helped = run("scan", "-h", cwd=tmp_path)
    assert (helped.returncode, helped.stdout.splitlines()[0]) == (0, "Usage: driftline scan [OPTIONS] PATH...")
    alone = run(cwd=tmp_path)  # no verb: the help, as before, with click's exit code for it
    assert alone.returncode == 2 and "Usage: driftline [OPTIONS] COMMAND [ARGS]..." in alone.stdout + alone.stderr


def test_byte_sizes_with_units_in_the_config_file(tmp_path: Path):
    import json

    _partitioned(tmp_path)
    # source: IEC 80000-13 item 13-9.a: 1 KiB = 1024 B
    (tmp_path / "driftline.toml").write_text('[scan]\nbatch_bytes = "1 KiB"\nmax_record_bytes = "10 B"\n')
    res = run("scan", "landing", "--json", "-", "-q", cwd=tmp_path)
    assert res.returncode == 0
    assert json.loads(res.stdout)["options"]["batch_bytes"] == 1024
    # '{"x": 3}' is 8 bytes: over "7 B", so the limit took the unit (the file fails, exit 2)
    (tmp_path / "driftline.toml").write_text('[scan]\nmax_record_bytes = "7 B"\n')
    cut = run("scan", "landing/day=2026-11-02/part-0.jsonl", "--json", "-", "-q", cwd=tmp_path)
    issues = [(i["kind"], i["message"]) for f in json.loads(cut.stdout)["files"] for i in f["issues"]]
    assert issues == [("too-large", "line longer than 7 bytes (--max-record-bytes); skipped")]


def test_a_bad_byte_size_in_the_config_file_names_the_file_and_key(tmp_path: Path):
    _partitioned(tmp_path)
    (tmp_path / "driftline.toml").write_text('[scan]\nbatch_bytes = "64 MB s"\n')
    res = run("scan", "landing", cwd=tmp_path)
    assert (res.returncode, res.stdout) == (2, "")
    assert res.stderr == (
        "error: config file 'driftline.toml' [scan]: batch_bytes = '64 MB s' is not a byte size; write a number "
        "of bytes, or one with a unit: KiB, MiB, GiB, TiB (powers of 1024) or kB, MB, GB, TB (powers of 1000), "
        "e.g. 64MiB\n"
    )
    # source: IEC 80000-13 item 13-9.c: 2 GiB = 2 × 1024³ B, past the batch limit of 1 GiB (core/ranges.py)
    (tmp_path / "driftline.toml").write_text('[scan]\nbatch_bytes = "2 GiB"\n')
    big = run("scan", "landing", cwd=tmp_path)
    assert (big.returncode, big.stderr) == (
        2,
        "error: config file 'driftline.toml' [scan]: batch_bytes = '2 GiB' is 2,147,483,648 bytes, "
        "outside 1 B..1 GiB\n",
    )


def test_counts_of_one_read_in_the_singular_in_the_limit_note(tmp_path: Path):
    (tmp_path / "a.jsonl").write_text('{"a": 1, "b": 2}\n')
    res = run("scan", "a.jsonl", "--max-paths", "1", cwd=tmp_path)
    # common practice (English grammar): one value, one path, is counted
    assert (
        "warning  field paths capped at 1 (--max-paths): 1 value of 1 more path (counted per batch) "
        "is counted as other fields"
    ) in res.stdout


def test_a_csv_preamble_of_one_line_reads_in_the_singular(tmp_path: Path):
    (tmp_path / "b.csv").write_text("Sales report\nid,name\n1,a\n2,b\n3,c\n")
    res = run("scan", "b.csv", cwd=tmp_path)
    assert "dialect: ',' \"-quoted, header, LF, 1 preamble line skipped (confidence " in res.stdout
    assert "warning  1 line before the header skipped (comments, a title or notes)" in res.stdout


def test_a_narrowing_of_one_value_reads_the_only_value_fits(tmp_path: Path):
    import json

    (tmp_path / "then").mkdir()
    (tmp_path / "then" / "c.jsonl").write_text('{"a": 1.5}\n')
    assert run("scan", "then", "--json", "base.json", "-q", cwd=tmp_path).returncode == 0
    (tmp_path / "now").mkdir()
    (tmp_path / "now" / "b.jsonl").write_text('{"a": 1}\n')
    res = run("check", "now", "--baseline", "base.json", "--json", "-", cwd=tmp_path)
    # source: RFC 8259 section 6: 1 is an integer, 1.5 is not; the one value fits int64
    verdict = json.loads(res.stdout)
    messages = [f["message"] for key in ("violations", "warnings", "allowed") for f in verdict[key]]
    assert "the only value fits int64" in messages


def test_schema_file_headers_count_one_row_in_one_file(tmp_path: Path):
    (tmp_path / "b.jsonl").write_text('{"a": 1}\n')
    assert run("schema", "b.jsonl", "--to", "sql", "--out", "s.sql", "-q", cwd=tmp_path).returncode == 0
    assert (tmp_path / "s.sql").read_text().splitlines()[
        0
    ] == f"-- driftline-output: driftline schema: {tmp_path} (1 row in 1 file)"
    assert run("schema", "b.jsonl", "--to", "arrow-text", "--out", "s.txt", "-q", cwd=tmp_path).returncode == 0
    assert (tmp_path / "s.txt").read_text().splitlines()[0].endswith(f"for {tmp_path} (1 row)")
