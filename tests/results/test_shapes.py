"""Shapes: the partition key or record field that explains which fields records hold
(results/shapes.py), and the drift walk that leaves out what the shapes restate.

The expected discriminators of the golden cases are read off their make.py scripts
(tests/fixtures/drift/shapes-*/make.py), not off a scan.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest

import driftline
from _drift_cases import CASES
from driftline.core.valuepolicy import ValuePolicy
from driftline.results.conceal import conceal
from driftline.results.report import dumps
from driftline.results.shapes import EXPLAINED_SHARE, find_discriminator


def _write(path: Path, records: list[dict[str, object]]) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("".join(json.dumps(r) + "\n" for r in records), encoding="utf-8")


@pytest.mark.parametrize("batch_rows", [None, 1])
def test_a_record_field_explains_the_shapes(batch_rows: int | None) -> None:
    # source: tests/fixtures/drift/shapes-field/make.py (record(), FILES)
    keywords = {} if batch_rows is None else {"batch_rows": batch_rows}
    found = driftline.scan(CASES / "shapes-field" / "input", **keywords).shapes
    assert found is not None
    assert (found.source, found.name) == ("field", "kind")
    assert found.shared == ("account", "kind", "seq")
    assert found.partition_keys == ()
    by_value = {s.value: s for s in found.shapes}
    # a: 6 orders; b: 3 orders, 3 refunds; c: 3 refunds, 3 signups; d: 2 of each
    assert {v: s.rows for v, s in by_value.items()} == {"order": 11, "refund": 8, "signup": 5}
    assert found.own(by_value["order"]) == ("items", "order_id", "total")
    assert found.own(by_value["refund"]) == ("reason", "refund_id")
    assert found.own(by_value["signup"]) == ("user", "user.email", "user.plan")
    assert all(s.optional == () for s in found.shapes)


def test_a_partition_key_explains_the_shapes() -> None:
    # source: tests/fixtures/drift/shapes-partition/make.py (payload(), EVENTS)
    found = driftline.scan(CASES / "shapes-partition" / "input").shapes
    assert found is not None
    assert (found.source, found.name, found.partition_keys) == ("partition", "event", ("event",))
    assert found.shared == ("action", "installation", "installation.created_at", "installation.id")
    assert [(s.value, s.rows, found.own(s)) for s in found.shapes] == [
        ("issue", 10, ("issue", "issue.number", "issue.title", "labels")),
        ("push", 10, ("commits", "ref")),
        ("release", 10, ("release", "release.draft", "release.tag")),
    ]


def test_without_the_shapes_the_same_scan_floods() -> None:
    # The walk told nothing of the discriminator reports each kind's fields as coming and going.
    from driftline.results.drift import drift_summary

    profile = driftline.scan(CASES / "shapes-field" / "input")
    flooded = {(e.kind, e.path) for e in drift_summary(profile.files, shapes=None)[0]}
    assert {("field-new", "reason"), ("field-gone", "order_id"), ("field-new", "user")} <= flooded
    assert [(e.kind, e.path) for e in profile.events] == [("type-conflict", "account")]


def test_a_field_that_really_appears_later_is_no_discriminator(tmp_path: Path) -> None:
    # status is a label in every record, but humidity arrives from the second file on for
    # every status: its presence follows the scan order, not the label.
    for n in range(3):
        _write(
            tmp_path / f"f{n}.jsonl",
            [
                {"status": ["ok", "late"][i % 2], "temp": 20 + i, **({"humidity": 40 + i} if n else {})}
                for i in range(4)
            ],
        )
    profile = driftline.scan(tmp_path)
    assert profile.shapes is None
    assert [(e.kind, e.path, e.file, e.row, e.values) for e in profile.events] == [
        ("field-new", "humidity", "f1.jsonl", 0, 8)
    ]


def test_dated_partitions_are_no_discriminator(tmp_path: Path) -> None:
    # day=… values read as dates: a field set that changes with them is change over time.
    for day in (1, 2):
        _write(
            tmp_path / f"day=2026-03-0{day}" / "a.jsonl",
            [{"id": i, **({"v": 1} if day == 2 else {})} for i in range(3)],
        )
    profile = driftline.scan(tmp_path)
    assert profile.shapes is None
    assert [(e.kind, e.path) for e in profile.events] == [("field-new", "v")]


def _kinds(tmp_path: Path, optional_in_a: int) -> None:
    # kind a holds x; kind b holds y1..y4; some of a's rows also hold the first optional_in_a of o1..o4.
    rows = []
    for i in range(8):
        if i % 2 == 0:
            rows.append({"kind": "a", "x": i, **({f"o{j}": 1 for j in range(1, optional_in_a + 1)} if i == 0 else {})})
        else:
            rows.append({"kind": "b", **{f"y{j}": i for j in range(1, 5)}})
    _write(tmp_path / "f.jsonl", rows)


def test_the_tolerance_for_optional_fields(tmp_path: Path) -> None:
    # Varying fields: x, y1..y4 (explained) and o1.. (optional within kind a): 5 of 6 is at
    # least EXPLAINED_SHARE, 5 of 7 is not.
    assert EXPLAINED_SHARE == 0.8
    _kinds(tmp_path, 1)
    found = driftline.scan(tmp_path).shapes
    assert found is not None and found.explained == ("x", "y1", "y2", "y3", "y4")
    assert [(s.value, s.optional) for s in found.shapes] == [("a", ("o1",)), ("b", ())]
    _kinds(tmp_path, 2)
    assert driftline.scan(tmp_path).shapes is None


def test_the_report_names_the_discriminator_and_loads_it_back(tmp_path: Path) -> None:
    profile = driftline.scan(CASES / "shapes-field" / "input")
    data = json.loads(dumps(profile))
    assert data["shapes"]["by"] == "field"
    assert data["shapes"]["name"] == "kind"
    assert [v["value"] for v in data["shapes"]["values"]] == ["order", "refund", "signup"]
    (tmp_path / "r.json").write_bytes(dumps(profile))
    loaded = driftline.load_report(tmp_path / "r.json")
    assert loaded.shapes == profile.shapes  # a report keeps no tallies: the entry is read back
    assert loaded.events == profile.events


def test_a_report_without_a_discriminator_has_no_shapes_entry() -> None:
    data = json.loads(dumps(driftline.scan(CASES / "baseline" / "input")))
    assert "shapes" not in data


def test_field_values_are_concealed_as_examples_are() -> None:
    profile = driftline.scan(CASES / "shapes-field" / "input")
    hidden = conceal(profile, ValuePolicy("hide")).shapes
    assert hidden is not None and [s.value for s in hidden.shapes] == ["", "", ""]
    assert profile.shapes is not None and hidden.explained == profile.shapes.explained
    kept = conceal(driftline.scan(CASES / "shapes-partition" / "input"), ValuePolicy("hide")).shapes
    assert kept is not None and [s.value for s in kept.shapes] == ["issue", "push", "release"]


def test_no_files_no_discriminator() -> None:
    assert find_discriminator([]) is None


def test_a_series_that_never_had_a_field_is_no_discriminator(tmp_path: Path) -> None:
    # region=west never sends battery: its shape is part of the others', a gap to report,
    # not a shape of its own (east and north hold nothing west lacks but battery).
    for region in ("east", "north", "west"):
        rows = [{"id": i, **({"battery": {"level": 90}} if region != "west" else {})} for i in range(3)]
        _write(tmp_path / f"region={region}" / "a.jsonl", rows)
    assert driftline.scan(tmp_path).shapes is None


def test_values_with_fields_of_their_own_are_shapes(tmp_path: Path) -> None:
    # The same folders, but west sends solar where the others send battery: shapes apart.
    for region in ("east", "north", "west"):
        own = {"solar": {"watts": 5}} if region == "west" else {"battery": {"level": 90}}
        _write(tmp_path / f"region={region}" / "a.jsonl", [{"id": i, **own} for i in range(3)])
    found = driftline.scan(tmp_path).shapes
    assert found is not None and (found.name, found.explained) == (
        "region",
        ("battery", "battery.level", "solar", "solar.watts"),
    )


def test_two_partition_values_are_too_few(tmp_path: Path) -> None:
    # Two folders read one after the other, each with a field of its own: as likely a change
    # between two producers as two kinds of record (MIN_PARTITION_VALUES); the events stay.
    for region, own in (("east", "battery"), ("west", "solar")):
        _write(tmp_path / f"region={region}" / "a.jsonl", [{"id": i, own: 1} for i in range(3)])
    profile = driftline.scan(tmp_path)
    assert profile.shapes is None
    assert [(e.kind, e.path) for e in profile.events] == [("field-new", "solar"), ("field-gone", "battery")]


def test_drift_within_a_shape_is_still_found(tmp_path: Path) -> None:
    # Three kinds with fields of their own, mixed in every file; in f2.jsonl the order's total
    # arrives as a string: a change within the order shape, reported as any type change is.
    for n in range(3):
        rows: list[dict[str, object]] = []
        for i in range(6):
            kind = ("order", "refund", "signup")[i % 3]
            own = {
                "order": {"total": f"{i}.5" if n == 2 else i + 0.5},
                "refund": {"reason": "x"},
                "signup": {"plan": "free"},
            }
            rows.append({"kind": kind, "seq": 6 * n + i, **own[kind]})
        _write(tmp_path / f"f{n}.jsonl", rows)
    profile = driftline.scan(tmp_path)
    assert profile.shapes is not None and profile.shapes.name == "kind"
    assert [(e.kind, e.path, e.before, e.after, e.file, e.row, e.values) for e in profile.events] == [
        ("type-conflict", "total", "float64", "string", "f2.jsonl", 0, 2)
    ]


def test_a_partition_without_one_kind_restates_the_shapes(tmp_path: Path) -> None:
    # store=d holds refunds only: its lack of the order's fields is the shapes, not a change
    # (kind explains them), in the walk and in the partition comparison alike.
    from driftline.results.drift import drift_summary

    for store in "abcd":
        kinds = ["order"] * 3 + ["refund"] * 2 if store != "d" else ["refund"] * 5
        own = {"order": {"order_id": 1, "total": 1.5}, "refund": {"reason": "x"}}
        _write(tmp_path / f"store={store}" / "a.jsonl", [{"kind": k, "n": i, **own[k]} for i, k in enumerate(kinds)])
    profile = driftline.scan(tmp_path)
    assert profile.shapes is not None and profile.shapes.explained == ("order_id", "reason", "total")
    assert profile.events == ()
    flooded = [(e.kind, e.path, dict(e.partitions)) for e in drift_summary(profile.files, shapes=None)[0]]
    assert flooded == [("field-gone", "order_id", {"store": "d"}), ("field-gone", "total", {"store": "d"})]
