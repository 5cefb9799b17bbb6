"""The options value (driftline.core.options): one normaliser, one config file, one precedence.

Precedence is a flag (or keyword) over the config file over the default, for the library
and the command line alike; an unknown key names itself and its file.
"""

from __future__ import annotations

import json
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

import driftline
from conftest import write_lines
from driftline.core.options import ScanOptions, find_config, load_config

EXE = [sys.executable, "-m", "driftline.cli"]


@pytest.fixture()
def land(tmp_path: Path) -> Path:
    rows = [f"{i};{i * 2}" for i in range(12)]
    write_lines(tmp_path / "land" / "day=1" / "a.csv", ["a;b", *rows])
    write_lines(tmp_path / "land" / "day=2" / "a.csv", ["a;b", *rows])
    return tmp_path / "land"


def scan_options(*args: str, cwd: Path) -> dict[str, object]:
    res = subprocess.run(
        [*EXE, "scan", *args, "--json", "-", "-q"], capture_output=True, text=True, timeout=120, cwd=cwd
    )
    assert res.returncode == 0, res.stderr
    report = json.loads(res.stdout)
    return {"batch_rows": report["options"]["batch_rows"], "files": [f["path"] for f in report["files"]]}


def test_batch_rows_zero_is_an_option_error_from_every_library_call(land: Path, tmp_path: Path):
    contract = tmp_path / "c.schema.json"
    contract.write_text('{"type": "object"}')
    calls = [
        lambda: driftline.scan(land, batch_rows=0),
        lambda: driftline.check(land, baseline=contract, batch_rows=0),
        lambda: driftline.diff(land, land, batch_rows=0),
        lambda: driftline.recommend(land, batch_rows=0),
        lambda: ScanOptions().merged(batch_rows=0),
    ]
    for call in calls:
        with pytest.raises(driftline.OptionError) as info:
            call()
        assert isinstance(info.value, driftline.DriftlineError)
        assert str(info.value) == "batch_rows must be an integer from 1 to 1,099,511,627,776, got 0"


def test_bad_values_are_option_errors_naming_the_option(land: Path):
    cases = {
        "jobs": (0, "jobs must be an integer"),
        "engine": ("spark", "unknown engine 'spark'; choose local or dask"),
        "where": ("day~1", "malformed --where 'day~1'"),
        "include_hidden": ("yes", "include_hidden must be true or false, got 'yes'"),
        "connect_timeout": (-1, "--connect-timeout must be between 0 and 86400 seconds, got -1"),
        "encoding": ("base64", "'base64' is not a text encoding"),
        "batch_row": (5, "unknown option 'batch_row' (did you mean 'batch_rows'?)"),
    }
    for name, (value, message) in cases.items():
        with pytest.raises(driftline.OptionError, match=re.escape(message)):
            driftline.scan(land, **{name: value})


def test_options_are_normalised_once_and_immutable():
    o = ScanOptions().merged(paths="land", include="*.csv", where="day>=2", csv_dialect="*.csv:delimiter=semicolon")
    assert (o.paths, o.include, [str(c) for c in o.where], o.read.csv_dialects) == (
        ("land",),
        ("*.csv",),
        ["day>=2"],
        ("*.csv:delimiter=semicolon",),
    )
    with pytest.raises(AttributeError):
        o.jobs = 2  # type: ignore[misc]
    assert o.merged() is o and hash(o.read) == hash(ScanOptions().merged(csv_dialect="*.csv:delimiter=semicolon").read)


def test_config_precedence_flag_over_file_over_default(land: Path, tmp_path: Path):
    work = tmp_path / "work"
    work.mkdir()
    # source: the defaults of driftline.core.options (DEFAULT_BATCH_ROWS = 65,536)
    assert scan_options(str(land), cwd=work)["batch_rows"] == 65_536
    (work / "driftline.toml").write_text('[scan]\nbatch_rows = 7\nwhere = ["day>=2"]\ndelimiter = ";"\n')
    assert scan_options(str(land), cwd=work) == {"batch_rows": 7, "files": ["day=2/a.csv"]}
    assert scan_options(str(land), "--batch-rows", "5", cwd=work) == {"batch_rows": 5, "files": ["day=2/a.csv"]}
    # A flag given at its default value still wins over the file.
    assert scan_options(str(land), "--batch-rows", "65536", cwd=work)["batch_rows"] == 65_536
    # The library: keyword over options (from the file) over default.
    from_file = ScanOptions.from_file(work / "driftline.toml")
    assert driftline.scan(land).options["batch_rows"] == 65_536
    assert driftline.scan(land, options=from_file).options["batch_rows"] == 7
    assert driftline.scan(land, options=from_file, batch_rows=5).options["batch_rows"] == 5
    # --config names another file: it is used instead of the one found here.
    other = tmp_path / "other.toml"
    other.write_text("[scan]\nbatch_rows = 3\n")
    assert scan_options(str(land), "--config", str(other), cwd=work) == {
        "batch_rows": 3,
        "files": ["day=1/a.csv", "day=2/a.csv"],
    }


