"""The scan's summary of many files' observations: how much it looks at per file, counted, never timed."""

from __future__ import annotations

from driftline.core.files import FileResult
from driftline.core.observation import Observation
from driftline.core.stats import FieldStats
from driftline.observe.thinning import ScanThinner


class _CountedTuple(tuple):  # type: ignore[type-arg]
    """A file's observations that count how often their length is asked."""

    asked = 0

    def __len__(self) -> int:
        _CountedTuple.asked += 1
        return super().__len__()


def _result(k: int, batches: int) -> FileResult:
    rel = f"part-{k:06d}.parquet"
    obs = [Observation(rel, b, 4 * b, 4, {"x": FieldStats(types={"int64": 4})}) for b in range(batches)]
    return FileResult(rel, "parquet", None, (), 100, 0, rows=4 * batches, observations=_CountedTuple(obs))


def test_files_past_the_limit_cost_the_same_each_when_no_block_can_widen():
    # A folder of more one-batch files than the scan's limit on observations (SCAN_BATCHES,
    # 65,536; 200 here): no file has blocks to merge, so nothing widens. The thinner used to
    # ask every result held whether it had more than one block on each add past the limit,
    # the square of the files in all (100,000 small files: five billion questions); it now
    # keeps that count as it goes, so each add asks a fixed few whatever the scan holds.
    _CountedTuple.asked = 0
    thinner = ScanThinner(limit=200)
    per_add = []
    for k in range(1000):
        before = _CountedTuple.asked
        thinner.add(_result(k, 1))
        per_add.append(_CountedTuple.asked - before)
    assert max(per_add[250:]) == max(per_add[:100])  # past the limit as before it
    assert [len(r.observations) for r in thinner.results] == [1] * 1000
    assert thinner.span == 1 and thinner.total == 1000


def test_a_file_of_several_blocks_still_widens_every_file_past_the_limit():
    # the rule itself is kept (observe/thinning.py): once a file of several blocks is held,
    # past the limit every file's blocks double until the scan fits or none can merge further
    thinner = ScanThinner(limit=10)
    for k in range(6):
        thinner.add(_result(k, 1))
    thinner.add(_result(6, 8))  # 6 + 8 = 14 observations > 10: blocks of 2 batches, 6 + 4 = 10
    assert thinner.span == 2
    assert [len(r.observations) for r in thinner.results] == [1] * 6 + [4]
    assert [r.batch_span for r in thinner.results] == [2] * 7
    assert [(o.batch, o.rows) for o in thinner.results[-1].observations] == [(0, 8), (1, 8), (2, 8), (3, 8)]
