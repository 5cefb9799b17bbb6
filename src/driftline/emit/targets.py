"""Where outputs may go: one output per target, never onto an input, never into a scanned folder.

Checked before anything is read, for every verb that writes a file:

  * two outputs aimed at one file, or two at standard output, are a usage error;
  * an output that is an input of the run (a data file, a saved report, a baseline, a
    policy), through a symlink or a hard link (same device and inode), is refused;
  * an output inside a scanned folder (or matched by a scanned glob, or linked from a
    scanned folder) is refused: a later scan would read it as data. With write_inside
    (the CLI's --write-inside) it may go there when it is new or an earlier output of
    driftline's (which carries the marker, so discovery leaves it out); an existing data
    file is never replaced. A name discovery skips anyway ('.' or '_' first, without
    --hidden) needs no flag, on the same condition.

>>> import tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n')
>>> try:
...     check_targets([("--json", str(d / "a.jsonl"))], scanned=[str(d)])
... except OutputError as exc:
...     print(str(exc).split(": ", 1)[1][:44])
it would replace the file 'a.jsonl' of the
"""

from __future__ import annotations

import glob
import os
import stat
from collections.abc import Sequence
from dataclasses import dataclass

from driftline.core.marker import carries_marker
from driftline.emit.atomic import is_stdout, own_descriptor
from driftline.errors import OutputError

Output = tuple[str, "str | os.PathLike[str] | None"]  # (option that names it, target)
WRITE_INSIDE = "--write-inside"


@dataclass(frozen=True, slots=True)
class _Inputs:
    named: dict[tuple[int, int], str]  # (device, inode) → the input path as given
    folders: tuple[tuple[str, str], ...]  # (resolved folder, as given)
    matched: dict[tuple[int, int], str]  # files a scanned glob matched


def _ident(st: os.stat_result) -> tuple[int, int]:
    return st.st_dev, st.st_ino


def _stat(path: str) -> os.stat_result | None:
    try:
        return os.stat(path)
    except OSError:
        return None


def _inputs(scanned: Sequence[str | os.PathLike[str]], named: Sequence[str | os.PathLike[str] | None]) -> _Inputs:
    files: dict[tuple[int, int], str] = {}
    folders: list[tuple[str, str]] = []
    matched: dict[tuple[int, int], str] = {}
    for raw in scanned:
        arg = os.fspath(raw)
        if "://" in arg:
            continue  # object stores: nothing local to protect
        is_glob = any(ch in arg for ch in "*?[")
        for hit in sorted(glob.glob(arg, recursive=True)) if is_glob else [arg]:
            st = _stat(hit)
            if st is None:
                continue
            if stat.S_ISDIR(st.st_mode):
                folders.append((os.path.realpath(hit), hit))
            elif is_glob:
                matched[_ident(st)] = hit
            else:
                files[_ident(st)] = hit
    for other in named:
        if other is None:
            continue
        st = _stat(os.fspath(other))
        if st is not None:
            files[_ident(st)] = os.fspath(other)
    return _Inputs(files, tuple(folders), matched)


def _linked_from(folder: str, ident: tuple[int, int]) -> str | None:
    """A path below folder that is the file ident (a hard link, or a symlink to it); None if none is."""
    seen: set[tuple[int, int]] = set()
    stack = [folder]
    while stack:
        top = stack.pop()
        st = _stat(top)
        if st is None or _ident(st) in seen:
            continue
        seen.add(_ident(st))
        try:
            entries = list(os.scandir(top))
        except OSError:
            continue
        for entry in entries:
            try:
                if entry.is_symlink():
                    target = entry.stat()  # follows the link, as discovery does
                    if stat.S_ISDIR(target.st_mode):
                        stack.append(entry.path)
                    elif _ident(target) == ident:
                        return entry.path
                elif entry.is_dir(follow_symlinks=False):
                    stack.append(entry.path)
                elif (st.st_dev, entry.inode()) == ident:  # no system call: readdir gives the inode
                    return entry.path
            except OSError:
                continue
    return None


def _skipped_name(rel: str) -> bool:
    return any(part.startswith((".", "_")) for part in rel.split(os.sep))


def _where(final: str, st: os.stat_result | None, inputs: _Inputs) -> tuple[str, str] | None:
    """(folder as given, path relative to it) when final lies in, or is linked from, a scanned folder."""
    for real, given in inputs.folders:
        if os.path.commonpath([real, final]) == real:
            return given, os.path.relpath(final, real)
    if st is not None:
        ident = _ident(st)
        if ident in inputs.matched:
            hit = inputs.matched[ident]
            return os.path.dirname(hit) or ".", os.path.basename(hit)
        for real, given in inputs.folders:
            found = _linked_from(real, ident)
            if found is not None:
                return given, os.path.relpath(found, real)
    return None


def _distinct(outputs: Sequence[tuple[str, str]]) -> None:
    taken: dict[object, str] = {}
    for option, target in outputs:
        fd = 1 if is_stdout(target) else own_descriptor(target)
        if fd is not None:
            key: object = ("fd", fd)
        else:
            final = os.path.realpath(target)
            st = _stat(final)
            key = _ident(st) if st is not None else final
        if key in taken:
            where = "standard output" if key == ("fd", 1) else repr(target)
            raise OutputError(f"{taken[key]} and {option} both write to {where}; give each output its own target")
        taken[key] = option


def check_targets(
    outputs: Sequence[Output],
    *,
    scanned: Sequence[str | os.PathLike[str]] = (),
    named: Sequence[str | os.PathLike[str] | None] = (),
    write_inside: bool = False,
    include_hidden: bool = False,
) -> None:
    """Raise OutputError for an output aimed where it must not go (see the module).

    outputs: (option, target) pairs, target None when not asked for; scanned: the data
    paths, folders and globs of the run; named: other input files (baseline, policy, config).
    """
    given = [(option, os.fspath(t)) for option, t in outputs if t is not None]
    _distinct(given)
    inputs: _Inputs | None = None
    for option, target in given:
        if is_stdout(target) or own_descriptor(target) is not None:
            continue
        final = os.path.realpath(target)
        st = _stat(final)
        if st is not None and not stat.S_ISREG(st.st_mode):
            continue  # devices and FIFOs are written into; discovery never reads them
        inputs = inputs or _inputs(scanned, named)
        if st is not None and _ident(st) in inputs.named:
            raise OutputError(
                f"{option} {target!r}: it is {inputs.named[_ident(st)]!r}, an input of this run; "
                "driftline never writes over its inputs; give the output another name"
            )
        place = _where(final, st, inputs)
        if place is None:
            continue
        folder, rel = place
        if st is not None and not carries_marker(final):
            raise OutputError(
                f"{option} {target!r}: it would replace the file {rel!r} of the scanned folder "
                f"{folder!r}; driftline never writes over its inputs; give the output another name"
            )
        if write_inside or (_skipped_name(rel) and not include_hidden):
            continue
        raise OutputError(
            f"{option} {target!r} lies inside the scanned folder {folder!r}, where a later scan "
            f"would read it as data; write it elsewhere, or pass {WRITE_INSIDE} (the scan leaves "
            "driftline's own outputs out)"
        )
