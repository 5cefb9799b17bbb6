"""The JSON scan report: writing a Profile out and loading it back, losslessly.

The format is described by docs/report.schema.json (JSON Schema 2020-12). A saved
report loads back into an equal Profile, so later verbs (schema, diff, check) can work
from it without rescanning.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable, Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

import orjson
import pyarrow as pa

from driftline.core import jsonnum
from driftline.core.documents import read_json_document
from driftline.core.files import FileIssue, FileResult, Skipped
from driftline.core.lattice import join_all, parse_key
from driftline.core.observation import TEXT_CLASS_TYPE, Observation
from driftline.core.options import DEFAULT_MAX_PATHS
from driftline.core.stats import example_json
from driftline.core.textfile import Dialect, TextEncoding
from driftline.core.validation import check_document, damaged, found, pointer
from driftline.core.version import __version__
from driftline.core.words import count, plural
from driftline.errors import ReportVersionError
from driftline.observe.textclass import classify
from driftline.results.profile import Profile
from driftline.results.shapes import Discriminator

REPORT_FORMAT = "driftline-report"
SHALLOW_KINDS = frozenset({"list", "struct", "map"})  # lattice._SHALLOW: nested kinds without children
REPORT_VERSION = 2  # 2: example values as JSON values (1: as JSON text in a string); version 1 is upgraded on load


def partition_types(profile: Profile) -> dict[str, dict[str, Any]]:
    """Each partition key with its distinct values and the type those values read as."""
    values: dict[str, set[str]] = {}
    for f in profile.files:
        for k, v in f.partitions:
            values.setdefault(k, set()).add(v)
    out = {}
    for key in profile.partition_keys():
        vals = sorted(values[key])
        scan = classify(pa.array(vals, pa.string()))
        kinds = [TEXT_CLASS_TYPE[c] for c in scan.counts]
        inferred = join_all(parse_key(k) for k in kinds if k is not None).key() if any(kinds) else "null"
        out[key] = {"type": inferred, "values": vals}
    return out


def to_dict(profile: Profile, *, batches: bool = True) -> dict[str, Any]:
    """The whole report as plain JSON data."""
    formats = Counter(f.format for f in profile.files)
    issues = profile.issues
    return {
        "format": REPORT_FORMAT,
        "version": REPORT_VERSION,
        "tool": {"name": "driftline", "version": __version__},
        "root": profile.root,
        "options": dict(profile.options),
        "duration_s": round(profile.duration_s, 3),
        "summary": {
            "files": len(profile.files),
            "rows": profile.rows,
            "bytes": profile.bytes,
            "formats": dict(sorted(formats.items())),
            "fields": len(profile.fields),
            "events": profile.event_total,
            "errors": sum(1 for i in issues if i.severity == "error"),
            "warnings": sum(1 for i in issues if i.severity == "warning"),
            "skipped": len(profile.skipped),
            **summarised(profile),
        },
        "partitions": partition_types(profile),
        "fields": {
            path: {
                "container": s.container,
                "absent": s.absent,
                "nullable": s.nullable,
                **s.stats.to_json(),
                **_formats(profile.types_by_format.get(path, {})),
                **_by_source(profile.classes_by_source.get(path, {})),
            }
            for path, s in profile.fields.items()
        },
        **({"shapes": profile.shapes.to_json()} if profile.shapes is not None else {}),
        "events": [e.to_json() for e in profile.events],
        "files": [_file_json(f, batches) for f in profile.files],
        "skipped": [{"path": s.rel, "reason": s.reason} for s in profile.skipped],
    }


def _formats(by_format: dict[str, dict[str, int]]) -> dict[str, Any]:
    """{"formats": format → type → values} for a field whose values came in more than one format."""
    return {"formats": by_format} if len(by_format) > 1 else {}


def _by_source(by_source: dict[str, dict[str, int]]) -> dict[str, Any]:
    """{"classes_by_source": strings / cells → class → count} for a field with content classes."""
    return {"classes_by_source": by_source} if by_source else {}


def summarised(profile: Profile) -> dict[str, Any]:
    """{"summarised": what the scan kept in summary only}, or {} when it kept everything:
    events past the walk's bound (drift.EPISODES_HELD, counted by kind), batches merged into
    blocks, paths past max_paths."""
    out: dict[str, Any] = {}
    if len(profile.events) < profile.event_total:
        out["events_listed"] = len(profile.events)
        out["events_by_kind"] = profile.event_counts
    if profile.batch_span > 1:
        out["batch_span"] = profile.batch_span
    paths, values = profile.other_fields
    if paths:
        out["other_paths"], out["other_values"] = paths, values
    return {"summarised": out} if out else {}


def limit_notes(profile: Profile) -> list[str]:
    """One sentence per limit the scan reached (summarised), for the terminal and stderr."""
    got = summarised(profile).get("summarised", {})
    notes = []
    if "other_paths" in got:
        cap = profile.options.get("max_paths", DEFAULT_MAX_PATHS)
        notes.append(
            f"field paths capped at {cap:,} (--max-paths): {count(got['other_values'], 'value')} of "
            f"{got['other_paths']:,} more {plural(got['other_paths'], 'path')} (counted per batch) "
            f"{plural(got['other_values'], 'is', 'are')} counted as other fields"
        )
    if "events_listed" in got:
        notes.append(
            f"{profile.event_total:,} drift events found; the first {got['events_listed']:,} are followed and "
            "listed (the most a scan holds), all are counted by kind and level in the JSON report"
        )
    if "batch_span" in got:
        notes.append(
            f"batches summarised: up to {got['batch_span']:,} consecutive batches per observation, so that "
            "memory stays bounded (counts stay exact; drift is located per block)"
        )
    return notes


def _file_json(f: FileResult, batches: bool) -> dict[str, Any]:
    extra = {"batch_span": f.batch_span} if f.batch_span > 1 else {}
    return {
        "path": f.rel,
        "format": f.format,
        "compression": f.compression,
        "partitions": dict(f.partitions),
        "size": f.size,
        "mtime_ns": f.mtime_ns,
        "rows": f.rows,
        "complete": f.complete,
        "encoding": None if f.encoding is None else f.encoding.to_json(),
        "declared": f.declared,
        "dialect": f.dialect.to_json() if f.dialect is not None else None,
        "issues": [i.to_json() for i in f.issues],
        "batches": [o.to_json() for o in f.observations] if batches else None,
        **extra,
    }


def file_json(f: FileResult) -> dict[str, Any]:
    """One file of a report, with its batch observations (the inverse of file_from_json)."""
    return _file_json(f, True)


def file_from_json(fd: Mapping[str, Any]) -> FileResult:
    """One file back from its report JSON; it needs the batch observations."""
    rel = fd["path"]
    return FileResult(
        rel=rel,
        format=fd["format"],
        compression=fd.get("compression"),
        partitions=tuple(fd.get("partitions", {}).items()),
        size=fd["size"],
        mtime_ns=fd["mtime_ns"],
        rows=fd["rows"],
        observations=tuple(Observation.from_json(rel, o) for o in fd["batches"]),
        issues=tuple(FileIssue.from_json(i) for i in fd.get("issues", [])),
        declared=fd.get("declared"),
        complete=fd.get("complete", True),
        dialect=Dialect.from_json(fd["dialect"]) if fd.get("dialect") else None,
        encoding=TextEncoding.from_json(fd.get("encoding")),
        batch_span=fd.get("batch_span", 1),
    )


def dumps(profile: Profile) -> bytes:
    return jsonnum.dumps(to_dict(profile), option=orjson.OPT_INDENT_2 | orjson.OPT_NON_STR_KEYS) + b"\n"


def _type_keys(entries: Sequence[Mapping[str, Any]]) -> Iterator[tuple[list[str | int], str]]:
    """Every observed type key in file entries, with its path."""
    for i, fd in enumerate(entries):
        for j, batch in enumerate(fd.get("batches") or ()):
            for path, st in batch["fields"].items():
                for key in st.get("types", {}):
                    yield ["files", i, "batches", j, "fields", path, "types", key], key


def _bad_type_key(entries: Sequence[Mapping[str, Any]]) -> tuple[str, str] | None:
    """(JSON pointer, key) of the first type key that does not parse; None when all do."""
    bad = set()
    for key in {k for _, k in _type_keys(entries)}:
        if key in SHALLOW_KINDS:
            continue  # observations keep only the kind of a nested value
        try:
            parse_key(key)
        except (ValueError, TypeError, KeyError):
            bad.add(key)
    if not bad:
        return None
    return next((pointer(path), key) for path, key in _type_keys(entries) if key in bad)


def files_from_json(
    entries: Sequence[Mapping[str, Any]],
    what: str,
    source: str,
    convert: Callable[[Mapping[str, Any]], FileResult] | None = None,
) -> tuple[FileResult, ...]:
    """File entries (already valid against their JSON Schema) back as FileResults.

    What a schema cannot say is checked here, each as a DamagedFileError with its JSON
    pointer: type keys that parse, and each path once.
    """
    bad = _bad_type_key(entries)
    if bad is not None:
        raise damaged(what, source, bad[0], "a type key such as int64, string or list", found(bad[1]))
    files: list[FileResult] = []
    first: dict[str, int] = {}
    for i, fd in enumerate(entries):
        try:
            f = (convert or file_from_json)(fd)
        except (KeyError, TypeError, ValueError, AttributeError) as exc:
            raise damaged(
                what, source, f"/files/{i}", "a file entry driftline can read", f"{type(exc).__name__}: {exc}"
            ) from None
        if f.rel in first:
            raise damaged(
                what,
                source,
                f"/files/{i}/path",
                "each file listed once",
                f"{found(f.rel)} again (first at /files/{first[f.rel]})",
            )
        first[f.rel] = i
        files.append(f)
    return tuple(files)


def _upgrade_samples(stats: Mapping[str, Any]) -> dict[str, Any]:
    samples = stats.get("samples")
    if not isinstance(samples, Mapping):
        return dict(stats)
    return {**stats, "samples": {k: [_upgrade_example(e) for e in exs] for k, exs in samples.items()}}


def _upgrade_example(e: Any) -> Any:
    if not isinstance(e, Mapping) or not isinstance(e.get("value"), str):
        return e  # left for the schema check to name
    rest = {k: v for k, v in e.items() if k != "value"}
    return {**rest, **example_json(e["value"])}


def upgrade_file_v1(fd: Any) -> Any:
    """One file entry of version 1 (a report's or a state file's) with its examples as version 2 writes them."""
    if not isinstance(fd, Mapping) or not isinstance(fd.get("batches"), list):
        return fd
    batches = [
        {**b, "fields": {p: _upgrade_samples(st) for p, st in b["fields"].items()}}
        if isinstance(b, Mapping) and isinstance(b.get("fields"), Mapping)
        else b
        for b in fd["batches"]
    ]
    return {**fd, "batches": batches}


def upgrade_v1(data: Mapping[str, Any]) -> dict[str, Any]:
    """A version 1 report as version 2 writes it: every example value (fields.*.samples,
    files.*.batches.*.fields.*.samples, events.*.example) from JSON text in a string to the
    JSON value itself (example_json). Nothing else differs between the two versions."""
    out = {**data, "version": REPORT_VERSION}
    if isinstance(data.get("fields"), Mapping):
        out["fields"] = {p: _upgrade_samples(st) if isinstance(st, Mapping) else st for p, st in data["fields"].items()}
    if isinstance(data.get("events"), list):
        out["events"] = [
            {**e, "example": example_json(e["example"])}
            if isinstance(e, Mapping) and isinstance(e.get("example"), str)
            else e
            for e in data["events"]
        ]
    if isinstance(data.get("files"), list):
        out["files"] = [upgrade_file_v1(fd) for fd in data["files"]]
    return out


def from_dict(data: Mapping[str, Any], *, source: str = "report") -> Profile:
    """Load report data back into a Profile.

    A version 1 report is upgraded first (upgrade_v1). Raises ReportVersionError for another
    format or version, DamagedFileError (with the
    JSON pointer of the first problem) for a report that does not match
    docs/report.schema.json or whose values do not fit together.
    """
    if not isinstance(data, Mapping) or data.get("format") != REPORT_FORMAT:
        hint = (
            " (it is a report set of several datasets: load_report_set reads it)"
            if isinstance(data, Mapping) and data.get("format") == "driftline-report-set"
            else ""
        )
        raise ReportVersionError(f'{source} is not a driftline scan report (no "format": "{REPORT_FORMAT}"){hint}')
    if data.get("version") == 1:
        data = upgrade_v1(data)
    if data.get("version") != REPORT_VERSION:
        raise ReportVersionError(
            f"{source} has report version {data.get('version')!r} (at /version); this driftline reads versions "
            f"1 and {REPORT_VERSION}. Rescan the data to make a new report."
        )
    check_document(data, "report", "report", source)
    for i, fd in enumerate(data["files"]):
        if fd["batches"] is None:
            raise ReportVersionError(
                f"{source} was written without batch observations (at /files/{i}/batches); rescan to load it"
            )
    files = files_from_json(data["files"], "report", source)
    skipped = tuple(Skipped(s["path"], s["reason"]) for s in data["skipped"])
    shapes = Discriminator.from_json(data["shapes"]) if "shapes" in data else None
    return Profile(data["root"], files, skipped, dict(data["options"]), data.get("duration_s", 0.0), shapes)


def load_report(path: str | Path) -> Profile:
    """Read a saved scan report (JSON) back into a Profile equal to the one that was saved.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
    >>> p = driftline.scan(d); _ = (d / "r.json").write_bytes(dumps(p))
    >>> driftline.load_report(d / "r.json") == p
    True
    """
    data = read_json_document(path, "report", ReportVersionError, "; give a report that driftline wrote")
    return from_dict(data, source=repr(str(path)))
