"""The public functions and the public Profile and Recommendation, re-exported (with the errors
and the other public values, from their homes) by driftline/__init__.py. Each CLI verb is one
call of a function here plus printing.

This is the floor above every other (only cli/ sits higher): Profile and Recommendation
extend the values of results/ and recommendation/ with the outputs emit/ renders.
"""

from __future__ import annotations

import dataclasses as _dataclasses
import os as _os
from collections.abc import Callable as _Callable
from collections.abc import Mapping as _Mapping
from collections.abc import Sequence as _Sequence
from pathlib import Path as _Path
from typing import TYPE_CHECKING as _TYPE_CHECKING
from typing import Any as _Any
from typing import Unpack as _Unpack
from typing import overload as _overload

from driftline.core.jsontypes import JSONObject as _JSONObject
from driftline.core.options import ScanKeywords as _ScanKeywords
from driftline.core.options import ScanOptions
from driftline.emit.atomic import write_output as _write_output
from driftline.errors import (
    InputPathError,
    SchemaConflictError,
)
from driftline.errors import OptionError as _OptionError
from driftline.recommendation import Recommendation as _RecommendationValue
from driftline.recommendation import recommend as _recommend
from driftline.recommendation.options import RecommendOptions as _RecommendOptions
from driftline.recommendation.plan import JsonMode as _JsonMode
from driftline.recommendation.plan import OutputFormat as _OutputFormat
from driftline.results.landing import Landing as _LandingValue
from driftline.results.landing import dumps_set as _dumps_set
from driftline.results.landing import load_report_set as _load_report_set
from driftline.results.profile import Profile as _ProfileValue
from driftline.results.report import dumps as _dumps
from driftline.results.report import load_report as _load_report
from driftline.scanning.by_dataset import scan_landing as _scan_landing
from driftline.scanning.run import scan_with as _scan_with
from driftline.sources.datasets import Layout as _Layout
from driftline.sources.datasets import find_datasets as _find_datasets

if _TYPE_CHECKING:
    import polars as _pl
    import pyarrow as _pa

    # apply() imports its runner when it runs: a scan never needs it (driftline.ApplyResult is its own name).
    from driftline.applying.run import ApplyResult

    # The gate is imported by check() and diff() when they run: a scan never needs it.
    from driftline.gate.diff import Diff
    from driftline.gate.policy import Policy
    from driftline.gate.verdict import Verdict
    from driftline.results.tables import Tables as _Tables


# -- the public values: the values below, with what needs the floors above them ---------------


class Profile(_ProfileValue):
    """What a scan found (driftline.results.profile.Profile: files sorted by relative path,
    what was skipped, the options), with its outputs: recommend(), write_json(), write_html(),
    to_arrow(), to_polars() and the notebook view. Those need the floors above the value,
    so they live here, on the public class; equal content compares equal with either class.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"y": null}\\n')
    >>> p = driftline.scan(d)
    >>> p.rows, sorted(p.fields), p.fields["y"].nullable
    (2, ['x', 'y'], True)
    """

    __slots__ = ()

    @classmethod
    def _of(cls, value: _ProfileValue) -> Profile:
        if isinstance(value, cls):
            return value
        return cls(value.root, value.files, value.skipped, value.options, value.duration_s, value.saved_shapes)

    def to_arrow(self) -> _Tables[_pa.Table]:
        """Fields and drift events as pyarrow Tables: `fields, events = profile.to_arrow()`.

        >>> fields, events = Profile("r", ()).to_arrow()
        >>> fields.column_names[:4], events.num_rows
        (['path', 'types', 'container', 'present'], 0)
        """
        from driftline.results.tables import to_arrow as _to_arrow

        return _to_arrow(self)

    def to_polars(self) -> _Tables[_pl.DataFrame]:
        """Fields and drift events as polars DataFrames, with the same columns as to_arrow().

        >>> Profile("r", ()).to_polars().fields.shape
        (0, 10)
        """
        from driftline.results.tables import to_polars as _to_polars

        return _to_polars(self)

    def recommend(self, **options: object) -> Recommendation:
        """The unified schema with cast rules (driftline.recommend; options as RecommendOptions).

        >>> Profile("r", ()).recommend(prefer_decimal=True).fields
        ()
        """
        return recommend(self, options=_RecommendOptions().replace(**options))

    # -- outputs: the bytes `driftline scan --json/--html` writes --------------------------
    def write_json(self, path: str | _os.PathLike[str]) -> None:
        """Write the JSON report (docs/report.schema.json) to path, as `driftline scan --json` does.

        The file is replaced atomically ('-' is standard output; see README, "Where outputs
        go"); OutputError when it cannot be written. load_report reads it back equal.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> p = driftline.scan(d); p.write_json(d.parent / (d.name + ".json"))
        >>> driftline.load_report(d.parent / (d.name + ".json")) == p
        True
        """
        _write_output(_os.fspath(path), _dumps(self))

    def write_html(self, path: str | _os.PathLike[str]) -> None:
        """Write the HTML report (one self-contained page) to path, as `driftline scan --html` does.

        The file is replaced atomically ('-' is standard output); OutputError when it cannot
        be written.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> page = d.parent / (d.name + ".html"); driftline.scan(d).write_html(page)
        >>> page.read_text().startswith("<!-- driftline-output: ")
        True
        """
        from driftline.emit.html import write_html as _write_html

        _write_html(self, _os.fspath(path))

    def _repr_html_(self) -> str:
        from driftline.emit.notebook import profile_html as _profile_html

        return _profile_html(self)


