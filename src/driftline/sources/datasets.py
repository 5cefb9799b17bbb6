"""Dataset discovery: a landing root → the tables in it (datasets), and the files that fit none.

A dataset is a folder whose files, below its key=value partition folders, belong to one table.
The split is decided from evidence that costs no full read (docs/datasets.md tells the rule):

1. Place each file: its *anchor* is the folder above its first key=value folder (its own
   folder when it has none), its *keys* the partition keys below the anchor, outermost first.
   A plain folder below a partition folder ('day=1/raw/') places no file: it is loose.
2. At each anchor, split the files by their field names (sources/peek: the head or footer):
   a file joins a group when the Jaccard index of its top-level field names and the group's
   union so far, or the names of one of the group's last files (RECENT_SETS distinct sets),
   is at least FIELD_OVERLAP; a file that joins several groups joins them together.  Files
   are taken in sorted path order, so the result is deterministic; a file whose head shows
   no field (an empty file) joins its folder's largest group of its format family (registry
   `family`: JSON, CSV/TSV, Parquet; compressed or not is the same family).  Schema drift (a
   column added, one dropped, one renamed at a time) keeps a file above the threshold; a
   table sharing a few names with another stays apart.  A file of another format whose
   fields fit (one table exported as CSV for one region) stays in the table, with a notice.
3. Folders are merged bottom-up: at each folder, its own groups and the lone group of each
   child folder that are one table (same format families, same partition keys, Jaccard of their
   unions at least FIELD_OVERLAP) become one group at the folder: the files of one table
   spread over sibling plain folders ('2026-01/', '2026-02/') are one dataset, named after
   their parent, with a notice.
4. Partition keys: in a group, the key sequences must be prefixes of one another (the same
   key at the same depth); the most common sequence wins, the files of a sequence that
   conflicts with it (a key at two depths, two keys at one depth) are loose.
5. Names: the group holding the most files at an anchor is named after the anchor's path
   ("." for the root), which stays the same when partitions or files are added.  A group of
   one file directly in a folder that holds other datasets (a reference file beside a
   partitioned table) is named after the file's path.  Other groups of several files in a
   folder already named are loose: a table needs a folder of its own.

Every file ends in exactly one dataset or in the loose list, with its reason in plain words;
what discovery skipped (markers such as _SUCCESS, hidden files) stays in `skipped`.
"""

from __future__ import annotations

import os
from collections import Counter
from collections.abc import Callable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field

from driftline.core.dataformat import FORMATS, Format
from driftline.core.fileref import FileRef
from driftline.core.files import Skipped
from driftline.core.words import count
from driftline.sources.discover import Discovery, discover
from driftline.sources.peek import Peek
from driftline.sources.registry import spec

FIELD_OVERLAP = 0.5  # the Jaccard index of field names from which two files are one table
RECENT_SETS = 8  # distinct field sets of a group's last files a new file is also compared with
ROOT_NAME = "."  # the name of a dataset whose folder is the root itself


@dataclass(frozen=True, slots=True)
class Dataset:
    """One table in the root: its name, its folder, its files and what they show."""

    name: str  # the folder relative to the root ("." for the root), or the file's path for a lone reference file
    folder: str  # the folder relative to the root ("." for the root)
    files: tuple[FileRef, ...]  # in sorted path order
    formats: tuple[Format, ...]
    partition_keys: tuple[str, ...]  # outermost first
    fields: tuple[str, ...]  # the top-level field names the files' heads show, in the order first seen


@dataclass(frozen=True, slots=True)
class LooseFile:
    """A data file that belongs to no dataset, and why."""

    file: FileRef
    reason: str


@dataclass(frozen=True, slots=True)
class Notice:
    """Something in the layout a person should know (mixed formats, keys at two depths, …)."""

    kind: str  # 'mixed-formats' | 'key-conflict' | 'uneven-depth' | 'spread' | 'empty-folder' | 'no-dataset'
    message: str
    paths: tuple[str, ...]  # the files (or folders) concerned, relative to the root


