"""The incremental state file: per-file results kept between runs, so a rescan reads only
new and changed files.

A file is taken from the state when its relative path, absolute location, size,
modification time (ns), format and compression are unchanged — and, with verify, when
its content hash is too — and its last read went to the end. Files gone from disk drop
out. Because a Profile is built only from its per-file results, the incremental Profile
equals a full rescan's.

The file is JSON, written atomically (a temporary sibling, then a rename):

    {"format": "driftline-state", "version": 1, "tool": {...}, "root": "<scan root>",
     "read": {<read options>}, "digest": "blake2b-128" | null,
     "files": [<a report file entry with its batches>, "digest": "<hex>" | null ...]}

A damaged state file of ours (cut short, garbled, or not matching docs/state.schema.json)
is set aside as <name>.damaged and every file is read again, with a warning that says why;
a foreign file or another version is an error that says so; rebuild=True starts over.
"""

from __future__ import annotations

import contextlib
import dataclasses
import hashlib
import os
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import orjson

from driftline.core import jsonnum
from driftline.core.documents import pointer_at
from driftline.core.files import FileResult
from driftline.core.options import ReadOptions, ScanOptions
from driftline.core.validation import check_document, damaged
from driftline.core.version import __version__
from driftline.emit.atomic import write_output
from driftline.emit.targets import check_targets
from driftline.errors import DamagedFileError, InputPathError, ReportVersionError
from driftline.results.profile import Profile
from driftline.results.report import file_from_json, file_json, files_from_json, upgrade_file_v1
from driftline.scanning.run import Progress, scan_paths
from driftline.sources.discover import FileRef

STATE_FORMAT = "driftline-state"
STATE_VERSION = 2  # 2: example values as JSON values (the report's version 2); version 1 is upgraded on load
DIGEST = "blake2b-128"


@dataclass(frozen=True)
class State:
    """A loaded state: the root it was made for, its read options and per-file results.

    files holds the entries of a root checked as one table (by relative path); placed those of
    a root checked dataset by dataset, each with its dataset and its path relative to the root
    (the entry's own path is relative to the dataset's folder, as the dataset's profile has it).
    """

    root: str
    read: Mapping[str, Any]
    files: Mapping[str, FileResult]
    placed: tuple[Placed, ...] = ()


@dataclass(frozen=True, slots=True)
class Placed:
    """A state entry of a root checked dataset by dataset: the file's dataset and root-relative path."""

    dataset: str
    path: str  # relative to the root
    result: FileResult  # rel relative to the dataset's folder


@dataclass(frozen=True)
class StateRun:
    """An incremental scan: the profile, how many files were read, reused and dropped."""

    profile: Profile
    read: int
    reused: int
    dropped: int
    note: str | None = None


def file_digest(path: str) -> str:
    """The content hash the state keeps with --verify (BLAKE2b, 16-byte digest)."""
    h = hashlib.blake2b(digest_size=16)
    with open(path, "rb") as fh:
        while chunk := fh.read(1 << 20):
            h.update(chunk)
    return h.hexdigest()


def _read_options_json(opts: ReadOptions) -> dict[str, Any]:
    # as the state file holds them (tuples become lists), so a loaded state compares equal
    return orjson.loads(orjson.dumps(dataclasses.asdict(opts)))


_STATE_HEAD = re.compile(rb'\A\s*\{\s*"format"\s*:\s*"driftline-state"')
_STATE_START = b'{"format":"driftline-state"'


def _ours(raw: bytes) -> bool:
    """A state file of ours, perhaps cut short: it begins as one, or is a beginning of one (even empty)."""
    return _STATE_HEAD.match(raw) is not None or _STATE_START.startswith(re.sub(rb"\s+", b"", raw[:64]))


