"""driftline apply, start to end: the rules (a scan's recommendation, or a saved rules file),
the files grouped into output partitions, each partition's batches cast one at a time and
written under temporary names, then renamed into place, and the reconciliation.

Memory holds one raw batch and its cast at a time (batch_rows rows), as in the scan.
"""

from __future__ import annotations

import contextlib
import hashlib
import os
import posixpath
import uuid
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, cast
from urllib.parse import quote

import orjson
import pyarrow as pa
import pyarrow.compute as pc

from driftline.applying.delta import delta_schema, with_partitions, write_delta
from driftline.applying.objectstore import RemoteOut, check_remote_output, local_stage
from driftline.applying.output import (
    MARKER_FORMAT,
    MARKER_NAME,
    PART_NAME,
    QUARANTINE_DIR,
    RECONCILIATION_NAME,
    REJECTED_DIR,
    check_output,
    json_bytes,
    remove_leftovers,
    remove_partition,
    replace_file,
    staged,
    storable,
    terminate_as_interrupt,
)
from driftline.applying.quarantine import QUARANTINE_SCHEMA, REJECTED_SCHEMA, Origin, quarantine_rows, rejected_rows
from driftline.applying.reconcile import FileCount, reconcile
from driftline.applying.rulesfile import load_recommendation
from driftline.core.fileref import FileRef
from driftline.core.jsontypes import JSONObject
from driftline.core.options import ReadOptions, ScanOptions
from driftline.errors import EngineError, InputPathError, OptionError, OutputError
from driftline.recommendation import recommend
from driftline.recommendation.apply import SchemaMismatch, Tally, Touched, apply
from driftline.recommendation.partitions import partition_type
from driftline.recommendation.plan import OBSERVED_KEY, FieldPlan, Recommendation, target_schema
from driftline.recommendation.raw import lined_batches
from driftline.scanning.run import capped_jobs, discover_for, read_found
from driftline.scanning.workers import run_ordered
from driftline.sources.remote import is_url, open_binary

STATE_FORMAT = "driftline-apply-state"
_CAST_ERRORS = (SchemaMismatch, pa.ArrowInvalid, pa.ArrowNotImplementedError, pa.ArrowTypeError)


@dataclass(frozen=True)
class ApplyResult:
    """What a run wrote: the output folder, its reconciliation (JSON data), and the partitions
    rewritten and kept (with --state, the ones whose files had not changed).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "in").mkdir()
    >>> _ = (d / "in" / "a.csv").write_text("n\\n7\\nn/a\\n")
    >>> r = driftline.apply(d / "in", out=d / "out")
    >>> r.matches, [(e["path"], e["cause"], e["quarantined"]) for e in r.reconciliation["effects"]]
    (True, [('n', 'null_token', 1)])
    """

    out: Path | str  # a local folder, or an s3:// URL
    reconciliation: JSONObject
    written: tuple[str, ...]
    kept: tuple[str, ...]

    @property
    def matches(self) -> bool:
        """True when every row is accounted for and every count equals the prediction."""
        return bool(self.reconciliation["matches"])


def output_schema(rec: Recommendation) -> pa.Schema:
    """The recommended schema as the output's files carry it: names, types, nullability and
    each field's rule; without the scan's observed notes (counts of values), which change
    with every new file and would change every partition's bytes."""
    schema = target_schema(rec)
    fields = [f.with_metadata({k: v for k, v in (f.metadata or {}).items() if k != OBSERVED_KEY}) for f in schema]
    return pa.schema(fields, metadata=schema.metadata)


def empty_structs(t: pa.DataType, path: str) -> list[str]:
    """The paths of structs with no field at all, which Parquet cannot store."""
    if pa.types.is_struct(t):
        if not t.num_fields:
            return [path]
        return [p for i in range(t.num_fields) for p in empty_structs(t.field(i).type, f"{path}.{t.field(i).name}")]
    if pa.types.is_list(t):
        return empty_structs(t.value_type, f"{path}[]")
    if pa.types.is_map(t):
        return empty_structs(t.item_type, f"{path}{{value}}")
    return []


