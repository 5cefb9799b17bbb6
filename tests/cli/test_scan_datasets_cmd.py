"""`driftline scan ROOT` on a root of several datasets, through the real console script: the
overview, --dataset, --one-table, the report set, one HTML page per dataset, exit codes, and the
README's commands and overview run as written (the issue's Done-when root from
tests/fixtures/datasets/make_layouts.py, copied as landing/).
"""

from __future__ import annotations

import json
import re
import subprocess
from pathlib import Path

import pytest

import driftline
from _cli import ENV, EXE, make_layouts
from conftest import ROOT


def run(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess[str]:
    return subprocess.run([*EXE, *args], capture_output=True, text=True, timeout=120, env=ENV, cwd=cwd)


@pytest.fixture(scope="module")
def work(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("cli-landing")
    make_layouts().main(out, ["done_when", "uneven_depth"])
    (out / "done_when").rename(out / "landing")
    return out


def _table_rows(out: str) -> dict[str, list[str]]:
    """The Datasets table's rows (under its heading rule, up to the blank line): name → the other cells."""
    lines = out.splitlines()
    start = next(i for i, ln in enumerate(lines) if ln.split() and ln.split()[0] == "dataset" and "files" in ln)
    rows = {}
    for line in lines[start + 2 :]:
        if not line.strip():
            break
        cells = re.split(r"\s{2,}", line.strip())
        rows[cells[0]] = cells[1:]
    return rows


def test_the_overview_names_three_datasets_then_each_summary(work: Path) -> None:
    res = run("scan", "landing/", "--full-table", cwd=work)
    assert res.returncode == 0, res.stderr
    out = res.stdout
    assert out.splitlines()[1] == "3 datasets, 8 files, 17 rows, 1.6 KiB; 0 loose files, 3 skipped"
    # rows: 3 CSV files of one row, 4 JSON Lines files of 3 rows, 2 Parquet rows (make_layouts.done_when)
    assert _table_rows(out) == {
        "depot_exports": ["3", "3", "132 B", "csv", "–", "4", "0"],
        "readings": ["4", "12", "480 B", "jsonl", "region, day", "4", "0"],
        "stations.parquet": ["1", "2", "1.0 KiB", "parquet", "–", "3", "0"],
    }
    assert "Skipped: 2 marker, 1 other-extension (_SUCCESS, depot_exports/README.txt, readings/_SUCCESS)" in out
    headings = [ln.split(" ─")[0] for ln in out.splitlines() if ln.startswith("dataset ") and " ─" in ln]
    assert headings == ["dataset depot_exports", "dataset readings", "dataset stations.parquet"]
    # Each dataset's summary is the one a scan of its folder alone prints (its duration aside).
    alone = run("scan", "landing/readings", "--full-table", cwd=work).stdout
    part = out.split("dataset readings ")[1].split("\n", 1)[1].split("\ndataset stations.parquet")[0]
    strip = re.compile(r"\d+\.\d\d s\b")
    assert strip.sub("", part).rstrip("\n") == strip.sub("", alone).rstrip("\n")
    # No field of any dataset shows an absence: the absent column holds only '–'.
    absent = [ln.split("│")[4].strip() for ln in out.splitlines() if ln.startswith("│") and ln.count("│") == 7]
    assert absent and set(absent) == {"–"}


def test_dataset_picks_and_an_unknown_name_is_exit_2(work: Path) -> None:
    res = run("scan", "landing/", "--dataset", "readings", "--dataset", "stations.parquet", cwd=work)
    assert res.returncode == 0, res.stderr
    assert list(_table_rows(res.stdout)) == ["readings", "stations.parquet"]
    assert res.stdout.splitlines()[1].startswith("2 datasets (of 3 found), 5 files, 14 rows")
    bad = run("scan", "landing/", "--dataset", "telemetry", cwd=work)
    assert bad.returncode == 2 and bad.stdout == ""
    assert bad.stderr.strip() == (
        f"error: no dataset named 'telemetry' under {work / 'landing'}; its datasets: 'depot_exports', "
        "'readings', 'stations.parquet'"
    )
    both = run("scan", "landing/", "--dataset", "readings", "--one-table", cwd=work)
    assert both.returncode == 2 and "--dataset picks datasets of one root folder" in both.stderr


def test_one_table_gives_the_blended_scan(work: Path) -> None:
    res = run("scan", "landing/", "--one-table", "--json", "-", cwd=work)
    assert res.returncode == 0, res.stderr
    report = json.loads(res.stdout)
    assert report["format"] == "driftline-report" and report["summary"]["rows"] == 17
    # temp_c is in the 12 readings rows only: absent from the 3 + 2 rows of the other tables.
    assert report["fields"]["temp_c"]["absent"] == 5


def test_a_root_of_one_dataset_prints_as_before(work: Path) -> None:
    plain = run("scan", "uneven_depth", cwd=work)
    whole = run("scan", "uneven_depth", "--one-table", cwd=work)
    assert plain.returncode == whole.returncode == 0
    strip = re.compile(r"\d+\.\d\d s\b")
    assert strip.sub("", plain.stdout) == strip.sub("", whole.stdout)
    assert "Datasets" not in plain.stdout and plain.stderr == ""


def test_a_root_whose_own_files_are_a_table_prints_as_before_and_notes_the_rest(tmp_path: Path) -> None:
    for i in range(3):
        (tmp_path / f"events-{i}.jsonl").write_text(f'{{"id": {i}, "kind": "open"}}\n', encoding="utf-8")
    (tmp_path / "exports").mkdir()
    (tmp_path / "exports" / "a.csv").write_text("depot,qty\nd1,4\n", encoding="utf-8")
    plain, whole = run("scan", str(tmp_path)), run("scan", str(tmp_path), "--one-table")
    strip = re.compile(r"\d+\.\d\d s\b")
    assert strip.sub("", plain.stdout) == strip.sub("", whole.stdout)
    assert " ".join(plain.stderr.split()) == (
        "note: read as one table, as the root's own files are one; discovery sees 2 datasets in it (., exports): "
        "--dataset NAME scans one on its own"
    )


def test_a_flat_folder_of_drifting_files_is_one_table(tmp_path: Path) -> None:
    # Each file shares 1 of 3 names with the next (Jaccard 1/3): five lone files to discovery.
    for i in range(5):
        (tmp_path / f"{i}.jsonl").write_text(f'{{"id": {i}, "f{i}": 1}}\n', encoding="utf-8")
    assert len(driftline.datasets(tmp_path).datasets) == 5
    plain, whole = run("scan", str(tmp_path)), run("scan", str(tmp_path), "--one-table")
    strip = re.compile(r"\d+\.\d\d s\b")
    assert strip.sub("", plain.stdout) == strip.sub("", whole.stdout) and plain.stderr == ""
    assert "5 files (5 jsonl), 5 rows" in plain.stdout


def _picker(page: str) -> tuple[list[tuple[str, str]], list[str]]:
    """The dataset picker of a page: (href, text) of its links, and the text marked as the current page."""
    from html.parser import HTMLParser

    class Picker(HTMLParser):
        def __init__(self) -> None:
            super().__init__()
            self.inside = False
            self.tag: str | None = None
            self.href: str | None = None
            self.links: list[tuple[str, str]] = []
            self.current: list[str] = []

        def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
            a = dict(attrs)
            if tag == "nav" and a.get("aria-label") == "Datasets":
                self.inside = True
            elif self.inside and tag == "a":
                self.tag, self.href = "a", a.get("href")
            elif self.inside and tag == "strong" and a.get("aria-current") == "page":
                self.tag = "strong"

        def handle_endtag(self, tag: str) -> None:
            if tag == "nav":
                self.inside = False
            self.tag = None if tag in ("a", "strong") else self.tag

        def handle_data(self, data: str) -> None:
            if self.tag == "a" and self.href is not None:
                self.links.append((self.href, data))
            elif self.tag == "strong":
                self.current.append(data)

    parser = Picker()
    parser.feed(page)
    return parser.links, parser.current


def test_json_writes_the_report_set_and_html_one_page_per_dataset(work: Path, tmp_path: Path) -> None:
    out, page = tmp_path / "set.json", tmp_path / "page.html"
    res = run("scan", "landing/", "--json", str(out), "--html", str(page), cwd=work)
    assert res.returncode == 0, res.stderr
    assert f"report set written to {out}" in res.stdout
    landing = driftline.load_report_set(out)
    assert list(landing.datasets) == ["depot_exports", "readings", "stations.parquet"]
    assert landing.datasets["readings"] == driftline.scan(work / "landing" / "readings")
    pages = sorted(p.name for p in tmp_path.glob("page.*.html"))
    assert pages == ["page.depot_exports.html", "page.readings.html", "page.stations.parquet.html"]
    assert (tmp_path / "page.readings.html").read_text(encoding="utf-8").startswith("<!-- driftline-output: ")
    # Each page's dataset picker links the other pages by the names they were written under
    # (they sit side by side) and marks its own; links read with Python's html.parser.
    for name in ("depot_exports", "readings", "stations.parquet"):
        links, current = _picker((tmp_path / f"page.{name}.html").read_text(encoding="utf-8"))
        assert current == [name]
        assert links == [(f"page.{o}.html", o) for o in ("depot_exports", "readings", "stations.parquet") if o != name]
        assert all((tmp_path / href).is_file() for href, _ in links)
    assert not page.exists()
    to_stdout = run("scan", "landing/", "--html", "-", cwd=work)
    assert to_stdout.returncode == 2 and "cannot share standard output" in to_stdout.stderr


def test_a_file_problem_stays_in_its_dataset(tmp_path: Path) -> None:
    (tmp_path / "good").mkdir()
    (tmp_path / "good" / "a.jsonl").write_text('{"x": 1}\n', encoding="utf-8")
    (tmp_path / "bad").mkdir()
    # A JSON Lines file whose first line is an object (its head reads) and whose next line is cut.
    (tmp_path / "bad" / "b.jsonl").write_text('{"y": 1, "z": 2}\n{"y": \n', encoding="utf-8")
    res = run("scan", str(tmp_path))
    assert list(_table_rows(res.stdout)) == ["bad", "good"]
    assert res.returncode == 0  # a bad line is a file problem; the file's other rows were read
    good = res.stdout.split("dataset good ")[1]
    assert "File problems (1)" in res.stdout.split("dataset good ")[0] and "File problems" not in good


# -- the README's section, as written ----------------------------------------------------------------


def _readme_section() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    return text.split("### Several tables in one root\n", 1)[1].split("\n### ", 1)[0]


def test_the_readme_commands_run_as_written(work: Path, tmp_path: Path) -> None:
    blocks = re.findall(r"```\n(.*?)```", _readme_section(), re.S)
    commands = [ln.split("  #")[0].strip() for ln in blocks[0].splitlines() if ln.startswith("driftline ")]
    assert len(commands) == 4
    for cmd in commands:
        args = cmd.split()[1:]
        args = [str(tmp_path / a) if a.endswith((".json", ".html")) else a for a in args]
        res = run(*args, cwd=work)
        assert res.returncode == 0, (cmd, res.stderr)
    assert (tmp_path / "page.readings.html").exists() and json.loads((tmp_path / "set.json").read_text())["found"]


def test_the_readme_overview_is_what_the_scan_prints(work: Path) -> None:
    shown = re.findall(r"```\n(.*?)```", _readme_section(), re.S)[1]
    res = run("scan", "landing/", cwd=work)
    printed = res.stdout  # the header names the root as typed: no machine path to hide
    lines = [ln.rstrip() for ln in printed.splitlines()]
    assert [ln.rstrip() for ln in shown.splitlines()] == lines[: len(shown.splitlines())]