class Recommendation(_RecommendationValue):
    """The unified schema: one plan per top-level field (sorted by name), plus what was dropped
    (driftline.recommendation.plan.Recommendation), with its files: rules, to_json_schema(),
    to_sql(), to_avro(), to_arrow_ipc() and write(), each exactly what `driftline schema` writes.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"t": "2026-11-29T10:00:00Z"}\\n')
    >>> rec = driftline.scan(d).recommend()
    >>> [(p.name, p.rule, p.target.key()) for p in rec.fields]
    [('t', 'parse_timestamp', 'timestamp[us, UTC]')]
    """

    @classmethod
    def _of(cls, value: _RecommendationValue) -> Recommendation:
        if isinstance(value, cls):
            return value
        return cls(**{f.name: getattr(value, f.name) for f in _dataclasses.fields(value)})

    @property
    def rules(self) -> _JSONObject:
        """The cast rules file as JSON data (docs/rules.schema.json): what `--rules` writes, as a dict.

        A new dict on every access (changing it changes nothing here).

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
        >>> rules = driftline.scan(d).recommend().rules
        >>> rules["format"], [(f["path"], f["rule"], f["target"]) for f in rules["fields"]]
        ('driftline-rules', [('x', 'widen_numeric', 'float64')])
        """
        from driftline.emit.schemas.rules_json import rules_document as _rules_document

        return _rules_document(self)

    def to_json_schema(
        self, *, mode: _JsonMode | None = None, title: str | None = None, bounds_from_sample: bool = False
    ) -> str:
        """The JSON Schema 2020-12 document as text: `--to json-schema` (`--json-mode`, `--table`,
        `--bounds-from-sample`).

        mode 'permissive' describes the records as they arrive, 'strict' the records after
        the cast rules (default: the recommendation's own mode); title defaults to the root
        folder's name; bounds_from_sample makes the longest string and the number range seen
        enforced bounds (by default only described). json.loads gives the document as a dict.

        >>> import driftline, tempfile, pathlib, json
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"n": 1}\\n{"n": "2"}\\n')
        >>> doc = json.loads(driftline.scan(d).recommend(parse_strings="always").to_json_schema())
        >>> doc["$schema"], doc["properties"]["n"]["type"]
        ('https://json-schema.org/draft/2020-12/schema', ['integer', 'string'])
        """
        from driftline.emit.schemas.files import schema_file as _schema_file

        return _schema_file(
            self, "json-schema", table=title, json_mode=mode, bounds_from_sample=bounds_from_sample
        ).decode()

    def to_sql(
        self,
        *,
        table: str | None = None,
        dialect: str | None = None,
        flatten: str | None = None,
        bounds_from_sample: bool = False,
    ) -> str:
        """The SQL script `--to sql --table TABLE --dialect DIALECT --flatten SEP` writes: CREATE TABLE,
        a staging table, and the cast rules as INSERT … SELECT (table defaults to the root folder's
        name, dialect to duckdb; flatten makes each struct field a column of its own, its names
        joined by the separator; bounds_from_sample writes VARCHAR(n) of the longest value seen).
        OptionError for an unknown dialect or a bad separator.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> print(driftline.scan(d).recommend().to_sql(table="raw").split("\\n\\n")[1])
        CREATE TABLE "raw" (
          "x" BIGINT NOT NULL
        );
        """
        from driftline.emit.schemas.files import schema_file as _schema_file

        return _schema_file(
            self, "sql", table=table, dialect=dialect, flatten=flatten, bounds_from_sample=bounds_from_sample
        ).decode()

    def to_avro(self, *, name: str | None = None) -> str:
        """The Avro schema `--to avro --table NAME` writes, as JSON text (name: the record's,
        made a valid Avro name; default the root folder's name).

        >>> import driftline, tempfile, pathlib, json
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{}\\n')
        >>> avsc = json.loads(driftline.scan(d).recommend().to_avro(name="pm2.5"))
        >>> avsc["name"], avsc["fields"][0]["type"]
        ('pm2_5', ['null', 'long'])
        """
        from driftline.emit.schemas.files import schema_file as _schema_file

        return _schema_file(self, "avro", table=name).decode()

    def to_iceberg(self) -> str:
        """The Apache Iceberg table schema `--to iceberg` writes, as JSON text: the schema with field
        ids and the identity partition spec of the partition keys (needs the iceberg extra: pyiceberg).

        >>> import driftline, tempfile, pathlib, json
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> doc = json.loads(driftline.scan(d).recommend().to_iceberg())
        >>> doc["schema"]["fields"][0]["id"], doc["schema"]["fields"][0]["type"]
        (1, 'long')
        """
        from driftline.emit.schemas.files import schema_file as _schema_file

        return _schema_file(self, "iceberg").decode()

    def to_spark(self) -> str:
        """The Spark struct type `--to spark` writes, as JSON text (Spark's DataType.json, Delta's schemaString).

        >>> import driftline, tempfile, pathlib, json
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> [(f["name"], f["type"]) for f in json.loads(driftline.scan(d).recommend().to_spark())["fields"]]
        [('x', 'long')]
        """
        from driftline.emit.schemas.files import schema_file as _schema_file

        return _schema_file(self, "spark").decode()

    def to_arrow_ipc(self) -> bytes:
        """The Arrow IPC schema message `--to arrow` writes (pyarrow.ipc.read_schema reads it).

        >>> import driftline, tempfile, pathlib, pyarrow as pa
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> rec = driftline.scan(d).recommend()
        >>> pa.ipc.read_schema(pa.py_buffer(rec.to_arrow_ipc())).equals(rec.schema, check_metadata=True)
        True
        """
        from driftline.emit.schemas.files import schema_file as _schema_file

        return _schema_file(self, "arrow")

    def write(
        self,
        path: str | _os.PathLike[str],
        to: _OutputFormat,
        *,
        table: str | None = None,
        json_mode: _JsonMode | None = None,
        dialect: str | None = None,
        flatten: str | None = None,
        bounds_from_sample: bool = False,
    ) -> None:
        """Write one file as `driftline schema --to TO --out PATH` (or `--rules PATH` for to="rules") does
        (dialect and flatten: as to_sql; flatten also names the renames of the rules file).

        The file is replaced atomically ('-' is standard output; see README, "Where outputs
        go"); OutputError when it cannot be written, OptionError for an unknown format.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
        >>> rec = driftline.scan(d).recommend(); out = d.parent / (d.name + ".sql")
        >>> rec.write(out, "sql", table="raw"); out.read_text() == rec.to_sql(table="raw")
        True
        """
        from driftline.emit.schemas.files import write_file as _write_file

        _write_file(
            self,
            path,
            to,
            table=table,
            json_mode=json_mode,
            dialect=dialect,
            flatten=flatten,
            bounds_from_sample=bounds_from_sample,
        )


