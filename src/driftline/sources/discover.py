"""Discovery: user paths and globs → a sorted, deduplicated list of FileRef.

Normalises user input once at the edge; the rest of the scan only sees FileRef (core/fileref.py,
re-exported here).
"""

from __future__ import annotations

import fnmatch
import glob
import os
import stat
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

from driftline.core.fileref import FileRef
from driftline.core.files import Skipped
from driftline.core.marker import OWN_OUTPUT, read_head
from driftline.errors import InputPathError
from driftline.sources.formats import detect_compression
from driftline.sources.registry import detect_format, skip_reason

#              | 'other-extension' | 'name-collision' | 'link-outside-root'
#              | 'own-output' (a report, schema or state driftline wrote)


@dataclass(frozen=True, slots=True)
class Discovery:
    root: str
    files: tuple[FileRef, ...]
    skipped: tuple[Skipped, ...] = field(default=())


def partition_values(rel: str) -> tuple[tuple[str, str], ...]:
    """Partition values from the key=value folders of a relative path.

    Values are data, never paths: they are kept verbatim as strings.

    >>> partition_values("region=north/day=2026-11-30/part-0.jsonl")
    (('region', 'north'), ('day', '2026-11-30'))
    """
    parts = rel.split("/")[:-1]
    out = []
    for part in parts:
        key, sep, value = part.partition("=")
        if sep and key:
            out.append((key, value))
    return tuple(out)


def _display(path: str) -> str:
    # File names that are not valid UTF-8 reach reports with surrogate escapes replaced.
    return path.encode("utf-8", "surrogateescape").decode("utf-8", "backslashreplace")


def _matches(rel: str, patterns: Sequence[str]) -> bool:
    name = rel.rsplit("/", 1)[-1]
    return any(fnmatch.fnmatchcase(rel, p) or fnmatch.fnmatchcase(name, p) for p in patterns)


def _expand(arg: str) -> list[str]:
    # A path that exists is itself, before it is a pattern: 'report[1].csv' names one file.
    if any(ch in arg for ch in "*?[") and not os.path.lexists(arg):
        hits = sorted(glob.glob(arg, recursive=True))
        if not hits:
            raise InputPathError(f"no file matches the pattern {arg!r}")
        return hits
    if not os.path.lexists(arg):
        raise InputPathError(f"{arg!r} does not exist; give a file, a folder or a glob")
    return [arg]


def outside_root(path: str, bounds: Sequence[str] | None) -> bool:
    """Whether path is a symbolic link whose target lies outside every bound (the real paths of
    the folders and files the user named); None bounds: links are followed wherever they go.

    A landing folder that links to a system file or another team's folder would otherwise put
    their values in a report that travels.  Only links are judged: what the user named is in.
    """
    if bounds is None or not os.path.islink(path):
        return False
    target = os.path.realpath(path)
    return not any(target == b or target.startswith(b.rstrip(os.sep) + os.sep) for b in bounds)


def _bounds(tops: Sequence[str], args: Sequence[str]) -> list[str]:
    """The real paths within which links are followed: each path named, and the folder a glob
    starts from (not what its matches link to)."""
    out = [os.path.realpath(t) for t, a in zip(tops, args, strict=True) if not any(ch in a for ch in "*?[")]
    for a in args:
        if any(ch in a for ch in "*?["):
            base = a[: min(a.index(ch) for ch in "*?[" if ch in a)]
            out.append(os.path.realpath(os.path.dirname(base) or "."))
    return out


def _walk(top: str, bounds: Sequence[str] | None = None) -> Iterable[tuple[str, os.stat_result | None, str | None]]:
    """Yield (path, stat, problem) for every entry below top, never following a loop, nor a
    link out of bounds (outside_root)."""
    seen: set[tuple[int, int]] = set()
    stack = [top]
    while stack:
        folder = stack.pop()
        try:
            st = os.stat(folder)
        except OSError as exc:
            yield folder, None, f"cannot list: {exc.strerror}"
            continue
        ident = (st.st_dev, st.st_ino)
        if ident in seen:
            yield folder, None, "symlink-loop"
            continue
        seen.add(ident)
        try:
            entries = sorted(os.scandir(folder), key=lambda e: e.name, reverse=True)
        except OSError as exc:
            yield folder, None, f"cannot list: {exc.strerror}"
            continue
        for entry in entries:
            # is_symlink answers from the listing (no system call): only links are judged
            if bounds is not None and entry.is_symlink() and outside_root(entry.path, bounds):
                yield entry.path, None, "link-outside-root"
                continue
            try:
                is_dir = entry.is_dir()  # follows symlinks; loops are caught by `seen`
            except OSError:
                is_dir = False
            if is_dir:
                stack.append(entry.path)
                continue
            try:
                yield entry.path, entry.stat(), None
            except OSError as exc:
                yield entry.path, None, f"cannot stat: {exc.strerror}"