@dataclass(frozen=True, slots=True)
class Layout:
    """A root split into datasets, the loose files, what discovery skipped, and the notices."""

    root: str
    datasets: tuple[Dataset, ...]
    loose: tuple[LooseFile, ...]
    skipped: tuple[Skipped, ...]
    notices: tuple[Notice, ...] = field(default=())

    def dataset(self, name: str) -> Dataset:
        """The dataset of that name (KeyError when there is none)."""
        for d in self.datasets:
            if d.name == name:
                return d
        raise KeyError(name)


# -- placing each file -----------------------------------------------------------------------


@dataclass(slots=True)
class _File:
    ref: FileRef
    anchor: str  # "" for the root
    keys: tuple[str, ...]
    family: str
    names: tuple[str, ...]
    fields: frozenset[str]


@dataclass(slots=True)
class _Group:
    anchor: str
    files: list[_File]
    union: set[str]
    folders: list[str] = field(default_factory=list)  # the anchors merged into it (spread over folders)
    recent: list[frozenset[str]] = field(default_factory=list)  # the last RECENT_SETS distinct field sets

    def add(self, f: _File) -> None:
        self.files.append(f)
        self.union |= f.fields
        self.remember([f.fields] if f.fields else [])

    def remember(self, sets: Iterable[frozenset[str]]) -> None:
        kept = [x for x in self.recent if x not in sets] + list(dict.fromkeys(sets))
        self.recent = kept[-RECENT_SETS:]

    @property
    def families(self) -> frozenset[str]:
        return frozenset(f.family for f in self.files)

    @property
    def keys(self) -> tuple[str, ...]:
        """The most common key sequence of its files (ties: the first file's)."""
        counts = Counter(f.keys for f in self.files)
        return max(counts, key=lambda k: (counts[k], -_first(self.files, k)))


def _first(files: Sequence[_File], keys: tuple[str, ...]) -> int:
    return next(i for i, f in enumerate(files) if f.keys == keys)


def _place(ref: FileRef) -> tuple[str, tuple[str, ...], str | None]:
    """(anchor, partition keys, why the file cannot be placed)."""
    parts = ref.rel.split("/")[:-1]
    at = next((i for i, p in enumerate(parts) if _is_partition(p)), len(parts))
    below = parts[at:]
    plain = next((p for p in below if not _is_partition(p)), None)
    if plain is not None:
        first = below[0]
        return (
            "",
            (),
            (
                f"its folder {plain!r} is below the partition folder {first!r} but is not key=value: "
                "a table's files sit directly in its partition folders"
            ),
        )
    return "/".join(parts[:at]), tuple(p.partition("=")[0] for p in below), None


def _is_partition(part: str) -> bool:
    key, sep, _ = part.partition("=")
    return bool(sep and key)


def _shown(anchor: str) -> str:
    return anchor or ROOT_NAME


def _jaccard(a: Iterable[str], b: Iterable[str]) -> float:
    sa, sb = set(a), set(b)
    union = sa | sb
    return len(sa & sb) / len(union) if union else 1.0


# -- the split ---------------------------------------------------------------------------------