@_dataclasses.dataclass(frozen=True)
class Landing(_LandingValue):
    """A landing root scanned dataset by dataset (driftline.scan_datasets): datasets maps each
    dataset's name to its Profile (in name order), loose lists the data files that fit no
    dataset (each with why), skipped what discovery passed over, notices what in the layout a
    person should look at; found names every dataset found, read or not; rows, bytes, files
    and event_total add up the datasets read.  write_json() writes the report set.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); (d / "exports").mkdir(); (d / "logs").mkdir()
    >>> _ = (d / "exports" / "a.csv").write_text("id,qty\\n1,2\\n"), (d / "logs" / "a.jsonl").write_text('{"ts": 1}\\n')
    >>> landing = driftline.scan_datasets(d)
    >>> [(name, p.rows, sorted(p.fields)) for name, p in landing.datasets.items()], landing.rows
    ([('exports', 1, ['id', 'qty']), ('logs', 1, ['ts'])], 2)
    """

    datasets: _Mapping[str, Profile]
    whole: Profile | None = _dataclasses.field(default=None, compare=False)

    def write_json(self, path: str | _os.PathLike[str]) -> None:
        """Write the report set (docs/report-set.schema.json) to path, as `driftline scan ROOT
        --json FILE` does on a root of several datasets; load_report_set reads it back equal.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); (d / "a").mkdir(); (d / "b").mkdir()
        >>> _ = (d / "a" / "x.jsonl").write_text('{"x": 1}\\n'), (d / "b" / "y.csv").write_text("y\\n2\\n")
        >>> landing = driftline.scan_datasets(d); out = d.parent / (d.name + ".json")
        >>> landing.write_json(out); driftline.load_report_set(out) == landing
        True
        """
        _write_output(_os.fspath(path), _dumps_set(self))