# -- one batch --------------------------------------------------------------------------------


def _shifted(t: Touched, by: int) -> Touched:
    return Touched(t.path, t.cause, pc.add(t.rows, by), t.raw)


def cast_batch(
    batch: pa.RecordBatch, rec: Recommendation, tally: Tally
) -> tuple[pa.RecordBatch, list[tuple[int, str]]]:
    """The batch cast; when it cannot be cast whole, row by row, and the rows that fail are
    rejected (row in the batch, reason). Only the kept rows count in the tally."""
    whole = Tally(keep=tally.keep)  # counted into tally only when the whole batch casts: else row by row
    try:
        good = apply(batch, rec, tally=whole)
    except _CAST_ERRORS:
        pass
    else:
        for path, per in whole.counts.items():
            for cause, n in per.items():
                tally.add(path, cause, n)
        tally.touched.extend(whole.touched)
        return good, []
    kept, rejected = [], []
    for i in range(batch.num_rows):
        one = Tally(keep=tally.keep)
        try:
            kept.append(apply(batch.slice(i, 1), rec, tally=one))
        except _CAST_ERRORS as exc:
            rejected.append((i, str(exc)))
            continue
        for path, per in one.counts.items():
            for cause, n in per.items():
                tally.add(path, cause, n)
        tally.touched.extend(_shifted(t, i) for t in one.touched)
    schema = target_schema(rec)
    table = pa.Table.from_batches(kept, schema=schema).combine_chunks()
    return (table.to_batches()[0] if table.num_rows else pa.RecordBatch.from_pylist([], schema=schema)), rejected


# -- one file, batch by batch ---------------------------------------------------------------------


@dataclass(frozen=True)
class CastBatch:
    """One batch cast: the typed rows (output schema), their quarantined values and rejected rows."""

    good: pa.RecordBatch
    quarantine: pa.RecordBatch
    rejected: pa.RecordBatch


def cast_file(
    ref: FileRef, partition: str, rec: Recommendation, read: ReadOptions, fc: FileCount
) -> Iterator[CastBatch]:
    """One file's batches cast one at a time; fc counts what happened to its rows and values."""
    schema = output_schema(rec)
    plans: dict[str, FieldPlan] = {p.path: p for p in rec.walk()}
    row = 0
    # Rows come with their lines from the readers (CSV, TSV and JSON Lines); Parquet rows have none.
    for raw, starts in lined_batches(ref, read.batch_rows, read):
        tally = Tally(keep=True)
        good, bad = cast_batch(raw, rec, tally)
        origin = Origin(ref.rel, partition, row)
        fc.rows_in += raw.num_rows
        fc.rows_written += good.num_rows
        fc.rows_rejected += len(bad)
        for t in tally.touched:
            fc.add(t.path, t.cause, len(t.rows))
        for name, col in zip(good.schema.names, good.columns, strict=True):
            fc.nulls[name] = fc.nulls.get(name, 0) + col.null_count
        yield CastBatch(
            pa.RecordBatch.from_arrays(good.columns, schema=schema),
            quarantine_rows(tally.touched, origin, plans, starts),
            rejected_rows(raw, bad, origin, starts),
        )
        row += raw.num_rows


# -- one partition ------------------------------------------------------------------------------


def write_partition(
    out: Path, partition: str, refs: Sequence[FileRef], rec: Recommendation, read: ReadOptions
) -> list[FileCount]:
    """Every file of one input folder cast into its three files, renamed into place at the end."""
    where = Path(partition) if partition else Path()
    counts = []
    with staged(
        [
            (out / where / PART_NAME, output_schema(rec)),
            (out / QUARANTINE_DIR / where / PART_NAME, QUARANTINE_SCHEMA),
            (out / REJECTED_DIR / where / PART_NAME, REJECTED_SCHEMA),
        ]
    ) as (data, quarantine, rejected):
        for ref in refs:
            fc = FileCount(ref.rel, partition)
            for cast in cast_file(ref, partition, rec, read, fc):
                data.write(cast.good)
                quarantine.write(cast.quarantine)
                rejected.write(cast.rejected)
            counts.append(fc)
    return counts


