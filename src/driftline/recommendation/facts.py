"""What the rules read about one field path, taken from the profile alone (no second pass).

The profile merges every batch into one FieldStats per path. The rules need one split the
merge does not keep: values that arrived typed (JSON, Parquet) and cells of untyped text
(CSV/TSV), whose types the scan inferred. A CSV "n/a" is a null to the scan but a JSON
"n/a" is a string, so the two sides are merged apart here, from the same observations.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field

from driftline.core import paths
from driftline.core.stats import Example, FieldStats, SampleKey
from driftline.results.profile import FieldSummary, Profile

EMPTY = FieldStats()


@dataclass(frozen=True, slots=True)
class Facts:
    """One field path: the whole-scan summary and the typed / text halves of its stats.

    max_batch_items: the most list elements (or map entries) in any one batch, an upper
    bound on the elements of any one value.
    """

    path: str
    name: str
    summary: FieldSummary
    typed: FieldStats = EMPTY
    text: FieldStats = EMPTY
    max_batch_items: int = 0
    children: tuple[str, ...] = ()

    @property
    def kinds(self) -> dict[str, int]:
        """Typed non-null values per shallow type key ('string' included)."""
        return self.typed.types

    @property
    def cells(self) -> dict[str, int]:
        """CSV cells per content class ('empty' cells are nulls)."""
        return self.text.classes

    @property
    def strings(self) -> dict[str, int]:
        """Typed strings (JSON, Parquet) per content class."""
        return self.typed.classes

    @property
    def values(self) -> int:
        """Non-null values: typed ones plus non-blank CSV cells."""
        return self.typed.nonnull + self.text_values

    @property
    def text_values(self) -> int:
        return sum(n for c, n in self.cells.items() if c != "empty")

    def samples(self, *keys: SampleKey, text: bool | None = None) -> tuple[Example, ...]:
        """The earliest examples under any of keys, from the typed side, the text side or both."""
        sides = (self.typed, self.text) if text is None else ((self.text,) if text else (self.typed,))
        found = {e for st in sides for k in keys for e in st.samples.get(k, ())}
        return tuple(sorted(found))[:3]


@dataclass(frozen=True, slots=True)
class FactsTree:
    """Facts for every path, plus the top-level paths in name order."""

    facts: Mapping[str, Facts]
    top: tuple[str, ...]
    rows: int = 0
    extra: dict[str, object] = field(default_factory=dict)

    def __getitem__(self, path: str) -> Facts:
        return self.facts[path]


def _split(profile: Profile) -> tuple[dict[str, FieldStats], dict[str, FieldStats], dict[str, int]]:
    text: dict[str, FieldStats] = {}
    items: dict[str, int] = {}
    for obs in profile.observations():
        for path, st in obs.fields.items():
            if st.text > 0:
                text[path] = text[path].merge(st) if path in text else st
            if st.items > items.get(path, 0):
                items[path] = st.items
    # Paths no CSV cell reached are typed throughout: the profile's own merge is their half.
    typed = {p: st for p, st in profile.stats.items() if p not in text}
    for obs in profile.observations():
        for path, st in obs.fields.items():
            if path in text and st.text == 0:
                typed[path] = typed[path].merge(st) if path in typed else st
    return typed, text, items


def _children(all_paths: Iterable[str]) -> tuple[dict[str | None, list[str]], dict[str, str]]:
    kids: dict[str | None, list[str]] = {}
    names: dict[str, str] = {}
    for path in sorted(all_paths):
        parent, how = paths.parent(path)
        kids.setdefault(parent, []).append(path)
        segs = paths.split(path)
        names[path] = segs[-1][1] if how == "field" else {"element": "item"}.get(how, how)
    return kids, names


def gather(profile: Profile) -> FactsTree:
    """Facts for every field path of a profile.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.csv").write_text("n\\n1\\nn/a\\n")
    >>> f = gather(driftline.scan(d))["n"]
    >>> sorted(f.cells.items()), f.kinds
    ([('integer', 1), ('null_token', 1)], {})
    """
    typed, text, items = _split(profile)
    summaries = profile.fields
    kids, names = _children(summaries)
    facts = {
        path: Facts(
            path=path,
            name=names[path],
            summary=summary,
            typed=typed.get(path, EMPTY),
            text=text.get(path, EMPTY),
            max_batch_items=items.get(path, 0),
            children=tuple(kids.get(path, ())),
        )
        for path, summary in summaries.items()
    }
    return FactsTree(facts, tuple(kids.get(None, ())), profile.rows)