def discover(
    paths: Sequence[str | os.PathLike[str]],
    *,
    include: Sequence[str] = (),
    exclude: Sequence[str] = (),
    include_hidden: bool = False,
    sniff_unknown: bool = False,
    follow_links: bool = False,
) -> Discovery:
    """Find the input files below paths, in sorted relative-path order.

    A path that exists is taken as it is; only one that does not is expanded as a glob.
    Hidden files and markers (names starting with '.' or '_') are skipped and counted,
    and so are folders of those names, unless include_hidden is set.  Files found in a
    folder or by a glob with an extension driftline does not read (.sql, .txt, .md) are
    skipped as 'other-extension' without being read, unless sniff_unknown is set: then, as
    files without an extension always are, and as a file named on its own always is, they
    are read when their first bytes look like JSON, CSV/TSV or Parquet.
    and so are folders of those names, unless include_hidden is set.  Symbolic links whose
    target lies outside the paths named are skipped and counted (link-outside-root) unless
    follow_links is set; devices, FIFOs and loops are never read either way.
    """
    if not paths:
        raise InputPathError("no input path given; name a file, a folder or a glob")
    expanded: list[str] = []
    named: set[str] = set()  # files named as they are: read whatever their extension
    for p in paths:
        hits = _expand(os.fspath(p))
        expanded.extend(hits)
        if hits == [os.fspath(p)]:
            named.add(os.path.abspath(hits[0]))
    absolute = [os.path.abspath(p) for p in expanded]
    args = [os.fspath(p) for p in paths]
    bounds = None if follow_links else _bounds([os.path.abspath(a) for a in args], args)
    root = _common_root(absolute)
    below = root.rstrip(os.sep) + os.sep
    files: dict[str, FileRef] = {}
    skipped: list[Skipped] = []
    for top in absolute:
        entries = _walk(top, bounds) if os.path.isdir(top) else [(top, _stat(top), None)]
        if outside_root(top, bounds):  # a glob's match that links out of the folder it searched
            entries = [(top, None, "link-outside-root")]
        for path, st, problem in entries:
            # paths below the root are normalised (abspath, then names joined): cutting the root's
            # prefix is what relpath answers, without its per-call normalising of both
            rel = _display(
                (path[len(below) :] if path.startswith(below) else os.path.relpath(path, root)).replace(os.sep, "/")
            )
            if rel == ".":
                rel = _display(os.path.basename(path))
            if problem is not None:
                skipped.append(Skipped(rel, problem))
                continue
            verdict = _filter(rel, st, include, exclude, include_hidden)
            if verdict is not None:
                skipped.append(Skipped(rel, verdict))
                continue
            marked, head = read_head(path)  # one open for the marker and the compression's magic
            if marked:  # driftline's own output is never data
                skipped.append(Skipped(rel, OWN_OUTPUT))
                continue
            sniff = sniff_unknown or path in named
            fmt = detect_format(path, sniff_unknown=sniff)
            if fmt is None:
                skipped.append(Skipped(rel, skip_reason(path, sniff)))
                continue
            assert st is not None
            if rel in files and files[rel].path != path:
                # Two names show the same once undecodable bytes are escaped ('caf\xe9' as bytes
                # and as text): keep the first, and count the other rather than lose it silently.
                skipped.append(Skipped(rel, "name-collision"))
                continue
            files[rel] = FileRef(
                path=path,
                rel=rel,
                partitions=partition_values(rel),
                format=fmt,
                compression=detect_compression(path, head),
                size=st.st_size,
                mtime_ns=st.st_mtime_ns,
            )
    ordered = tuple(files[k] for k in sorted(files))
    return Discovery(root=_display(root), files=ordered, skipped=tuple(sorted(set(skipped), key=lambda s: s.rel)))


def _stat(path: str) -> os.stat_result | None:
    try:
        return os.stat(path)
    except OSError:
        return None


def _filter(
    rel: str,
    st: os.stat_result | None,
    include: Sequence[str],
    exclude: Sequence[str],
    include_hidden: bool,
) -> str | None:
    parts = rel.split("/")
    if not include_hidden:
        for part in parts:
            if part.startswith("."):
                return "hidden"
            if part.startswith("_"):
                return "marker"
    if st is None:
        return "cannot stat"
    if not stat.S_ISREG(st.st_mode):
        return "special"  # FIFOs, sockets and devices are never opened
    if exclude and _matches(rel, exclude):
        return "excluded"
    if include and not _matches(rel, include):
        return "not-included"
    return None


def _common_root(paths: Sequence[str]) -> str:
    if len(paths) == 1:
        only = paths[0]
        return only if os.path.isdir(only) else os.path.dirname(only)
    common = os.path.commonpath(paths)
    return common if os.path.isdir(common) else os.path.dirname(common)
