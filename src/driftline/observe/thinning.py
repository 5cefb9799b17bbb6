"""Batch observations summarised in blocks, so that their number stays bounded in a scan.

A file read with a tiny batch_rows (`--batch-rows 1`) gives one observation per row, each
holding statistics for every path: a million rows took gigabytes.  Past FILE_BATCHES
observations in a file, consecutive batches are merged into blocks of 2, 4, 8, ...
batches (FieldStats.merge, so counts stay exact); past SCAN_BATCHES observations in a
scan, every file's blocks grow the same way.  The block size depends only on the number
of batches (the rule in block_size), and blocks are aligned on the batch index, so a file
read whole, in byte spans or by another worker is summarised the same way.

FileResult.batch_span records the block size; the report writes it for each file that
was summarised, and drift events then locate their block rather than the single batch.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import replace

from driftline.core.files import FileResult
from driftline.core.observation import Observation
from driftline.core.shapetally import merge_all_tallies
from driftline.core.stats import merge_all

FILE_BATCHES = 4096  # observations kept per file before batches are merged into blocks
SCAN_BATCHES = 65_536  # observations kept per scan before every file's blocks grow


def block_size(batches: int, limit: int) -> int:
    """The smallest power of two s with ceil(batches / s) <= limit.

    >>> block_size(4096, 4096), block_size(4097, 4096), block_size(10**6, 4096)
    (1, 2, 256)
    """
    s = 1
    while -(-batches // s) > limit:
        s *= 2
    return s


def merge_block(parts: Sequence[Observation], index: int) -> Observation:
    """Consecutive observations of one file as one: counts add, the earliest examples stay."""
    if len(parts) == 1 and parts[0].batch == index:
        return parts[0]
    first = parts[0]
    return Observation(
        file=first.file,
        batch=index,
        row_start=first.row_start,
        rows=sum(p.rows for p in parts),
        fields=merge_all(p.fields for p in parts),
        other_paths=sum(p.other_paths for p in parts),
        other_values=sum(p.other_values for p in parts),
        shapes=merge_all_tallies(p.shapes for p in parts),
    )


def regroup(blocks: Sequence[Observation], factor: int) -> list[Observation]:
    """Blocks (indexed 0, 1, 2, ... at one size) merged `factor` at a time, aligned on the index."""
    if factor == 1:
        return list(blocks)
    out: list[Observation] = []
    group: list[Observation] = []
    for b in blocks:
        if group and b.batch // factor != group[0].batch // factor:
            out.append(merge_block(group, group[0].batch // factor))
            group = []
        group.append(b)
    if group:
        out.append(merge_block(group, group[0].batch // factor))
    return out


class Thinner:
    """Observations of one file as they are read (original batch indices, in order), kept in
    blocks of block_size(batches so far) batches.  Memory holds at most about `limit` blocks."""

    def __init__(self, limit: int | None = None) -> None:
        self.limit = FILE_BATCHES if limit is None else limit
        self.span = 1
        self.blocks: list[Observation] = []
        self._open: list[Observation] = []  # batches of the last block, not merged yet

    def add(self, obs: Observation) -> None:
        span = block_size(obs.batch + 1, self.limit)
        if span > self.span:
            self._close()
            factor = span // self.span
            self.blocks = regroup(self.blocks, factor)
            self.span = span
            if self.blocks and self.blocks[-1].batch == obs.batch // span:
                last = self.blocks.pop()  # the block obs belongs to stays open
                self._open = [replace(last, batch=last.batch * span)]  # as a batch index, for _close
        if self._open and self._open[0].batch // self.span != obs.batch // self.span:
            self._close()
        self._open.append(obs)

    def _close(self) -> None:
        if self._open:
            self.blocks.append(merge_block(self._open, self._open[0].batch // self.span))
            self._open = []

    def result(self) -> tuple[tuple[Observation, ...], int]:
        self._close()
        return tuple(self.blocks), self.span


def concat_blocks(parts: Sequence[tuple[Sequence[Observation], int]]) -> tuple[tuple[Observation, ...], int]:
    """The blocks of consecutive parts of one file (each with its block size, aligned on the
    file's batch index) as one sequence at the largest size: a block two parts share merges.

    The largest size is the one the last batch of the file asks (block_size grows with the
    batch index), so this is what one Thinner over the whole file would hold.
    """
    span = max((size for _, size in parts), default=1)
    out: list[Observation] = []
    for blocks, size in parts:
        for b in regroup(blocks, span // size):
            if out and out[-1].batch == b.batch:
                out[-1] = merge_block([replace(out[-1], batch=0), replace(b, batch=1)], b.batch)
            else:
                out.append(b)
    return tuple(out), span


def thin(observations: Iterable[Observation], limit: int | None = None) -> tuple[tuple[Observation, ...], int]:
    """Observations (original batch indices) in blocks: (blocks, block size)."""
    t = Thinner(limit)
    for o in observations:
        t.add(o)
    return t.result()


def thin_result(res: FileResult, limit: int | None = None) -> FileResult:
    """A file's result with its observations summarised, when they are more than limit."""
    limit = FILE_BATCHES if limit is None else limit
    if res.batch_span != 1 or len(res.observations) <= limit:
        return res
    blocks, span = thin(res.observations, limit)
    return replace(res, observations=blocks, batch_span=span)


def widen(res: FileResult, span: int) -> FileResult:
    """A file's result in blocks of `span` batches (a power of two, at least its own block size)."""
    if span <= res.batch_span:
        return res
    return replace(res, observations=tuple(regroup(res.observations, span // res.batch_span)), batch_span=span)


class ScanThinner:
    """Every file's result as it arrives, in scan order; once the scan holds more than `limit`
    observations, every file's blocks double, as often as needed (and possible)."""

    def __init__(self, limit: int | None = None) -> None:
        self.limit = SCAN_BATCHES if limit is None else limit
        self.span = 1
        self.results: list[FileResult] = []
        self.total = 0
        # results of more than one block: while none is, widening cannot help, and asking each
        # result on every add past the limit cost the square of the files (100,000 small files)
        self.several = 0

    def add(self, res: FileResult) -> FileResult:
        res = widen(res, self.span)
        self.results.append(res)
        self.total += len(res.observations)
        self.several += len(res.observations) > 1
        while self.total > self.limit and self.several:
            self.span *= 2
            self.results = [widen(r, self.span) for r in self.results]
            self.total = sum(len(r.observations) for r in self.results)
            self.several = sum(len(r.observations) > 1 for r in self.results)
        return res


def thin_scan(results: Iterable[FileResult], limit: int | None = None) -> list[FileResult]:
    """Results in scan order, summarised so that the scan holds at most about limit observations."""
    t = ScanThinner(limit)
    for r in results:
        t.add(r)
    return t.results


def cap_paths(results: Sequence[FileResult], limit: int) -> list[FileResult]:
    """Results in scan order keeping at most `limit` distinct field paths over the scan: the
    first ones in scan order (file, batch, then path order, so a struct comes before its
    fields); the others leave the observations and are counted in other_paths / other_values.

    Each JSON batch is already capped as it is walked; this bounds the scan, whose batches
    may each bring new paths (records keyed by ids).
    """
    kept: set[str] = set()
    out: list[FileResult] = []
    for res in results:
        observations = []
        touched = False
        for o in res.observations:
            new = [p for p in o.fields if p not in kept]
            room = limit - len(kept)
            kept.update(new[:room])
            gone = new[room:] if len(new) > room else []
            if gone:
                touched = True
                dropped = set(gone)
                fields = {p: st for p, st in o.fields.items() if p not in dropped}
                o = replace(
                    o,
                    fields=fields,
                    other_paths=o.other_paths + len(gone),
                    other_values=o.other_values + sum(o.fields[p].present for p in gone),
                )
            observations.append(o)
        out.append(replace(res, observations=tuple(observations)) if touched else res)
    return out