def load_report_set(path: str | _Path) -> Landing:
    """A Landing read back from a saved report set (`driftline scan ROOT --json FILE` on a root of
    several datasets; docs/report-set.schema.json); load_report reads a report of one table.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); (d / "a").mkdir(); (d / "b").mkdir()
    >>> _ = (d / "a" / "x.jsonl").write_text('{"x": 1}\\n'), (d / "b" / "y.csv").write_text("y\\n2\\n")
    >>> out = d.parent / (d.name + ".json"); driftline.scan_datasets(d).write_json(out)
    >>> sorted(driftline.load_report_set(out).datasets)
    ['a', 'b']
    """
    return _public_landing(_load_report_set(path))


def _public_landing(value: _LandingValue) -> Landing:
    return Landing(
        value.root,
        {name: Profile._of(p) for name, p in value.datasets.items()},
        value.loose,
        value.skipped,
        value.notices,
        value.found,
        None if value.whole is None else Profile._of(value.whole),
    )


def load_report(path: str | _Path) -> Profile:
    """A Profile read back from a saved JSON report (`driftline scan --json`); see results.report.load_report.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
    >>> p = driftline.scan(d); p.write_json(d.parent / (d.name + ".json"))
    >>> driftline.load_report(d.parent / (d.name + ".json")) == p
    True
    """
    return Profile._of(_load_report(path))


def scan(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]],
    *,
    options: ScanOptions | None = None,
    progress: _Callable[[int, int, str], None] | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Profile:
    """Scan files, folders, globs or s3:// URLs (one, or a list of them) into a Profile.

    The read options come as keywords, or as a ScanOptions value (options=; for example
    ScanOptions.from_file("driftline.toml")) with keywords over it; what neither sets keeps
    its default. They are the same for scan, check, diff and recommend, and the same as
    the command line's flags (docs/python.md lists them):

    batch_rows bounds the rows per batch (drift is tracked batch by batch) and batch_bytes
    the input bytes of its records (64 MiB), whichever ends a batch first; include and
    exclude are globs on the path or name; symbolic links that lead out of the paths given
    are skipped (link-outside-root) unless follow_links; jobs reads files in parallel processes
    (default 1: no process pool); max_errors stops reading new files after that many errors;
    the max_* limits report a too-long record, too many decompressed bytes, too high a
    compression ratio or too many CSV columns instead of reading on; max_paths
    caps the distinct field paths kept (the rest are counted as "other fields") and
    max_events the drift events the command line's terminal lists (accepted here so that
    flags, config file and keywords share one vocabulary; it changes nothing in the Profile,
    whose events hold every episode); delimiter
    fixes the CSV delimiter (found from the data otherwise); csv_dialect pins more of the
    CSV dialect, per glob ('legacy/*.csv:delimiter=pipe,quote=none,header=no', one
    string or several; what a pin leaves open is still found); encoding fixes the text
    encoding of CSV/TSV and JSON files, a name Python's codecs know (found per file
    otherwise); include_hidden also reads files starting with '.' or '_'; sniff_unknown
    also reads files of an extension driftline does not read (.txt, .dat; else skipped
    unopened) when their first bytes look like data; where keeps only key=value partitions
    that pass ('day>=2026-11-01'); engine 'dask' reads on a cluster (scheduler address,
    or local workers); endpoint_url, region and anonymous reach an S3-compatible store
    (credentials come from the environment, never from here); example_values 'hide' keeps
    every example value out of the profile and so out of every output made from it, 'hash'
    replaces each by a keyed HMAC-SHA256 (hash_key or hash_key_file, else the
    DRIFTLINE_HASH_KEY environment variable), so a report can be shared; connect_timeout
    (seconds, default 10) bounds reaching a dask scheduler or the object store,
    request_timeout (default 20) an object store request that receives nothing,
    task_timeout (default 3600) each worker task; a timeout is an error naming the
    address; progress(done, total, current_file) is called as files finish. The result
    depends on none of jobs and engine. Raises InputPathError when a path does not exist
    or holds no data file, and OptionError for an unknown option or a value of the wrong
    type or outside its range.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> p = driftline.scan(d)
    >>> p.fields["x"].stats.types, [e.kind for e in p.events]
    ({'float64': 1, 'int64': 1}, ['type-widened'])
    """
    from driftline.results.conceal import conceal

    opts = (options or ScanOptions()).merged(paths=paths, **keywords)
    return Profile._of(conceal(_scan_with(opts, progress=progress), opts.values))