def test_driftline_toml_wins_over_pyproject(land: Path, tmp_path: Path):
    work = tmp_path / "proj"
    work.mkdir()
    (work / "pyproject.toml").write_text('[project]\nname = "x"\n\n[tool.driftline.scan]\nbatch_rows = 11\n')
    assert tomllib.loads((work / "pyproject.toml").read_text())["tool"]["driftline"]["scan"]["batch_rows"] == 11
    assert find_config(work) == work / "pyproject.toml"
    assert scan_options(str(land), cwd=work)["batch_rows"] == 11
    (work / "driftline.toml").write_text("[scan]\nbatch_rows = 13\n")
    assert find_config(work) == work / "driftline.toml"
    assert scan_options(str(land), cwd=work)["batch_rows"] == 13
    # A pyproject.toml without a [tool.driftline] table is not a config file.
    (work / "driftline.toml").unlink()
    (work / "pyproject.toml").write_text('[project]\nname = "x"\n')
    assert find_config(work) is None


def test_an_unknown_key_names_the_key_and_the_file(land: Path, tmp_path: Path):
    work = tmp_path / "work"
    work.mkdir()
    config = work / "driftline.toml"
    config.write_text("[scan]\nbatch_row = 7\n")
    unknown = "[scan]: unknown option 'batch_row' (did you mean 'batch_rows'?); known options: "
    with pytest.raises(driftline.OptionError) as info:
        load_config(config)
    assert str(info.value).startswith(f"config file {str(config)!r} {unknown}")
    expected = f"config file 'driftline.toml' {unknown}"  # as found in the current folder
    for verb in (["scan", str(land)], ["schema", str(land)], ["diff", str(land), str(land)]):
        res = subprocess.run([*EXE, *verb], capture_output=True, text=True, timeout=120, cwd=work)
        assert res.returncode == 2 and res.stderr.startswith("error: " + expected), res.stderr
        assert "Traceback" not in res.stderr
    config.write_text("[scna]\nbatch_rows = 7\n")
    res = subprocess.run([*EXE, "scan", str(land)], capture_output=True, text=True, timeout=120, cwd=work)
    assert res.returncode == 2
    assert res.stderr.startswith("error: config file 'driftline.toml': unknown key 'scna' (did you mean [scan]?)")
    config.write_text('[scan]\nexample_values = "hide"\n')
    moved = re.escape("[scan]: unknown key 'example_values' (it belongs in [output])")
    with pytest.raises(driftline.OptionError, match=moved):
        load_config(config)


def test_one_config_file_serves_every_verb(land: Path, tmp_path: Path):
    work = tmp_path / "work"
    work.mkdir()
    (work / "driftline.toml").write_text(
        '[scan]\ndelimiter = ";"\n\n[recommend]\ntimestamp_unit = "ms"\n\n[check]\nnew_field = "warn"\n\n'
        '[output]\nexample_values = "hide"\n'
    )
    res = subprocess.run(
        [*EXE, "schema", str(land), "--rules", "-", "-q"], capture_output=True, text=True, timeout=120, cwd=work
    )
    assert res.returncode == 0, res.stderr
    rules = json.loads(res.stdout)
    # The [scan] delimiter splits the columns; the [recommend] table is in the rules' options.
    assert [f["path"] for f in rules["fields"]] == ["a", "b"]
    assert rules["options"]["timestamp_unit"] == "ms"
    contract = tmp_path / "c.schema.json"
    contract.write_text(json.dumps({"type": "object", "properties": {"a": {"type": "integer"}}}))
    res = subprocess.run(
        [*EXE, "check", str(land), "-b", str(contract), "--json", "-", "-q"],
        capture_output=True,
        text=True,
        timeout=120,
        cwd=work,
    )
    verdict = json.loads(res.stdout)
    # The [check] table is the policy: the new field b is a warning, not a violation.
    assert (res.returncode, verdict["passed"], [w["field"] for w in verdict["warnings"]]) == (0, True, ["b"])