def write_partition_to(
    out: str | RemoteOut, partition: str, refs: Sequence[FileRef], rec: Recommendation, read: ReadOptions
) -> list[FileCount]:
    """write_partition into a local folder, or, for an object store, into a temporary local
    folder whose files are then uploaded under their final keys (objectstore.py)."""
    if isinstance(out, str):
        return write_partition(Path(out), partition, refs, rec, read)
    with local_stage() as stage:
        counts = write_partition(stage, partition, refs, rec, read)
        out.upload_tree(stage)  # sorted: the quarantine and rejected rows, then the data file
    return counts


def _partition_task(
    item: tuple[str, list[FileRef]], shared: tuple[str | RemoteOut, Recommendation, ReadOptions]
) -> Any:
    partition, refs = item
    out, rec, read = shared
    return write_partition_to(out, partition, refs, rec, read)


def _task_files(item: tuple[str, list[FileRef]]) -> list[str]:
    return [r.rel for r in item[1]]


def _write_dask(
    out: str | RemoteOut,
    todo: list[tuple[str, list[FileRef]]],
    rec: Recommendation,
    read: ReadOptions,
    opts: ScanOptions,
    jobs: int,
) -> Iterator[list[FileCount]]:
    """One dask task a partition, results in partition order: each worker writes its partition
    where a local run would (a folder every worker reaches, or the object store)."""
    from driftline.scanning.engines import connect

    distributed, client, cluster = connect(opts.scheduler, jobs, opts.storage.connect_timeout)
    where = opts.scheduler or "the local cluster"
    try:
        shared = (out, rec, read)
        token = uuid.uuid4().hex[:12]  # fresh keys: a re-run rewrites partitions whose files changed
        futures = [
            client.submit(_partition_task, item, shared, pure=False, key=f"driftline-apply-{token}-{i}")
            for i, item in enumerate(todo)
        ]
        for (partition, _), fut in zip(todo, futures, strict=True):
            try:
                got = fut.result(timeout=opts.task_timeout)
            except (TimeoutError, getattr(distributed, "TimeoutError", TimeoutError)):
                raise EngineError(
                    f"no dask task finished within {opts.task_timeout:g} s (--task-timeout) while writing partition "
                    f"{partition or '.'!r}; check the workers of {where}, or raise --task-timeout"
                ) from None
            except (OSError, OutputError, KeyboardInterrupt):
                raise
            except Exception as exc:
                if type(exc).__name__ in ("KilledWorker", "CommClosedError", "CancelledError", "FutureCancelledError"):
                    raise EngineError(
                        f"the dask cluster lost partition {partition or '.'!r} ({type(exc).__name__}: {exc}); "
                        "the partitions written before it are complete"
                    ) from None
                raise
            yield got
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _write_all(
    out: str | RemoteOut,
    todo: list[tuple[str, list[FileRef]]],
    rec: Recommendation,
    read: ReadOptions,
    opts: ScanOptions,
    jobs: int,
) -> Iterator[tuple[str, list[FileCount]]]:
    """Each partition written (in worker processes with jobs > 1, or on dask workers: the same
    bytes), with its counts."""
    shown = out if isinstance(out, str) else out.url
    if opts.engine == "dask" and todo:
        results: Iterator[Any] = _write_dask(out, todo, rec, read, opts, jobs)
    elif jobs > 1:
        results = run_ordered(
            _partition_task,
            todo,
            (out, rec, read),
            jobs=jobs,
            names=_task_files,
            task_timeout=opts.task_timeout,
        )
    else:
        results = (write_partition_to(out, p, refs, rec, read) for p, refs in todo)
    done = 0
    try:
        for got in results:
            yield todo[done][0], got
            done += 1
    except OSError as exc:  # a full disk, a folder made read-only: the earlier partitions stay
        partition = todo[done][0]  # the first partition not finished, in order
        raise OutputError(
            f"cannot write partition {partition or '.'!r} in {shown!r}: {exc.strerror or exc} "
            f"({exc.filename or posixpath.join(shown, partition)}); the partitions written before it are complete, "
            "this one is unchanged"
        ) from None


