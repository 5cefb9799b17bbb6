"""Start-up stays light: `driftline --version` and `driftline scan --help` import no reader,
renderer, gate, recommender or heavy library, so an eager import cannot creep back in.

A test of which modules are loaded, never of time (timing belongs to scripts/bench). Each run is
a fresh interpreter that runs the console script's entry point, then writes the names in
sys.modules, which holds every module loaded so far.
# source: Python docs, sys.modules ("a dictionary that maps module names to modules which have
# already been loaded")
"""

from __future__ import annotations

import importlib.metadata
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

import driftline

SRC = str(Path(driftline.__file__).resolve().parents[1])

# Runs driftline's console-script entry point (pyproject's [project.scripts]) with the given
# arguments, then writes the loaded modules' names to the file named by the first argument.
# main ends the process with os._exit (cli/__init__.py, _leave): the wrapper writes the list there.
WRAPPER = """
import json, os, sys
out, args = sys.argv[1], sys.argv[2:]
sys.argv = ["driftline", *args]
real_exit = os._exit
def written_exit(code):
    with open(out, "w") as f:
        json.dump({"code": code, "modules": sorted(sys.modules)}, f)
    real_exit(code)
os._exit = written_exit
from driftline.cli import main
main()
"""

# Packages and modules neither command needs (a name stands for the module and its submodules).
HEAVY = (
    "jinja2",
    "sqlglot",
    "pyiceberg",
    "polars",
    "dask",
    "distributed",
    "duckdb",
    "pydantic",  # typer's coercion of option values: no value to coerce before a verb's --help
    "pyarrow",  # pyarrow.dataset, .compute, .csv, .json, .parquet with it
    "driftline._api",
    "driftline.emit.html",
    "driftline.emit.terminal",
    "driftline.emit.landing_text",
    "driftline.emit.schemas",
    "driftline.gate",
    "driftline.recommendation",
    "driftline.results.profile",
    "driftline.results.report",
    "driftline.results.levels",
    "driftline.scanning",
    "driftline.sources",
    "driftline.observe",
    "driftline.core.lattice",
)


def _loaded(tmp_path: Path, *args: str) -> tuple[object, list[str], str]:
    """The exit code, the modules loaded and the standard output of `driftline ARGS`."""
    out = tmp_path / "modules.json"
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(filter(None, [SRC, os.environ.get("PYTHONPATH")]))}
    run = subprocess.run(
        [sys.executable, "-c", WRAPPER, str(out), *args], capture_output=True, text=True, env=env, timeout=120
    )
    assert run.returncode == 0, run.stderr
    found = json.loads(out.read_text())
    return found["code"], found["modules"], run.stdout


def _heavy(modules: list[str]) -> list[str]:
    return [m for m in modules if any(m == h or m.startswith(h + ".") for h in HEAVY)]


def test_version_imports_no_verb_and_nothing_heavy(tmp_path):
    code, modules, stdout = _loaded(tmp_path, "--version")
    assert code == 0
    # source: the installed distribution's metadata (importlib.metadata), the version pip sees
    assert stdout == f"driftline {importlib.metadata.version('driftline')}\n"
    assert _heavy(modules) == []
    assert "rich" not in {m.split(".")[0] for m in modules}  # the version is one print
    assert not [m for m in modules if m.startswith("driftline.cli.") and m.endswith("_cmd")]


def test_scan_help_imports_the_scan_verb_alone_and_nothing_heavy(tmp_path):
    code, modules, stdout = _loaded(tmp_path, "scan", "--help")
    assert code == 0
    assert stdout.startswith("Usage: driftline scan [OPTIONS] PATH...\n")
    words = " ".join(stdout.split())  # click wraps the help to the terminal's width
    assert "--fail-at LEVEL" in words and "(breaking, widening, info)" in words  # the level names, lightly
    assert "driftline.cli.scan_cmd" in modules  # the wrapper really ran the verb's help
    assert [m for m in modules if m.endswith("_cmd")] == ["driftline.cli.scan_cmd"]
    assert _heavy(modules) == []


