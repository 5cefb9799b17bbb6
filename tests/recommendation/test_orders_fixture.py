"""The orders fixture (tests/_orders.py) is what it says: the scan sees exactly the planted values."""

from __future__ import annotations

from pathlib import Path

from _orders import BATCH_ROWS, TILL_ROWS, WEB_ROWS, make_orders


def test_the_fixture_holds_the_planted_values(tmp_path: Path):
    import driftline

    p = driftline.scan(make_orders(tmp_path))
    assert p.rows == WEB_ROWS + TILL_ROWS + BATCH_ROWS
    assert p.error_count == 0
    f = p.fields
    assert f["big"].stats.unsafe_ints == 3  # 2**53+1, 2**53+2, -(2**53+3)
    assert f["created"].stats.leap_seconds == 1 and f["created"].stats.lowercase_rfc3339 == 1
    assert f["amount"].stats.classes["null_token"] == 2 and f["amount"].stats.classes["empty"] == 1
    # 4 bare JSON strings and 7 CSV cells (the eighth is 'n/a', a null to the scan)
    assert f["labels"].stats.types == {"list": 22, "string": 11}
    assert set(f["payload"].stats.types) == {"struct", "string"}