def split_datasets(discovery: Discovery, peeks: Mapping[str, Peek], folders: Sequence[str] = ()) -> Layout:
    """The datasets of a discovered root, from each file's peek (by relative path).

    folders, when given, are the root's folders (relative paths) so that empty ones and
    folders of only skipped or loose files can be named.  Pure and deterministic.

    >>> from driftline.core.fileref import FileRef
    >>> def ref(rel, fmt): return FileRef("/r/" + rel, rel, (), fmt, None, 1, 0)
    >>> found = Discovery("/r", (ref("exports/a.csv", "csv"), ref("t/day=1/a.jsonl", "jsonl")), ())
    >>> layout = split_datasets(found, {"exports/a.csv": Peek(("id", "qty")), "t/day=1/a.jsonl": Peek(("ts",))})
    >>> [(d.name, d.partition_keys, d.fields) for d in layout.datasets]
    [('exports', (), ('id', 'qty')), ('t', ('day',), ('ts',))]
    """
    loose: list[LooseFile] = []
    notices: list[Notice] = []
    placed: list[_File] = []
    for ref in discovery.files:
        anchor, keys, unplaced = _place(ref)
        peek = peeks.get(ref.rel, Peek(problem="its head was not looked at"))
        if unplaced is not None:
            loose.append(LooseFile(ref, unplaced))
        elif peek.problem is not None:
            loose.append(LooseFile(ref, peek.problem))
        else:
            fam = spec(ref.format).family
            placed.append(_File(ref, anchor, keys, fam, peek.fields, frozenset(peek.fields)))
    notices.extend(_mixed_formats(placed))
    groups = [g for anchor, files in _by_anchor(placed) for g in _groups(anchor, files)]
    groups = _merge_folders(groups, notices)
    kept: list[_Group] = []
    for g in groups:
        kept.append(_check_keys(g, loose, notices))
    datasets = _name(kept, loose)
    notices.extend(_folder_notices(folders, discovery, datasets, loose))
    layout = Layout(
        root=discovery.root,
        datasets=tuple(sorted(datasets, key=lambda d: d.name)),
        loose=tuple(sorted(loose, key=lambda x: x.file.rel)),
        skipped=discovery.skipped,
        notices=tuple(notices),
    )
    _assert_whole(discovery, layout)
    return layout


def _assert_whole(discovery: Discovery, layout: Layout) -> None:
    got = [f.rel for d in layout.datasets for f in d.files] + [x.file.rel for x in layout.loose]
    if sorted(got) != sorted(f.rel for f in discovery.files):  # pragma: no cover - a bug, not bad input
        raise AssertionError("dataset discovery lost or repeated a file")


def _by_anchor(files: Sequence[_File]) -> list[tuple[str, list[_File]]]:
    out: dict[str, list[_File]] = {}
    for f in files:
        out.setdefault(f.anchor, []).append(f)
    return sorted(out.items())


def _groups(anchor: str, files: Sequence[_File]) -> list[_Group]:
    """The groups at one anchor, by the overlap of field names (files in sorted path order)."""
    clusters: list[_Group] = []
    blank: list[_File] = []
    for f in files:
        if not f.fields:
            blank.append(f)
            continue
        hits = [c for c in clusters if _fits(f.fields, c)]
        if not hits:
            hits = [_Group(anchor, [], set(), [anchor])]
            clusters.append(hits[0])
        into = hits[0]
        for other in hits[1:]:
            into.files.extend(other.files)
            into.union |= other.union
            into.remember(other.recent)
            clusters = [c for c in clusters if c is not other]
        into.add(f)
    for f in blank:  # no field to judge by: the largest group of its format family, else the largest
        same = [c for c in clusters if any(x.family == f.family for x in c.files)] or clusters
        if same:
            min(same, key=lambda c: (-len(c.files), c.files[0].ref.rel)).files.append(f)
        else:
            clusters.append(_Group(anchor, [f], set(), [anchor]))
    for c in clusters:
        c.files.sort(key=lambda f: f.ref.rel)
    return clusters


def _fits(fields: frozenset[str], group: _Group) -> bool:
    """Whether a file's field names are those of the group's table: against the union of the
    group's names, or against one of the last RECENT_SETS distinct sets of its files (a table
    whose columns are renamed one at a time drifts away from its union, never from its last files)."""
    if _jaccard(fields, group.union) >= FIELD_OVERLAP:
        return True
    return any(_jaccard(fields, seen) >= FIELD_OVERLAP for seen in group.recent)


def _parent(anchor: str) -> str | None:
    if not anchor:
        return None
    return anchor.rsplit("/", 1)[0] if "/" in anchor else ""


def _depth(anchor: str) -> int:
    return anchor.count("/") + 1 if anchor else 0


_Signature = tuple[frozenset[str], tuple[str, ...]]  # a group's format families and partition keys


def _signature(g: _Group) -> _Signature:
    return g.families, g.keys