def write_delta_table(
    target: Path,
    groups: dict[str, list[FileRef]],
    rec: Recommendation,
    read: ReadOptions,
    columns: list[dict[str, str]],
) -> list[FileCount]:
    """The typed rows as a Delta table in target (partitioned by columns); the quarantine and the
    rejected rows per input folder, as for Parquet."""
    base = output_schema(rec)
    schema = delta_schema(base, [c for c in columns if c["name"] not in base.names])
    counts: list[FileCount] = []

    def batches() -> Iterator[pa.RecordBatch]:
        for partition, refs in groups.items():
            where = Path(partition) if partition else Path()
            sides = [
                (target / QUARANTINE_DIR / where / PART_NAME, QUARANTINE_SCHEMA),
                (target / REJECTED_DIR / where / PART_NAME, REJECTED_SCHEMA),
            ]
            with staged(sides) as (quarantine, rejected):
                for ref in refs:
                    fc = FileCount(ref.rel, partition)
                    for cast in cast_file(ref, partition, rec, read, fc):
                        quarantine.write(cast.quarantine)
                        rejected.write(cast.rejected)
                        yield with_partitions(storable(cast.good), dict(ref.partitions), schema)
                    counts.append(fc)

    write_delta(target, schema, [c["name"] for c in columns], batches)
    return counts


# -- re-partitioned by --partition-by -------------------------------------------------------------

HIVE_NULL = "__HIVE_DEFAULT_PARTITION__"  # Hive's name for the partition of nulls


def _folder_value(text: str | None) -> str:
    """A value as a key=value folder name holds it: %XX escapes (of its UTF-8 bytes) for every
    character but letters, digits and . _ - ~, as Hive escapes / = : and %; null and '' as Hive names them."""
    return quote(text, safe="") if text else HIVE_NULL


def _texts(col: pa.Array) -> list[str | None]:
    if pa.types.is_timestamp(col.type) or pa.types.is_date(col.type):
        return [None if v is None else v.isoformat() for v in col.to_pylist()]
    return pc.cast(col, pa.string()).to_pylist()


def split_schema(rec: Recommendation, keys: Sequence[str]) -> pa.Schema:
    """The files' schema under --partition-by: the recommended one without the partition
    columns, whose values the folder names hold (as Hive and Spark's partitionBy write them)."""
    schema = output_schema(rec)
    return pa.schema([f for f in schema if f.name not in keys], metadata=schema.metadata)


