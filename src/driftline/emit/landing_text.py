"""The terminal summary of a root scanned dataset by dataset: an overview of every dataset read
(one line each), the loose files with their reasons, the skipped files and the notices, then
each dataset's usual summary (emit/terminal.render) under a heading.

Every piece of data goes through safe_text and into rich Text objects (never markup).
"""

from __future__ import annotations

import os
from collections import Counter

from rich import box
from rich.console import Console
from rich.rule import Rule
from rich.table import Table
from rich.text import Text

from driftline.core.options import DEFAULT_MAX_EVENTS
from driftline.core.words import count
from driftline.emit.safe import safe_text
from driftline.emit.terminal import render
from driftline.emit.units import human_bytes
from driftline.results.landing import Landing
from driftline.results.profile import Profile
from driftline.sources.datasets import ROOT_NAME

MAX_LOOSE_SHOWN = 50
MAX_NOTICE_PATHS_SHOWN = 3


def headline(landing: Landing, title: str | None = None) -> Text:
    """'driftline scan ROOT' (title: the root as it was typed) and the totals over the datasets read."""
    text = Text()
    text.append("driftline scan ", style="bold")
    text.append(safe_text(landing.root if title is None else title, None))
    text.append("\n")
    read = len(landing.datasets)
    of = f" (of {len(landing.found):,} found)" if read != len(landing.found) else ""
    text.append(
        f"{count(read, 'dataset')}{of}, {count(landing.files, 'file')}, {landing.rows:,} rows, "
        f"{human_bytes(landing.bytes)}; {count(len(landing.loose), 'loose file')}, "
        f"{len(landing.skipped):,} skipped"
    )
    return text


def datasets_table(landing: Landing) -> Table:
    """One line per dataset read: name, files, rows, size, formats, partition keys, fields, breaking changes."""
    table = Table(
        title="Datasets",
        title_justify="left",
        show_lines=False,
        pad_edge=False,
        show_edge=False,
        box=box.SIMPLE_HEAD,
        collapse_padding=True,
    )
    # The name is the dataset's identity (a folder path): never cut or wrapped; headings are
    # never cut either, and the cells below them wrap on a narrow terminal.
    width = max((len(safe_text(n)) for n in landing.datasets), default=7)
    table.add_column("dataset", no_wrap=True, min_width=max(width, 7))
    for name in ("files", "rows", "size"):
        table.add_column(name, justify="right", min_width=len(name))
    table.add_column("formats", min_width=7)
    table.add_column("partitions", min_width=10)
    table.add_column("fields", justify="right", min_width=6)
    table.add_column("breaking", justify="right", min_width=8)
    for name, p in landing.datasets.items():
        table.add_row(
            Text(safe_text(name)),
            f"{len(p.files):,}",
            f"{p.rows:,}",
            human_bytes(p.bytes),
            _formats(p),
            Text(", ".join(safe_text(k) for k in p.partition_keys()) or "–"),
            f"{len(p.fields):,}",
            f"{p.level_counts['breaking']:,}",
        )
    return table


def _formats(p: Profile) -> str:
    counts = Counter(f.format for f in p.files)
    return ", ".join(sorted(counts))


def leftovers(landing: Landing) -> Text:
    """The loose files with their reasons, the skipped files by reason, the notices; '' when none."""
    text = Text()
    if landing.loose:
        text.append(f"Loose files ({len(landing.loose):,}): in no dataset, not read\n", style="bold")
        for x in landing.loose[:MAX_LOOSE_SHOWN]:
            text.append(f"  {safe_text(x.file.rel, 120)}", style="yellow")
            text.append(f": {safe_text(x.reason, 240)}\n")
        if len(landing.loose) > MAX_LOOSE_SHOWN:
            text.append(f"  … {len(landing.loose) - MAX_LOOSE_SHOWN:,} more in the JSON report (--json)\n")
    if landing.skipped:
        reasons = Counter(s.reason for s in landing.skipped)
        text.append("Skipped: ", style="bold")
        text.append(", ".join(f"{n:,} {safe_text(r)}" for r, n in sorted(reasons.items())))
        names = ", ".join(safe_text(s.rel, 60) for s in landing.skipped[:MAX_NOTICE_PATHS_SHOWN])
        more = f" and {len(landing.skipped) - MAX_NOTICE_PATHS_SHOWN:,} more" if len(landing.skipped) > 3 else ""
        text.append(f" ({names}{more})\n")
    for n in landing.notices:
        text.append(f"notice   {n.kind}: ", style="bold")
        text.append(safe_text(n.message, 400) + "\n")
    return text


def render_landing(
    landing: Landing,
    console: Console,
    max_events: int = DEFAULT_MAX_EVENTS,
    *,
    events_detail: bool = False,
    full_table: bool = False,
    title: str | None = None,
) -> None:
    """The overview of the datasets and what fits none, then each dataset's summary under a heading;
    title is the root as it was typed, and each dataset's header names its folder under it."""
    console.print(headline(landing, title))
    console.print()
    console.print(datasets_table(landing))
    rest = leftovers(landing)
    if rest:
        console.print()
        console.print(rest, end="")
    for name, profile in landing.datasets.items():
        console.print()
        console.print(Rule(Text(f"dataset {safe_text(name)}", style="bold"), align="left"))
        shown = None if title is None else os.path.join(title, os.path.relpath(profile.root, landing.root))
        render(profile, console, max_events, events_detail=events_detail, full_table=full_table, title=shown)


def one_table_note(landing: Landing) -> str:
    """What a root read as one table also holds, when discovery found datasets in folders of their
    own in it; '' otherwise, and for a flat folder, whose lone files are its own oddities (said on
    stderr, so a one-table root's summary stays as it was)."""
    folders = [n for n in landing.found if n != ROOT_NAME and os.path.isdir(os.path.join(landing.root, n))]
    if len(landing.found) < 2 or not folders:
        return ""
    names = ", ".join(safe_text(n, 60) for n in landing.found[:6]) + (" …" if len(landing.found) > 6 else "")
    return (
        f"note: read as one table, as the root's own files are one; discovery sees {len(landing.found):,} "
        f"datasets in it ({names}): --dataset NAME scans one on its own"
    )