def test_schema_help_imports_the_schema_verb_alone_and_nothing_heavy(tmp_path):
    # The help names the schema files and SQL dialects (core/schemaformats.py) without the
    # recommender, the writers or sqlglot, whose dialect list it once imported.
    code, modules, stdout = _loaded(tmp_path, "schema", "--help")
    assert code == 0
    assert stdout.startswith("Usage: driftline schema [OPTIONS] PATH...\n")
    words = " ".join(stdout.split())
    assert "one of: json-schema, arrow, arrow-text, sql, avro, iceberg, spark." in words
    assert "SQL dialect of --to sql: duckdb, postgres, spark, trino, bigquery, snowflake, sqlite" in words
    assert [m for m in modules if m.endswith("_cmd")] == ["driftline.cli.schema_cmd"]
    assert _heavy(modules) == []
    assert "rich" not in {m.split(".")[0] for m in modules}


def test_the_guard_sees_an_eager_import(tmp_path):
    # The same wrapper on a command that reads data loads the readers: the check can fail.
    data = tmp_path / "a.jsonl"
    data.write_text('{"x": 1}\n')
    code, modules, _ = _loaded(tmp_path, "scan", str(data), "-q")
    assert code == 0
    assert {"pyarrow", "driftline.sources.jsonfile", "driftline._api"} <= set(modules)


def test_a_scan_imports_neither_pydantic_nor_the_gate(tmp_path):
    # typer coerces flag values through pydantic; a verb's defaults and plain values are settled
    # without it (cli/plainvalues.py), and the gate is read only for a config file's [check] table.
    data = tmp_path / "a.jsonl"
    data.write_text('{"x": 1}\n')
    code, modules, _ = _loaded(tmp_path, "scan", str(data), "-q", "--batch-rows", "100", "--include", "*.jsonl")
    assert code == 0
    assert "driftline.sources.jsonfile" in modules  # the scan really read the file
    assert [m for m in modules if m.split(".")[0] == "pydantic" or m.startswith("driftline.gate")] == []


@pytest.mark.parametrize("name", driftline.__all__)
def test_the_public_surface_loads_on_first_use(name):
    # `import driftline` stays light; each public name is there when asked for (PEP 562).
    env = {**os.environ, "PYTHONPATH": os.pathsep.join(filter(None, [SRC, os.environ.get("PYTHONPATH")]))}
    code = (
        "import sys, driftline\n"
        "light = 'pyarrow' not in sys.modules and 'driftline._api' not in sys.modules\n"
        f"value = getattr(driftline, {name!r})\n"
        f"print(light, {name!r} in dir(driftline), {name!r} in vars(driftline))"
    )
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert run.stdout == "True True True\n", run.stderr


def test_every_verb_is_named_where_the_group_finds_it():
    # A verb module registers its verbs on import; the group imports it by VERBS. A verb left out
    # of VERBS would be missing from `driftline --help` in a fresh process: every *_cmd module's
    # verbs are named there, with their own module.
    import importlib

    from driftline.cli.app import VERBS, app

    folder = Path(driftline.__file__).parent / "cli"
    for path in sorted(folder.glob("*_cmd.py")):
        importlib.import_module(f"driftline.cli.{path.stem}")
    found = {info.name: info.callback.__module__ for info in app.registered_commands}  # type: ignore[union-attr]
    assert found == VERBS


@pytest.mark.parametrize("verb", ["check", "diff"])
def test_the_gate_verbs_help_loads_no_comparison_and_no_reader(tmp_path, verb):
    code, modules, stdout = _loaded(tmp_path, verb, "--help")
    assert code == 0
    assert stdout.startswith(f"Usage: driftline {verb} [OPTIONS] ")
    words = " ".join(stdout.split())
    # the names the help lists: the diff's kinds of change, the policy's keys
    assert ("added" in words and "null-share" in words) if verb == "diff" else 'type_change "fail"' in words
    gate = [m for m in modules if m.startswith("driftline.gate.")]
    assert gate == ["driftline.gate.diff_kinds", "driftline.gate.policy"]  # the help's names, alone
    assert [m for m in _heavy(modules) if not m.startswith("driftline.gate")] == []  # the package and those two