def write_repartitioned(
    out: Path, groups: dict[str, list[FileRef]], rec: Recommendation, read: ReadOptions, keys: Sequence[str]
) -> tuple[list[FileCount], list[str]]:
    """Every file cast, its rows split by the values of keys (folder keys or columns) into
    key=value partitions; all of them renamed into place at the end, with one quarantine and one
    rejected-rows file. Returns the counts and the partitions written."""
    schema = split_schema(rec, keys)
    counts: list[FileCount] = []
    writers: dict[str, Any] = {}
    with contextlib.ExitStack() as stack:
        side = stack.enter_context(
            staged(
                [
                    (out / QUARANTINE_DIR / PART_NAME, QUARANTINE_SCHEMA),
                    (out / REJECTED_DIR / PART_NAME, REJECTED_SCHEMA),
                ]
            )
        )
        for partition, refs in groups.items():
            for ref in refs:
                fc = FileCount(ref.rel, partition)
                folder = dict(ref.partitions)
                for cast in cast_file(ref, partition, rec, read, fc):
                    side[0].write(cast.quarantine)
                    side[1].write(cast.rejected)
                    n = cast.good.num_rows
                    parts = [
                        [folder.get(k)] * n if k not in cast.good.schema.names else _texts(cast.good.column(k))
                        for k in keys
                    ]
                    where: dict[str, list[int]] = {}
                    for i in range(n):
                        name = "/".join(f"{k}={_folder_value(p[i])}" for k, p in zip(keys, parts, strict=True))
                        where.setdefault(name, []).append(i)
                    body = pa.RecordBatch.from_arrays([cast.good.column(f.name) for f in schema], schema=schema)
                    for name, rows in where.items():
                        if name not in writers:
                            writers[name] = stack.enter_context(staged([(out / name / PART_NAME, schema)]))[0]
                        writers[name].write(body.take(pa.array(rows, pa.int64())))
                counts.append(fc)
    return counts, sorted(writers)


# -- the run ------------------------------------------------------------------------------------