def _merge_folders(groups: list[_Group], notices: list[Notice]) -> list[_Group]:
    """Bottom-up: a folder's own groups and its children's lone groups that are one table
    become one group at the folder (a table spread over plain sibling folders)."""
    at: dict[str, list[_Group]] = {}
    for g in groups:
        at.setdefault(g.anchor, []).append(g)
    signs = {id(g): _signature(g) for g in groups}
    folders = {a for g in groups for a in _ancestors(g.anchor)}
    children: dict[str, list[str]] = {}
    for a in folders | set(at):
        parent = _parent(a)
        if parent is not None:
            children.setdefault(parent, []).append(a)
    for folder in sorted(folders, key=lambda a: (-_depth(a), a)):
        candidates = list(at.get(folder, []))
        candidates += [at[c][0] for c in sorted(children.get(folder, ())) if len(at.get(c, ())) == 1]
        for members in _union_find(candidates, signs):
            if len(members) < 2 or all(m.anchor == folder for m in members):
                continue
            files = sorted((f for m in members for f in m.files), key=lambda f: f.ref.rel)
            whole = _Group(folder, files, set().union(*(m.union for m in members)))
            whole.folders = sorted({a for m in members for a in m.folders})
            whole.remember([x for m in members for x in m.recent])
            signs[id(whole)] = _signature(whole)
            for m in members:
                at[m.anchor] = [g for g in at[m.anchor] if g is not m]
            at.setdefault(folder, []).append(whole)
    merged = [g for _, gs in sorted(at.items()) for g in gs]
    for g in merged:
        if len(g.folders) > 1:
            shown = ", ".join(f"'{_shown(a)}'" for a in g.folders[:4]) + (", …" if len(g.folders) > 4 else "")
            notices.append(
                Notice(
                    "spread",
                    f"files of one table are spread over {len(g.folders):,} folders ({shown}): read as one "
                    f"dataset '{_shown(g.anchor)}'; key=value folder names (month=2026-01) would make them partitions",
                    tuple(f.ref.rel for f in g.files),
                )
            )
    return merged


def _ancestors(anchor: str) -> list[str]:
    out = []
    a: str | None = _parent(anchor)
    while a is not None:
        out.append(a)
        a = _parent(a)
    return out


def _union_find(candidates: list[_Group], signs: dict[int, _Signature]) -> list[list[_Group]]:
    """Candidates grouped into tables: the same signature, and field names that fit (as _fits:
    the union of the cluster's names, or one of its last members')."""
    clusters: list[_Group] = []  # one view per cluster: its union and last field sets
    members: dict[int, list[_Group]] = {}
    for g in candidates:
        hits = [
            c
            for c in clusters
            if signs[id(members[id(c)][0])] == signs[id(g)]
            and (
                _jaccard(g.union, c.union) >= FIELD_OVERLAP
                or any(_jaccard(g.union, r) >= FIELD_OVERLAP for r in c.recent)
            )
        ]
        if not hits:
            view = _Group(g.anchor, [], set())
            clusters.append(view)
            members[id(view)] = []
            hits = [view]
        view = hits[0]
        for other in hits[1:]:
            members[id(view)].extend(members.pop(id(other)))
            view.union |= other.union
            view.remember(other.recent)
            clusters = [c for c in clusters if c is not other]
        members[id(view)].append(g)
        view.union |= g.union
        view.remember([frozenset(g.union)])
    return [members[id(c)] for c in clusters]


def _compatible(a: tuple[str, ...], b: tuple[str, ...]) -> bool:
    n = min(len(a), len(b))
    return a[:n] == b[:n]