def load_state(path: str | Path) -> State | None:
    """Read a state file; None when there is none yet.

    A state file of ours that is damaged (cut short, not JSON, or not matching
    docs/state.schema.json) raises DamagedFileError with the JSON pointer of the problem;
    a file of another kind or version raises ReportVersionError.
    """
    source = repr(str(path))
    try:
        raw = Path(path).read_bytes()
    except FileNotFoundError:
        return None
    except OSError as exc:
        raise InputPathError(f"cannot read state file {source}: {exc.strerror}") from None
    try:
        data = jsonnum.loads(raw)
    except orjson.JSONDecodeError as exc:
        if not _ours(raw):
            raise ReportVersionError(
                f"{source} is not a driftline state file (it is not JSON); give --state "
                "another file name, or --rebuild to replace it with a new state"
            ) from None
        raise damaged(
            "state file",
            source,
            pointer_at(raw, exc.pos),
            "JSON",
            f"{exc.msg} at line {exc.lineno}, column {exc.colno} (cut short or garbled)",
        ) from None
    if not isinstance(data, dict) or data.get("format") != STATE_FORMAT:
        what = data.get("format") if isinstance(data, dict) else None
        raise ReportVersionError(
            f"{str(path)!r} is not a driftline state file"
            + (f" (its format is {what!r})" if isinstance(what, str) else "")
            + "; give --state another file name, or --rebuild to replace it with a new state"
        )
    if data.get("version") == 1 and isinstance(data.get("files"), list):
        data = {**data, "version": STATE_VERSION, "files": [upgrade_file_v1(fd) for fd in data["files"]]}
    if data.get("version") != STATE_VERSION:
        raise ReportVersionError(
            f"state file {str(path)!r} has format version {data.get('version')!r}; this driftline "
            f"reads versions 1 and {STATE_VERSION}; run with --rebuild to start over"
        )
    check_document(data, "state", "state file", source)
    results = files_from_json(
        data["files"], "state file", source, lambda fd: dataclasses.replace(file_from_json(fd), digest=fd["digest"])
    )
    whole = {f.rel: f for f, fd in zip(results, data["files"], strict=True) if "dataset" not in fd}
    placed = tuple(
        Placed(fd["dataset"]["name"], fd["dataset"]["path"], f)
        for f, fd in zip(results, data["files"], strict=True)
        if "dataset" in fd
    )
    return State(data["root"], data["read"], whole, placed)


def set_aside(path: str) -> str:
    """Move a damaged state file out of the way (kept for a look, never read again); its new name."""
    aside = path + ".damaged"
    os.replace(path, aside)
    return aside


def state_bytes(profile: Profile, opts: ReadOptions, *, verify: bool) -> bytes:
    """The state file's content for a profile."""
    files = []
    for f in profile.files:
        entry = file_json(f)
        entry["digest"] = f.digest if verify else None
        files.append(entry)
    return _state_doc(profile.root, files, opts, verify=verify)


def placed_state_bytes(root: str, placed: Sequence[Placed], opts: ReadOptions, *, verify: bool) -> bytes:
    """The state file's content for a root checked dataset by dataset: each entry with its dataset."""
    files = []
    for p in placed:
        entry = file_json(p.result)
        entry["digest"] = p.result.digest if verify else None
        entry["dataset"] = {"name": p.dataset, "path": p.path}
        files.append(entry)
    return _state_doc(root, files, opts, verify=verify)


def _state_doc(root: str, files: list[dict[str, Any]], opts: ReadOptions, *, verify: bool) -> bytes:
    doc = {
        "format": STATE_FORMAT,
        "version": STATE_VERSION,
        "tool": {"name": "driftline", "version": __version__},
        "root": root,
        "read": _read_options_json(opts),
        "digest": DIGEST if verify else None,
        "files": files,
    }
    return jsonnum.dumps(doc, option=orjson.OPT_NON_STR_KEYS) + b"\n"


def open_state(state_path: str, opts: ReadOptions, *, rebuild: bool) -> tuple[State | None, str | None]:
    """The state to reuse (None: read every file) and a note: a damaged state set aside, or read
    options changed since it was written."""
    note = None
    try:
        state = None if rebuild else load_state(state_path)
    except DamagedFileError as exc:
        # A damaged state costs a full rescan, never a wrong result and never a stop.
        try:
            aside = set_aside(state_path)
        except OSError as err:
            raise InputPathError(f"{exc}; it cannot be set aside ({err.strerror}); remove it, or --rebuild") from None
        note = f"warning: {exc}; it was set aside as {aside!r} and every file is read again"
        state = None
    if state is not None and dict(state.read) != _read_options_json(opts):
        note = "the read options changed since the state was written; every file is read again"
        state = None
    return state, note