def _digest(ref: FileRef) -> str:
    h = hashlib.sha256()
    with open_binary(ref.path) if ref.is_remote else open(ref.path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return f"{ref.size}:{h.hexdigest()}"


def rules_fingerprint(rec: Recommendation) -> str:
    """What the output bytes depend on besides the data: the schema and each path's rule and parameters."""
    # 'formats' counts the values by form (a description of the scan, not a parameter of the cast)
    doc = [
        (p.path, p.target.key(), p.nullable, p.rule, {k: v for k, v in p.params.items() if k != "formats"})
        for p in rec.walk()
    ]
    return hashlib.sha256(
        output_schema(rec).serialize().to_pybytes() + orjson.dumps(doc, option=orjson.OPT_SORT_KEYS)
    ).hexdigest()


def _partition_columns(refs: Sequence[FileRef]) -> list[dict[str, str]]:
    keys: dict[str, set[str]] = {}
    for ref in refs:
        for k, v in ref.partitions:
            keys.setdefault(k, set()).add(v)
    return [{"name": k, "type": partition_type(sorted(vs)).key()} for k, vs in keys.items()]


def _groups(refs: Sequence[FileRef]) -> dict[str, list[FileRef]]:
    """Files by output partition: the folder each lies in, relative to the root (key=value kept)."""
    out: dict[str, list[FileRef]] = {}
    for ref in refs:
        out.setdefault(posixpath.dirname(ref.rel), []).append(ref)
    return dict(sorted(out.items()))


def _read_json(path: Path) -> dict[str, Any] | None:
    try:
        doc = orjson.loads(path.read_bytes())
    except (OSError, orjson.JSONDecodeError):
        return None
    return doc if isinstance(doc, dict) else None


class _Dest:
    """Where the run writes: a local folder, or an object store prefix (remote set)."""

    def __init__(self, out: str | os.PathLike[str], inputs: Sequence[str | os.PathLike[str]], opts: ScanOptions):
        given = os.fspath(out)
        self.remote: RemoteOut | None = None
        if isinstance(given, str) and is_url(given):
            self.remote = check_remote_output(given, [str(p) for p in inputs], opts.storage)
            self.local = Path()
            self.shown = self.remote.url
        else:
            self.local = check_output(out, [p for p in inputs if not is_url(str(p))])
            self.shown = str(self.local)

    @property
    def task_out(self) -> str | RemoteOut:
        return self.remote if self.remote is not None else str(self.local)

    def read_json(self, rel: str) -> dict[str, Any] | None:
        if self.remote is None:
            return _read_json(self.local / rel)
        payload = self.remote.read(rel)
        try:
            doc = orjson.loads(payload) if payload is not None else None
        except orjson.JSONDecodeError:
            return None
        return doc if isinstance(doc, dict) else None

    def prepare(self) -> None:
        if self.remote is None:  # an object store keeps no temporary keys (objectstore.py)
            self.local.mkdir(parents=True, exist_ok=True)
            remove_leftovers(self.local)

    def put(self, rel: str, payload: bytes) -> None:
        if self.remote is None:
            replace_file(self.local / rel, payload)
        else:
            self.remote.put(rel, payload)

    def has(self, rel: str) -> bool:
        return self.remote.exists(rel) if self.remote is not None else (self.local / rel).is_file()

    def remove_partition(self, partition: str) -> None:
        if self.remote is None:
            remove_partition(self.local, partition)
        else:
            self.remote.remove_partition(partition)


def apply_landing(
    paths: str | os.PathLike[str] | Sequence[str | os.PathLike[str]],
    out: str | os.PathLike[str],
    *,
    rules: str | os.PathLike[str] | Recommendation | None = None,
    state: str | os.PathLike[str] | None = None,
    options: ScanOptions | None = None,
    batch_rows: int | None = None,
    partition_by: Sequence[str] = (),
    table_format: str = "parquet",
) -> ApplyResult:
    """Cast every file under paths with the rules into out (see the module docstring)."""
    given = [paths] if isinstance(paths, str | os.PathLike) else list(paths)
    opts = (options or ScanOptions()).merged(paths=given)
    if any(str(p).startswith(("gs://", "az://")) for p in [*opts.paths, out]):
        raise OptionError("apply reaches object stores through s3:// URLs only (S3 and S3-compatible servers)")
    if table_format not in ("parquet", "delta"):
        raise OptionError(f"--table-format must be parquet or delta; got {table_format!r}")
    if table_format == "delta" and is_url(os.fspath(out)):
        raise OptionError("--table-format delta writes a local folder; give --out a local folder")
    dest = _Dest(out, list(opts.paths), opts)
    target = dest.local
    rows = batch_rows or opts.read.batch_rows
    found = discover_for(opts)
    if rules is None:
        profile = read_found(found, opts, capped_jobs(opts), started=0.0)
        if profile.nothing_read:
            raise InputPathError(f"nothing readable: {profile.unread_text()} (driftline scan shows the problems)")
        rec, source = recommend(profile), "scan"
    elif isinstance(rules, Recommendation):
        rec, source = rules, "given"
    else:
        rec, source = load_recommendation(Path(rules)), Path(rules).name
    schema = output_schema(rec)
    unstorable = [p for f in schema for p in empty_structs(f.type, f.name)]
    if unstorable:
        raise OutputError(
            f"the recommended schema has a struct with no fields ({', '.join(unstorable)}), which Parquet cannot "
            "store; the data holds only empty objects there. Leave the field out (min_field_share) or fill it"
        )
    groups = _groups(found.files)
    keys = list(partition_by)
    columns = _check_partition_by(keys, rec, found.files)
    fingerprint = rules_fingerprint(rec) + "".join(f"|{k}" for k in keys)
    marker = dest.read_json(MARKER_NAME) or {}
    before = list(marker.get("partitions", []))
    previous = _read_json(Path(state)) if state is not None and Path(state).is_file() else None
    reusable: dict[str, Any] = {}
    same = previous and previous.get("format") == STATE_FORMAT and previous.get("rules") == fingerprint
    if same and previous and previous.get("out") == dest.shown and not keys:
        reusable = previous.get("partitions", {})
    counts: list[FileCount] = []
    written: list[str] = []
    kept: list[str] = []
    saved: dict[str, Any] = {}
    with terminate_as_interrupt():
        dest.prepare()
        dest.put(MARKER_NAME, json_bytes(_marker(sorted(set(before) | set(groups)), columns)))
        read = replace(opts.read, batch_rows=rows)
        if table_format == "delta":
            try:
                counts = write_delta_table(target, groups, rec, read, columns)
            except OSError as exc:
                raise OutputError(f"cannot write the Delta table {str(target)!r}: {exc.strerror or exc}") from None
            written = list(groups)
        elif keys:
            try:
                if dest.remote is None:
                    counts, written = write_repartitioned(target, groups, rec, read, keys)
                else:
                    with local_stage() as stage:
                        counts, written = write_repartitioned(stage, groups, rec, read, keys)
                        dest.remote.upload_tree(stage)
            except OSError as exc:
                raise OutputError(
                    f"cannot write into {dest.shown!r}: {exc.strerror or exc} ({exc.filename or dest.shown}); "
                    "the earlier output is unchanged"
                ) from None
        digests = {p: {r.rel: _digest(r) for r in refs} if state is not None else {} for p, refs in groups.items()}
        todo = []
        for partition, refs in groups.items() if not keys and table_format == "parquet" else ():
            old = reusable.get(partition)
            if old and old.get("files") == digests[partition] and dest.has(posixpath.join(partition, PART_NAME)):
                kept.append(partition)
            else:
                todo.append((partition, refs))
        jobs = capped_jobs(opts) if len(todo) > 1 or opts.engine == "dask" else 1
        fresh = dict(_write_all(dest.task_out, todo, rec, read, opts, jobs))
        for partition in groups if not keys and table_format == "parquet" else ():
            got = fresh.get(partition)
            part_counts = got if got is not None else [FileCount.from_json(c) for c in reusable[partition]["counts"]]
            counts += part_counts
            saved[partition] = {"files": digests[partition], "counts": [c.to_json() for c in part_counts]}
        written += [p for p, _ in todo]
        final = written if keys or table_format == "delta" else list(groups)
        for gone in sorted(set(before) - set(final) - ({""} if keys else set())):
            dest.remove_partition(gone)
        doc = reconcile(rec, counts, root=str(opts.paths[0]) if len(opts.paths) == 1 else "", rules_source=source)
        dest.put(RECONCILIATION_NAME, json_bytes(doc))
        dest.put(MARKER_NAME, json_bytes(_marker(final, columns)))
        if state is not None:
            state_doc = {
                "format": STATE_FORMAT,
                "version": 1,
                "out": dest.shown,
                "rules": fingerprint,
                "partitions": saved,
            }
            replace_file(Path(state), json_bytes(state_doc))
    shown: Path | str = target if dest.remote is None else dest.shown
    return ApplyResult(shown, cast(JSONObject, doc), tuple(written), tuple(kept))


def _check_partition_by(keys: Sequence[str], rec: Recommendation, refs: Sequence[FileRef]) -> list[dict[str, str]]:
    """The partition columns of the output, typed: the input's folder keys, or the keys of
    --partition-by (a folder key, or a top-level column of a scalar type); OptionError otherwise."""
    folder = {c["name"]: c for c in _partition_columns(refs)}
    if not keys:
        return list(folder.values())
    if len(set(keys)) != len(keys):
        raise OptionError(f"--partition-by names a key twice: {', '.join(keys)}")
    out = []
    for k in keys:
        if k in folder:
            out.append(folder[k])
            continue
        try:
            plan = rec.field(k)
        except KeyError:
            known = sorted({*folder, *(p.name for p in rec.fields)})
            raise OptionError(
                f"--partition-by {k!r}: no folder key or column of that name; known: {', '.join(known)}"
            ) from None
        if plan.target.name in ("struct", "list", "map", "null"):
            raise OptionError(f"--partition-by {k!r}: a {plan.target.key()} column cannot name a folder")
        out.append({"name": k, "type": plan.target.key()})
    return out


def _marker(partitions: Sequence[str], columns: Sequence[dict[str, str]]) -> dict[str, Any]:
    return {
        "format": MARKER_FORMAT,
        "version": 1,
        "partitions": list(partitions),
        "partition_columns": list(columns),
        "tables": {"data": PART_NAME, "quarantine": QUARANTINE_DIR, "rejected": REJECTED_DIR},
    }