def _check_keys(g: _Group, loose: list[LooseFile], notices: list[Notice]) -> _Group:
    """The group's files whose partition keys agree with its most common sequence; the others loose."""
    counts = Counter(f.keys for f in g.files)
    order = sorted(counts, key=lambda k: (-counts[k], _first(g.files, k)))
    accepted: list[tuple[str, ...]] = []
    for keys in order:
        if all(_compatible(keys, a) for a in accepted):
            accepted.append(keys)
    longest = max(accepted, key=len)
    name = _shown(g.anchor)
    rejected = [f for f in g.files if f.keys not in accepted]
    for f in rejected:
        loose.append(LooseFile(f.ref, _key_reason(f.keys, longest, name)))
    if rejected:
        notices.append(
            Notice(
                "key-conflict",
                f"partition folders of '{name}' disagree: {_keys_text(longest)} in most files, "
                + "; ".join(sorted({_keys_text(f.keys) for f in rejected}))
                + " in the files listed (left out of the dataset)",
                tuple(f.ref.rel for f in rejected),
            )
        )
    kept = [f for f in g.files if f.keys in accepted]
    short = [f for f in kept if len(f.keys) < len(longest)]
    if short:
        notices.append(
            Notice(
                "uneven-depth",
                f"partition folders of '{name}' are of uneven depth: {len(short):,} of {len(kept):,} files "
                f"stop above the key {longest[len(short[0].keys)]!r} of {_keys_text(longest)}; "
                "their values of the missing keys are empty",
                tuple(f.ref.rel for f in short),
            )
        )
    g.files = kept
    return g


def _keys_text(keys: tuple[str, ...]) -> str:
    return "/".join(f"{k}=…" for k in keys) if keys else "no partition folder"


def _key_reason(keys: tuple[str, ...], want: tuple[str, ...], name: str) -> str:
    for depth, k in enumerate(keys):
        if k in want and want.index(k) != depth:
            return (
                f"its partition key {k!r} is at depth {depth + 1} here and at depth {want.index(k) + 1} "
                f"in dataset '{name}' ({_keys_text(want)})"
            )
    return f"its partition folders ({_keys_text(keys)}) are not those of dataset '{name}' ({_keys_text(want)})"


def _name(groups: list[_Group], loose: list[LooseFile]) -> list[Dataset]:
    above = {a for g in groups if g.files for a in _ancestors(g.anchor)}  # anchors with a dataset below them
    out: list[Dataset] = []
    by_anchor: dict[str, list[_Group]] = {}
    for g in groups:
        if g.files:
            by_anchor.setdefault(g.anchor, []).append(g)
    for anchor, gs in sorted(by_anchor.items()):
        gs.sort(key=lambda g: (-len(g.files), g.files[0].ref.rel))
        below = anchor in above
        for i, g in enumerate(gs):
            lone = len(g.files) == 1 and not g.files[0].keys and g.files[0].anchor == anchor
            if lone and (len(gs) > 1 or below):
                out.append(_dataset(g.files[0].ref.rel, g))
            elif i == 0:
                out.append(_dataset(_shown(anchor), g))
            else:
                for f in g.files:
                    loose.append(LooseFile(f.ref, _other_table(f, g, gs[0], _shown(anchor))))
    return out


def _other_table(f: _File, g: _Group, main: _Group, name: str) -> str:
    shared = len(f.fields & main.union)
    fields = f"its fields share {shared} of {len(f.fields | main.union)} names with dataset '{name}'"
    if not f.fields:
        fields = "it shows no field"
    if f.keys:  # inside the dataset's partition folders
        return f"a {f.family} file in the partition folders of dataset '{name}' that is not of its table: {fields}"
    return (
        f"one of {len(g.files):,} files of another table in folder '{name}' ({fields}): "
        "give that table a folder of its own"
    )


def _dataset(name: str, g: _Group) -> Dataset:
    refs = tuple(f.ref for f in g.files)
    present = {r.format for r in refs}
    keys = max((f.keys for f in g.files), key=len)
    fields = tuple(dict.fromkeys(n for f in g.files for n in f.names))
    return Dataset(name, _shown(g.anchor), refs, tuple(x for x in FORMATS if x in present), keys, fields)


def _mixed_formats(files: Sequence[_File]) -> list[Notice]:
    """Folders whose own files are of several format families."""
    by_folder: dict[str, list[_File]] = {}
    for f in files:
        by_folder.setdefault(f.ref.rel.rpartition("/")[0], []).append(f)
    out = []
    for folder, members in sorted(by_folder.items()):
        counts = Counter(f.family for f in members)
        if len(counts) < 2:
            continue
        said = ", ".join(f"{n:,} {fam}" for fam, n in sorted(counts.items(), key=lambda kv: (-kv[1], kv[0])))
        out.append(
            Notice(
                "mixed-formats",
                f"folder '{_shown(folder)}' holds files of several formats ({said}): "
                "those whose fields fit their dataset are read with it, the others are loose",
                tuple(f.ref.rel for f in members),
            )
        )
    return out


