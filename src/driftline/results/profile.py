"""Profile: the per-file results of a scan, and every view derived from them.

A Profile is a value. Two profiles combine only through merge(), which unions their
files by relative path; every derived view (fields, events, partitions) is computed from
the sorted files, so the result is the same whatever order the files were read in.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import cached_property

from driftline.core.files import FileIssue, FileResult, Skipped
from driftline.core.jsontypes import JSONValue
from driftline.core.observation import Observation
from driftline.core.stats import FieldStats, merge_all
from driftline.core.words import count, every
from driftline.errors import ProfileError
from driftline.results.drift import Event, drift_summary
from driftline.results.levels import LEVELS
from driftline.results.partition_compare import container_count, group_fields, partition_groups, partition_keys
from driftline.results.shapes import Discriminator, find_discriminator
from driftline.sources.registry import spec


@dataclass(frozen=True, slots=True)
class FieldSummary:
    """One field path over a set of rows: its statistics plus the derived counts.

    >>> from driftline.core.stats import FieldStats
    >>> s = FieldSummary("x", FieldStats(types={"int64": 2}, nulls=1), container=4)
    >>> s.absent, s.nullable, s.share(s.absent)
    (1, True, 0.25)
    """

    path: str
    stats: FieldStats
    container: int  # rows (top level), parent struct values, or parent list elements

    @property
    def absent(self) -> int:
        """Places that held no value at all (the key was missing), not even a null."""
        return max(self.container - self.stats.present, 0)

    @property
    def nullable(self) -> bool:
        """Whether a reader must allow a missing value: some nulls or some absences."""
        return self.stats.nulls > 0 or self.absent > 0

    def share(self, n: int) -> float:
        """n as a share of the container (0.0 for an empty container)."""
        return n / self.container if self.container else 0.0


def summarise(fields: Mapping[str, FieldStats], rows: int) -> dict[str, FieldSummary]:
    return {p: FieldSummary(p, st, container_count(p, fields, rows)) for p, st in fields.items()}


@dataclass(frozen=True)
class Profile:
    """What a scan found: files (sorted by relative path), what was skipped, and the options.

    A Profile is an immutable value: equal content compares equal (the options and the
    duration are not content), it pickles, and it merges with another profile.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"y": null}\\n')
    >>> p = driftline.scan(d)
    >>> p.rows, sorted(p.fields), p.fields["y"].nullable
    (2, ['x', 'y'], True)
    """

    root: str
    files: tuple[FileResult, ...]
    skipped: tuple[Skipped, ...] = ()
    options: Mapping[str, JSONValue] = field(default_factory=dict, compare=False)
    duration_s: float = field(default=0.0, compare=False)
    # The discriminator a saved report names (results/report.py): a report keeps no shape
    # tallies, so a loaded profile takes it from there; None: found from the files.
    saved_shapes: Discriminator | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        rels = [f.rel for f in self.files]
        if rels != sorted(rels):
            object.__setattr__(self, "files", tuple(sorted(self.files, key=lambda f: f.rel)))
        if len(set(rels)) != len(rels):
            raise ProfileError("a profile holds each relative path once")

    def __eq__(self, other: object) -> bool:
        # Content only, whichever class holds it: the public Profile (driftline._api) extends
        # this value with its outputs, and equal content is equal whichever side made it.
        if not isinstance(other, Profile):
            return NotImplemented
        return (self.root, self.files, self.skipped) == (other.root, other.files, other.skipped)

    # -- combining -------------------------------------------------------------------
    def merge(self, other: Profile) -> Profile:
        """Union of two profiles' files; a file both hold must be the same result (else ProfileError).

        >>> Profile("r", ()).merge(Profile("r", ())).rows
        0
        """
        mine = {f.rel: f for f in self.files}
        for f in other.files:
            if f.rel in mine and mine[f.rel] != f:
                raise ProfileError(f"both profiles hold {f.rel!r} with different content; rescan it")
            mine[f.rel] = f
        # A file one side skipped (say, excluded) and the other read is read in the union.
        skipped = tuple(
            sorted({s for s in (*self.skipped, *other.skipped) if s.rel not in mine}, key=lambda s: (s.rel, s.reason))
        )
        return type(self)(  # a public Profile merges into a public Profile
            self.root,
            tuple(mine[k] for k in sorted(mine)),
            skipped,
            dict(self.options),
            self.duration_s + other.duration_s,
        )

    # -- derived views ----------------------------------------------------------------
    @property
    def rows(self) -> int:
        """Rows read, over every file."""
        return sum(f.rows for f in self.files)

    @property
    def bytes(self) -> int:
        """Size on disk of the files read."""
        return sum(f.size for f in self.files)

    @property
    def issues(self) -> tuple[FileIssue, ...]:
        """Every file problem (errors and warnings) in file order."""
        return tuple(i for f in self.files for i in f.issues)

    @property
    def error_count(self) -> int:
        """How many file problems were errors (data may be lost), not warnings."""
        return sum(f.errors for f in self.files)

    @property
    def failed_files(self) -> int:
        """How many files had at least one error (a file may have several: error_count counts them all)."""
        return sum(1 for f in self.files if f.errors)

    @property
    def nothing_read(self) -> bool:
        """Whether no file gave a row and some failed: the scan has nothing to judge (exit 2)."""
        return (
            self.rows == 0
            and self.error_count > 0
            and all(not f.rows and (f.errors or not f.observations) for f in self.files)
        )

    def unread_text(self) -> str:
        """Why nothing was read, counting the files that failed apart from those without a row.

        >>> from driftline.core.files import FileIssue, FileResult
        >>> def bad(rel): return FileResult(rel, "jsonl", None, (), 3, 0, issues=(FileIssue(rel, "parse", "x"),))
        >>> def empty(rel): return FileResult(rel, "jsonl", None, (), 0, 0)
        >>> Profile(".", (bad("a"), bad("b"))).unread_text()
        'every one of the 2 files failed'
        >>> Profile(".", (bad("a"), empty("b"), empty("c"))).unread_text()
        '1 of the 3 files failed and the other 2 hold no row'
        >>> Profile(".", (bad("a"), bad("b"), empty("c"))).unread_text()
        '2 of the 3 files failed and the other one holds no row'
        """
        failed, n = self.failed_files, len(self.files)
        if failed == n:
            return f"{every(n, 'file')} failed"
        rest = "the other one holds" if n - failed == 1 else f"the other {n - failed:,} hold"
        return f"{failed:,} of the {count(n, 'file')} failed and {rest} no row"

    def observations(self) -> Iterable[Observation]:
        """Every batch observation in scan order: path order, then batch order."""
        for f in self.files:
            yield from f.observations

    @cached_property
    def stats(self) -> dict[str, FieldStats]:
        """Per field path: the merged statistics of every batch."""
        return merge_all(o.fields for o in self.observations())

    @cached_property
    def fields(self) -> dict[str, FieldSummary]:
        """Per field path over the whole scan."""
        return summarise(self.stats, self.rows)

    @cached_property
    def shapes(self) -> Discriminator | None:
        """The partition key or record field that explains which fields the records hold, with
        the shape of each of its values (results/shapes.py), or None when none does."""
        return self.saved_shapes if self.saved_shapes is not None else find_discriminator(self.files)

    @cached_property
    def classes_by_source(self) -> dict[str, dict[str, dict[str, int]]]:
        """Per field path: the content classes of its strings ("strings": JSON and Parquet
        string values) and of its CSV or TSV cells ("cells": the text of every cell, whatever
        type it reads as), counted apart, most common first; a source with none is left out.
        FieldStats.classes is their sum.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"n": "5"}\\n')
        >>> _ = (d / "b.csv").write_text("n,m\\n5,1\\n,2\\n")
        >>> driftline.scan(d).classes_by_source["n"]
        {'strings': {'integer': 1}, 'cells': {'empty': 1, 'integer': 1}}
        """
        out: dict[str, dict[str, dict[str, int]]] = {}
        for f in self.files:
            source = "cells" if spec(f.format).text_cells else "strings"
            for o in f.observations:
                for path, st in o.fields.items():
                    if st.classes:
                        counts = out.setdefault(path, {}).setdefault(source, {})
                        for name, n in st.classes.items():
                            counts[name] = counts.get(name, 0) + n
        return {
            path: {
                source: dict(sorted(by[source].items(), key=lambda kv: (-kv[1], kv[0])))
                for source in ("strings", "cells")
                if source in by
            }
            for path, by in out.items()
        }

    @cached_property
    def types_by_format(self) -> dict[str, dict[str, dict[str, int]]]:
        """Per field path, per file format: the physical types its values came in (non-null
        values per type key). A CSV or TSV cell has no type of its own: its type is the one
        its text reads as, the type the readers and the recommender use. Drift compares one
        logical type across formats (docs/drift.md); this says which format gave which type.

        >>> import driftline, tempfile, pathlib
        >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"n": "5"}\\n')
        >>> _ = (d / "b.csv").write_text("n,m\\n5,1\\n")
        >>> driftline.scan(d).types_by_format["n"]
        {'csv': {'int64': 1}, 'jsonl': {'string': 1}}
        """
        out: dict[str, dict[str, dict[str, int]]] = {}
        for f in self.files:
            for o in f.observations:
                for path, st in o.fields.items():
                    counts = out.setdefault(path, {}).setdefault(f.format, {})
                    for key, n in st.types.items():
                        counts[key] = counts.get(key, 0) + n
        return {
            path: {fmt: dict(sorted(types.items())) for fmt, types in sorted(by.items()) if types}
            for path, by in out.items()
        }

    @cached_property
    def _drift(self) -> tuple[tuple[Event, ...], dict[str, int], dict[str, int]]:
        return drift_summary(self.files, shapes=self.shapes)

    @property
    def events(self) -> tuple[Event, ...]:
        """Drift events in scan order (file path, then batch), each with its provenance and reach:
        every one of them, up to the walk's memory bound (results/drift.EPISODES_HELD, far past
        what a folder worth reading finds); see event_counts.  --max-events limits only the
        terminal's list."""
        return self._drift[0]

    @property
    def event_counts(self) -> dict[str, int]:
        """How many drift events of each kind the scan found, listed in events or not.

        >>> Profile("r", ()).event_counts
        {}
        """
        return self._drift[1]

    @property
    def level_counts(self) -> dict[str, int]:
        """How many drift events of each level the scan found (listed or not), every level named,
        most urgent first (results/levels.py).

        >>> Profile("r", ()).level_counts
        {'breaking': 0, 'widening': 0, 'info': 0}
        """
        return {level: self._drift[2].get(level, 0) for level in LEVELS}

    @property
    def event_total(self) -> int:
        """How many drift events the scan found (events lists at most EPISODES_HELD of them).

        >>> Profile("r", ()).event_total
        0
        """
        return sum(self._drift[1].values())

    @property
    def other_fields(self) -> tuple[int, int]:
        """(paths, values) past the cap on distinct paths (max_paths): paths are counted per
        batch, so a path past the cap in several batches counts in each.

        >>> Profile("r", ()).other_fields
        (0, 0)
        """
        obs = list(self.observations())
        return sum(o.other_paths for o in obs), sum(o.other_values for o in obs)

    @property
    def batch_span(self) -> int:
        """The most batches one observation stands for: 1 unless batches were summarised in blocks.

        >>> Profile("r", ()).batch_span
        1
        """
        return max((f.batch_span for f in self.files), default=1)

    def partition_keys(self) -> list[str]:
        """Partition keys (key=value folder names) in the order they first appear."""
        return partition_keys(self.files)

    def by_partition(self, key: str) -> dict[str, dict[str, FieldSummary]]:
        """Per value of partition key: the fields as they look in the files of that partition
        (the grouping the partition comparison of drift uses, results/partition_compare.py)."""
        return {value: summarise(*group_fields(files)) for value, files in partition_groups(self.files, key).items()}

    def file(self, rel: str) -> FileResult:
        """The result of one file, by its path relative to the root; KeyError if absent."""
        for f in self.files:
            if f.rel == rel:
                return f
        raise KeyError(rel)

    # -- pickling: only the content, never the cached views -------------------------------
    def __getstate__(self) -> dict[str, object]:
        # cached_property stores fields/events/stats in __dict__; a pickle (a process pool
        # result, a saved notebook value) carries only the content and rebuilds the views.
        return {f: getattr(self, f) for f in ("root", "files", "skipped", "options", "duration_s", "saved_shapes")}

    def __setstate__(self, state: dict[str, object]) -> None:
        for k, v in state.items():
            object.__setattr__(self, k, v)

    def __repr__(self) -> str:
        return (
            f"<Profile {self.root!r}: {count(len(self.files), 'file')}, {count(self.rows, 'row')}, "
            f"{count(len(self.fields), 'field')}, {count(len(self.events), 'drift event')}, "
            f"{count(self.error_count, 'error')}>"
        )
