"""`driftline diff A B` dataset by dataset, when both sides hold several datasets.

A side holds several datasets when it is one local folder that does not read as one table
(scanning/by_dataset.is_one_table: the split `driftline scan` makes) or a saved report set
(docs/report-set.schema.json).  The datasets of the same name are compared one by one, as two
scans of their folders would be; the names found on one side only are listed.  When either side
is one table (a saved scan report, several paths, a file, a glob, a folder that is one table),
both are read as one table, as diff always did.

>>> d = DatasetDiff("a", "b", {"t": Diff("a/t", "b/t", ())}, ("old",), ())
>>> d.overall()
'1 dataset compared, 0 with changes; only in a: old'
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import dataclass

from rich.console import Console
from rich.rule import Rule
from rich.text import Text

from driftline.core.jsontypes import JSONObject
from driftline.core.options import ScanOptions
from driftline.core.words import count
from driftline.emit.safe import safe_text
from driftline.errors import InputPathError
from driftline.gate.diff import DEFAULT_NULL_POINTS, Diff, diff_fields, render
from driftline.gate.inputs import begins_like, profile_of
from driftline.results.conceal import conceal
from driftline.results.landing import Landing, load_report_set
from driftline.results.profile import Profile
from driftline.scanning.by_dataset import scan_landing
from driftline.scanning.run import scan_paths
from driftline.sources.remote import is_url

# landing.to_dict_set writes "format" first; allow any whitespace a pretty-printer adds.
_SET_HEAD = re.compile(rb'\A\s*\{\s*"format"\s*:\s*"driftline-report-set"')


@dataclass(frozen=True)
class DatasetDiff:
    """Two sides compared dataset by dataset: one Diff per dataset both hold (in name order), and
    the names only one side holds."""

    before: str
    after: str
    diffs: Mapping[str, Diff]
    only_before: tuple[str, ...]
    only_after: tuple[str, ...]

    def overall(self) -> str:
        """One line: how many datasets were compared, how many changed, which are on one side only."""
        changed = sum(1 for d in self.diffs.values() if d.changes)
        n = len(self.diffs)
        text = f"{count(n, 'dataset')} compared, {changed} with changes"
        for side, names in ((self.before, self.only_before), (self.after, self.only_after)):
            if names:
                text += f"; only in {side}: {', '.join(names)}"
        return text

    def to_json(self) -> JSONObject:
        """The `diffs` of the diff document (each with its dataset) and the names on one side only."""
        return {
            "diffs": [{"dataset": name, **d.to_json()} for name, d in self.diffs.items()],
            "datasets": {
                "compared": list(self.diffs),
                "only_before": list(self.only_before),
                "only_after": list(self.only_after),
            },
        }


def is_report_set(path: str | os.PathLike[str]) -> bool:
    """True when path is a file that begins like a driftline report set."""
    return begins_like(path, _SET_HEAD)


def _kind(side: str) -> str | None:
    """'set' for a saved report set, 'root' for one local folder, None for what is one table anyway."""
    if is_report_set(side):
        return "set"
    if not is_url(side) and os.path.isdir(side):
        return "root"
    return None


def _landing(side: str, kind: str, options: ScanOptions) -> Landing:
    read = load_report_set if kind == "set" else lambda p: scan_landing(options.merged(paths=[p]), whole_if_one=True)
    landing = read(side)
    whole = None if landing.whole is None else conceal(landing.whole, options.values)
    datasets = {name: conceal(p, options.values) for name, p in landing.datasets.items()}
    return Landing(landing.root, datasets, landing.loose, landing.skipped, landing.notices, landing.found, whole)


def _label(side: str, kind: str, name: str) -> str:
    """A dataset of a side as it is named: its folder (or file) below the root, name#dataset in a set."""
    return f"{side}#{name}" if kind == "set" else os.path.join(side, name)


def diff_by_dataset(
    a: str,
    b: str,
    *,
    min_null_points: float | None = None,
    options: ScanOptions | None = None,
) -> Diff | DatasetDiff:
    """a against b dataset by dataset when both hold several datasets; else as diff_sides (one table)."""
    opts = options or ScanOptions()
    points = DEFAULT_NULL_POINTS if min_null_points is None else min_null_points
    ka, kb = _kind(a), _kind(b)
    if ka is None or kb is None:
        if "set" in (ka, kb):
            raise _mixed(a if ka == "set" else b, b if ka == "set" else a)
        return _one_table(
            a,
            conceal(profile_of(a, options=opts), opts.values),
            b,
            conceal(profile_of(b, options=opts), opts.values),
            points,
        )
    first = _landing(a, ka, opts)
    if first.whole is not None:
        if kb == "set":
            raise _mixed(b, a)
        return _one_table(a, first.whole, b, conceal(scan_paths([b], options=opts), opts.values), points)
    second = _landing(b, kb, opts)
    if second.whole is not None:
        if ka == "set":
            raise _mixed(a, b)
        # a holds several datasets, b is one table: a is read again, whole, as diff always read it.
        return _one_table(a, conceal(scan_paths([a], options=opts), opts.values), b, second.whole, points)
    both = [n for n in first.datasets if n in second.datasets]
    diffs = {
        n: diff_fields(
            first.datasets[n].fields,
            second.datasets[n].fields,
            before=_label(a, ka, n),
            after=_label(b, kb, n),
            min_null_points=points,
        )
        for n in both
    }
    only_a = tuple(n for n in first.datasets if n not in second.datasets)
    only_b = tuple(n for n in second.datasets if n not in first.datasets)
    return DatasetDiff(a, b, diffs, only_a, only_b)


def _one_table(a: str, pa: Profile, b: str, pb: Profile, points: float) -> Diff:
    return diff_fields(pa.fields, pb.fields, before=a, after=b, min_null_points=points)


def _mixed(report_set: str, other: str) -> InputPathError:
    return InputPathError(
        f"{report_set!r} is a report set of several datasets and {other!r} is one table; compare two roots or "
        f"two report sets, or one dataset's report (driftline scan ROOT/NAME --json FILE) with {other!r}"
    )


def render_datasets(d: DatasetDiff, console: Console) -> None:
    """The overall line, then each dataset's diff under a heading `dataset NAME`."""
    console.print(Text(safe_text(d.overall(), None), style="bold"), soft_wrap=True)
    for name, one in d.diffs.items():
        console.print()
        console.print(Rule(Text(f"dataset {safe_text(name)}", style="bold"), align="left"))
        render((one,), console)