def _folder_notices(
    folders: Sequence[str], discovery: Discovery, datasets: Sequence[Dataset], loose: Sequence[LooseFile]
) -> list[Notice]:
    """Folders that hold nothing, and the topmost folders that hold no dataset's file."""
    used = {f.rel for d in datasets for f in d.files}
    tables = {d.folder for d in datasets if d.name == d.folder}
    loose_rels = {x.file.rel for x in loose}
    skipped_rels = {x.rel for x in discovery.skipped}
    under: dict[str, list[str]] = {}  # folder → the files (data or skipped) below it
    for rel in [f.rel for f in discovery.files] + sorted(skipped_rels):
        parts = rel.split("/")[:-1]
        for i in range(1, len(parts) + 1):
            under.setdefault("/".join(parts[:i]), []).append(rel)
    known = set(folders) | set(under)
    with_subfolders = {p for k in known for p in _ancestors(k)}
    out: list[Notice] = []
    reported: set[str] = set()
    for folder in sorted(known):
        if any(part.startswith((".", "_")) for part in folder.split("/")):
            continue  # hidden and marker folders: discovery skips them on purpose
        if any(a in reported for a in _ancestors(folder)) or _partition_of(folder, tables):
            continue
        inside = under.get(folder, [])
        if not inside:
            if folder not in with_subfolders:
                out.append(Notice("empty-folder", f"folder '{folder}' is empty: no file in it", (folder,)))
                reported.add(folder)
            continue
        if any(rel in used for rel in inside):
            continue
        loose_here = sum(1 for rel in inside if rel in loose_rels)
        skipped_here = sum(1 for rel in inside if rel in skipped_rels)
        out.append(
            Notice(
                "no-dataset",
                f"folder '{folder}' holds no dataset: {count(loose_here, 'loose file')} and "
                f"{count(skipped_here, 'skipped file')}",
                tuple(inside),
            )
        )
        reported.add(folder)
    return out


def _partition_of(folder: str, tables: set[str]) -> bool:
    """Whether folder is a partition folder of a dataset (its first folder below the dataset's is key=value)."""
    parts = folder.split("/")
    return any(_shown("/".join(parts[:i])) in tables and _is_partition(parts[i]) for i in range(len(parts)))


# -- from a root ---------------------------------------------------------------------------------


def peek_fields(ref: FileRef) -> Peek:
    """The field names of one file from its head or footer (its format's peek), never raising."""
    try:
        return spec(ref.format).peek(ref)
    except Exception as exc:  # noqa: BLE001 - a bug in a peek must not cost the other files
        return Peek(problem=f"its head cannot be read: unexpected {type(exc).__name__}: {exc}")


def folders_below(root: str, include_hidden: bool = False) -> list[str]:
    """Every folder below root, relative to it (posix), hidden and marker ones left out unless asked."""
    out = []
    for top, dirs, _ in os.walk(root):
        if not include_hidden:
            dirs[:] = [d for d in dirs if not d.startswith((".", "_"))]
        dirs.sort()
        rel = os.path.relpath(top, root).replace(os.sep, "/")
        if rel != ".":
            out.append(rel)
    return out


def find_datasets(
    root: str | os.PathLike[str],
    *,
    peek: Callable[[FileRef], Peek] = peek_fields,
    include_hidden: bool = False,
    follow_links: bool = False,
) -> Layout:
    """Discover the files below root (as a scan does), peek at each one's head or footer, and
    split the root into datasets."""
    found = discover([root], include_hidden=include_hidden, follow_links=follow_links)
    peeks = {ref.rel: peek(ref) for ref in found.files}
    top = os.fspath(root)
    return split_datasets(found, peeks, folders_below(top, include_hidden) if os.path.isdir(top) else ())