def scan_datasets(
    root: str | _os.PathLike[str],
    *,
    dataset: str | _Sequence[str] | None = None,
    whole_if_one: bool = False,
    options: ScanOptions | None = None,
    progress: _Callable[[int, int, str], None] | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Landing:
    """Scan a landing root dataset by dataset: split it as driftline.datasets does, then read
    each dataset's files into a Profile of its own, rooted at the dataset's folder (a lone
    reference file: at the root), so that it equals driftline.scan of that folder alone.

    dataset names one dataset or several to read (the others are not read; found still names
    them); an unknown name is an OptionError listing the names the root holds. whole_if_one,
    what `driftline scan ROOT` does: when no dataset is named and the root reads as one table
    (a single dataset, or its own folder is a dataset's: the dataset "."), it is read whole
    as driftline.scan(root) reads it, into Landing.whole, and datasets is empty. The read
    options, jobs and the engine are those of scan (options and keywords); the files are
    listed once. Raises InputPathError when root does not exist or holds no data file.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); (d / "t" / "day=1").mkdir(parents=True)
    >>> _ = (d / "t" / "day=1" / "a.jsonl").write_text('{"x": 1}\\n'), (d / "ref.parquet").write_bytes(b"")
    >>> _ = (d / "e").mkdir(), (d / "e" / "a.csv").write_text("id\\n7\\n")
    >>> landing = driftline.scan_datasets(d, dataset="t")
    >>> landing.found, [(f.rel, f.partitions) for f in landing.datasets["t"].files]
    (('e', 't'), [('day=1/a.jsonl', (('day', '1'),))])
    >>> [(x.file.rel, x.reason.split(":")[0]) for x in landing.loose]
    [('ref.parquet', 'its head cannot be read')]
    """
    from driftline.results.conceal import conceal

    if not isinstance(root, str | _os.PathLike):
        raise _OptionError(f"scan_datasets takes one root folder, not {type(root).__name__}")
    opts = (options or ScanOptions()).merged(paths=[root], **keywords)
    value = _scan_landing(opts, names=dataset, whole_if_one=whole_if_one, progress=progress)
    return _public_landing(
        _dataclasses.replace(
            value,
            datasets={name: conceal(p, opts.values) for name, p in value.datasets.items()},
            whole=None if value.whole is None else conceal(value.whole, opts.values),
        )
    )


def check(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]] | Profile,
    *,
    baseline: str | _os.PathLike[str] | _Mapping[str, str | _os.PathLike[str]] | None = None,
    policy: Policy | str | _os.PathLike[str] | None = None,
    state: str | _os.PathLike[str] | None = None,
    verify: bool = False,
    rebuild: bool = False,
    write_inside: bool = False,
    dataset: str | _Sequence[str] | None = None,
    one_table: bool = False,
    options: ScanOptions | None = None,
    progress: _Callable[[int, int, str], None] | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Verdict:
    """Check data (paths, a saved report or a Profile) against a baseline under a policy.

    baseline is a JSON Schema file, a cast-rules file or a saved scan report; policy a
    Policy, a TOML file or None for the defaults; state an incremental state file (only
    new or changed files are read; verify also compares content hashes, rebuild starts
    the state over; write_inside lets it lie inside a scanned folder). The paths are read
    with the read options of scan (options and keywords, example_values included: the
    verdict's examples). Verdict.passed / Verdict.exit_code say whether the gate passes
    (docs/gate.md). A note (a damaged state set aside) goes to the "driftline" logger.

    A root folder of several datasets (driftline.datasets) is checked dataset by dataset when
    baseline is a folder of baselines (<dataset>.schema.json, .rules.json or .report.json; a
    '/' in a dataset's name as '.'), a mapping of dataset name → baseline file, or None with a
    policy file whose [baselines] table names them; dataset picks some (one baseline file then
    serves each). The Verdict then holds one verdict per dataset in Verdict.datasets and is the
    overall one (passed when each passed). One baseline file on a root of several datasets is
    an OptionError unless one_table (the root as one table, as before) or dataset is given.

    >>> import driftline, tempfile, pathlib, json
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": "1"}\\n')
    >>> schema = d.parent / (d.name + ".schema.json")
    >>> _ = schema.write_text(json.dumps({"type": "object", "properties": {"x": {"type": "integer"}}}))
    >>> v = driftline.check(d, baseline=schema, batch_rows=100)
    >>> v.exit_code, [(x.field, x.change, x.file, x.row, x.example) for x in v.violations]
    (1, [('x', 'int64 → string', 'a.jsonl', 0, '"1"')])
    """
    from driftline.gate.run import run_check

    verdict, _ = run_check(
        paths,
        baseline=baseline,
        policy=policy,
        state=state,
        verify=verify,
        rebuild=rebuild,
        options=(options or ScanOptions()).merged(**keywords),
        progress=progress,
        write_inside=write_inside,
        dataset=dataset,
        one_table=one_table,
    )
    return verdict