def unchanged(prev: FileResult, ref: FileRef, *, verify: bool) -> bool:
    """Whether a state's result still holds for a listed file: read to the end, and the same size,
    modification time, format, compression and partitions (with verify, the same content hash)."""
    if not prev.complete:
        return False  # a read cut short (permissions, a failing disk) may go through now
    if (prev.size, prev.mtime_ns, prev.format, prev.compression, prev.partitions) != (
        ref.size,
        ref.mtime_ns,
        ref.format,
        ref.compression,
        ref.partitions,
    ):
        return False
    if verify:
        try:
            digest = file_digest(ref.path)
        except OSError:
            return False  # unreadable now: reading it reports why
        return prev.digest == digest
    return True


def scan_incremental(
    paths: Sequence[str | os.PathLike[str]],
    state_path: str | Path,
    *,
    options: ScanOptions | None = None,
    read: ReadOptions | None = None,
    verify: bool = False,
    rebuild: bool = False,
    progress: Progress | None = None,
    write_inside: bool = False,
    **keywords: Any,
) -> StateRun:
    """Scan paths reading only files the state does not hold unchanged; then save the state.

    options says how (read, when given, replaces its read options; the flat keywords of
    driftline.core.options.ScanKeywords apply over both).

    >>> import tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
    >>> first = scan_incremental([d], d / ".state")
    >>> again = scan_incremental([d], d / ".state")
    >>> (first.read, again.read, again.reused, again.profile == scan_paths([d]))
    (1, 0, 1, True)
    """
    scan = options or ScanOptions()
    if read is not None:
        scan = dataclasses.replace(scan, read=read)
    scan = scan.merged(**keywords)
    opts = scan.read
    state_path = os.fspath(state_path)
    if state_path == "-" or os.path.isdir(state_path):
        raise InputPathError(f"--state needs a file name, not {state_path!r}")
    # Not over an input, and not inside a scanned folder unless asked (or named as discovery skips).
    check_targets(
        [("--state", state_path)], scanned=paths, write_inside=write_inside, include_hidden=scan.include_hidden
    )
    state, note = open_state(state_path, opts, rebuild=rebuild)
    reused: dict[str, FileResult] = {}
    where: dict[str, str] = {}

    def reuse(ref: FileRef) -> FileResult | None:
        where[ref.rel] = ref.path
        if state is None:
            return None
        tail = os.sep + ref.rel.replace("/", os.sep)
        if ref.path.endswith(tail) and ref.path[: -len(tail)] != state.root:
            # Raised before any file is read: this state belongs to another scan.
            raise ReportVersionError(
                f"state file {state_path!r} was made for {state.root!r}, not {ref.path[: -len(tail)]!r}; "
                "give this scan its own --state file, or --rebuild to replace it"
            )
        prev = state.files.get(ref.rel)
        if prev is None or os.path.join(state.root, *ref.rel.split("/")) != ref.path:
            return None
        if not unchanged(prev, ref, verify=verify):
            return None
        reused[ref.rel] = prev
        return prev

    profile = scan_paths(paths, options=scan, progress=progress, reuse=reuse)
    if verify:
        files = []
        for f in profile.files:
            if f.digest is None and f.rel in where:
                # A file that cannot be hashed stays without one: the next --verify run reads it again.
                with contextlib.suppress(OSError):
                    f = dataclasses.replace(f, digest=file_digest(where[f.rel]))
            files.append(f)
        profile = dataclasses.replace(profile, files=tuple(files))
    write_output(state_path, state_bytes(profile, opts, verify=verify))
    kept = {f.rel for f in profile.files}
    dropped = sum(1 for rel in (state.files if state is not None else {}) if rel not in kept)
    return StateRun(profile, len(profile.files) - len(reused), len(reused), dropped, note)