def datasets(root: str | _os.PathLike[str], *, include_hidden: bool = False, follow_links: bool = False) -> _Layout:
    """The tables in a landing root: its datasets, the loose files that fit none (each with
    why), the files discovery skipped (markers, hidden files) and notices about the layout.

    A dataset is a folder whose files, below its key=value partition folders, belong to one
    table, judged from the layout and the field names of each file's head or Parquet footer
    (never a full read); its name is its folder relative to the root ("." for the root
    itself), or the file's path for a lone reference file beside other datasets. Each
    dataset gives its name, folder, files, formats, partition_keys and fields
    (docs/datasets.md tells the rule). Raises InputPathError when root does not exist.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> (d / "readings" / "day=1").mkdir(parents=True); (d / "exports").mkdir()
    >>> _ = (d / "readings" / "day=1" / "a.jsonl").write_text('{"ts": 1, "temp": 2.5}\\n')
    >>> _ = (d / "exports" / "depots.csv").write_text("depot,qty\\nx,1\\n"), (d / "_SUCCESS").write_text("")
    >>> found = driftline.datasets(d)
    >>> [(s.name, [f.rel for f in s.files], s.partition_keys, s.fields) for s in found.datasets]
    [('exports', ['exports/depots.csv'], (), ('depot', 'qty')),
     ('readings', ['readings/day=1/a.jsonl'], ('day',), ('ts', 'temp'))]
    >>> found.loose, [(s.rel, s.reason) for s in found.skipped]
    ((), [('_SUCCESS', 'marker')])
    """
    return _find_datasets(root, include_hidden=include_hidden, follow_links=follow_links)


_Side = Profile | str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]]


@_overload
def diff(
    a: _Side,
    b: _Side,
    *,
    by: None = None,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Diff: ...
@_overload
def diff(
    a: _Side,
    b: None = None,
    *,
    by: str,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> tuple[Diff, ...]: ...
def diff(
    a: _Side,
    b: _Side | None = None,
    *,
    by: str | None = None,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> Diff | tuple[Diff, ...]:
    """The fields that changed from a to b; each side a Profile, a saved report or data paths.

    With by (a partition key) and no b, each value of that partition of a is compared with
    the one before it: the result is then a tuple of Diffs, one per step. Sides given as
    paths are read with the read options of scan (options and keywords) and named as
    given; min_null_points is the smallest change of null share listed, in percentage
    points (default 1).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp())
    >>> _ = (d / "a.jsonl").write_text('{"x": 1}\\n'), (d / "b.jsonl").write_text('{"x": 1.5, "y": true}\\n')
    >>> [(c.kind, c.path, c.before, c.after) for c in driftline.diff(d / "a.jsonl", d / "b.jsonl").changes]
    [('added', 'y', None, 'bool'), ('widened', 'x', 'int64', 'float64')]
    """
    from driftline.gate.inputs import diff_sides

    opts = (options or ScanOptions()).merged(**keywords)
    return diff_sides(a, b, by=by, min_null_points=min_null_points, options=opts)


def recommend(
    source: _Side,
    *,
    options: _RecommendOptions | None = None,
    scan_options: ScanOptions | None = None,
    **keywords: object,
) -> Recommendation:
    """The unified schema, with a cast rule per field, for a Profile, a saved report or data paths.

    Paths are read with the read options of scan (scan_options, and the keywords that are
    read options); the other keywords are recommendation options (the fields of
    RecommendOptions) over options. Strict mode raises SchemaConflictError when a field
    needs a lossy or conflicting rule; a scan in which every file failed is an
    InputPathError.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.csv").write_text("n;m\\n7;1\\nn/a;2\\n")
    >>> p = driftline.recommend(d, delimiter=";").plan("n")
    >>> p.rule, p.target.key(), [(e.cause, e.count) for e in p.effects]
    ('parse_integer', 'int64', [('null_token', 1)])
    """
    from driftline.core.options import KEYWORDS
    from driftline.gate.inputs import profile_of
    from driftline.results.conceal import conceal

    read: dict[str, _Any] = {k: v for k, v in keywords.items() if k in KEYWORDS}
    opts = (scan_options or ScanOptions()).merged(**read)
    profile = conceal(profile_of(source, options=opts), opts.values)
    if not isinstance(source, Profile) and profile.nothing_read:
        raise InputPathError(f"nothing readable: {profile.unread_text()} (driftline scan shows the problems)")
    rest = {k: v for k, v in keywords.items() if k not in KEYWORDS}
    try:
        return Recommendation._of(_recommend(profile, options=options, **rest))
    except SchemaConflictError as exc:  # the refused plans, with their files (to_json_schema, ...)
        raise SchemaConflictError(Recommendation._of(exc.recommendation)) from None


def apply(
    paths: str | _os.PathLike[str] | _Sequence[str | _os.PathLike[str]],
    *,
    out: str | _os.PathLike[str],
    rules: str | _os.PathLike[str] | Recommendation | None = None,
    state: str | _os.PathLike[str] | None = None,
    partition_by: _Sequence[str] = (),
    table_format: str = "parquet",
    options: ScanOptions | None = None,
    **keywords: _Unpack[_ScanKeywords],
) -> ApplyResult:
    """Cast a landing folder with the cast rules into a typed Parquet table in out.

    The rules are the recommendation of a scan of paths (with the read options of scan,
    as keywords or options), a saved rules file (`driftline schema --rules`) or a
    Recommendation. out gets one Parquet file per partition folder of the input (key=value
    folders kept), with exactly the recommended Arrow schema; `_quarantine/` every value a
    rule nulled or changed, with its file, partition, row, line, field path, raw text, rule
    and reason; `_rejected/` the rows that could not be cast at all; `_reconciliation.json`
    the rows and values accounted for against the loss the recommendation predicted
    (docs/apply.md). Batches of batch_rows rows are cast one at a time. Each partition
    is written under a temporary name and renamed into place; a re-run gives the same bytes;
    with state (a file), a partition whose files have
    not changed since the run that wrote it is kept. Raises OutputError for an output
    folder that is an input, or is not empty and was not written by apply. partition_by
    re-partitions by folder keys or top-level columns instead (key=value folders of their
    values; a column named there is held by the folder names, not the files). table_format
    'delta' writes the rows as a Delta Lake table through the deltalake package instead.
    paths and out may be s3:// URLs (each object uploaded whole under its final key);
    engine='dask' writes each partition as a task on a dask cluster, with the same bytes.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "in").mkdir()
    >>> _ = (d / "in" / "a.jsonl").write_text('{"v": 1.5}\\n{"v": "n/a"}\\n')
    >>> result = driftline.apply(d / "in", out=d / "clean")
    >>> result.matches, result.reconciliation["rows"]["written"], result.written
    (True, 2, ('',))
    """
    from driftline.applying.run import apply_landing

    opts = (options or ScanOptions()).merged(**keywords)
    return apply_landing(
        paths, out, rules=rules, state=state, options=opts, partition_by=partition_by, table_format=table_format
    )
