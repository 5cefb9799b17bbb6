"""The reconciliation: every input row written or rejected, and every value the rules touched
counted against the loss the recommendation predicted from the scan alone.

Per file: rows in = rows written + rows rejected. Per field path and cause: the values in
the quarantine (or, for a note, the values counted) equal the effect's predicted count when
the recommendation could count it (exact); a cause it could not count is shown, not judged.
Any difference is a failure naming the field, the cause and the files.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

from driftline.applying.quarantine import effect_kind
from driftline.recommendation.plan import Recommendation

RECONCILIATION_FORMAT = "driftline-reconciliation"
RECONCILIATION_VERSION = 1


def _add(into: dict[str, dict[str, int]], path: str, cause: str, n: int) -> None:
    if n:
        per = into.setdefault(path, {})
        per[cause] = per.get(cause, 0) + n


@dataclass
class FileCount:
    """What apply did with one input file."""

    file: str
    partition: str
    rows_in: int = 0
    rows_written: int = 0
    rows_rejected: int = 0
    #: path → cause → values: quarantined ones (kinds null and change) and counted notes
    values: dict[str, dict[str, int]] = field(default_factory=dict)
    #: top-level column → nulls written
    nulls: dict[str, int] = field(default_factory=dict)

    def add(self, path: str, cause: str, n: int) -> None:
        _add(self.values, path, cause, n)

    @property
    def balanced(self) -> bool:
        return self.rows_in == self.rows_written + self.rows_rejected

    def to_json(self) -> dict[str, Any]:
        return {
            "file": self.file,
            "partition": self.partition,
            "rows_in": self.rows_in,
            "rows_written": self.rows_written,
            "rows_rejected": self.rows_rejected,
            "balanced": self.balanced,
            "values": {p: dict(sorted(c.items())) for p, c in sorted(self.values.items())},
            "nulls": dict(sorted(self.nulls.items())),
        }

    @staticmethod
    def from_json(d: dict[str, Any]) -> FileCount:
        return FileCount(
            d["file"], d["partition"], d["rows_in"], d["rows_written"], d["rows_rejected"], d["values"], d["nulls"]
        )


def _files_text(files: dict[str, int]) -> str:
    if not files:
        return "in no file"
    shown = sorted(files.items())[:5]
    more = f" and {len(files) - 5} more" if len(files) > 5 else ""
    return "in " + ", ".join(f"{f} ({n})" for f, n in shown) + more


def reconcile(rec: Recommendation, counts: Sequence[FileCount], *, root: str, rules_source: str) -> dict[str, Any]:
    """The reconciliation document (JSON data): rows, columns, every effect, and the differences."""
    plans = {p.path: p for p in rec.walk()}
    measured: dict[tuple[str, str], dict[str, int]] = {}
    for c in counts:
        for path, per in c.values.items():
            for cause, n in per.items():
                files = measured.setdefault((path, cause), {})
                files[c.file] = files.get(c.file, 0) + n
    predicted = {(p.path, e.cause): e for p in rec.walk() for e in p.effects}
    order = {path: i for i, path in enumerate(plans)}
    effects, differences = [], []
    for path, cause in sorted(set(measured) | set(predicted), key=lambda k: (order.get(k[0], len(order)), k[0], k[1])):
        files = measured.get((path, cause), {})
        got = sum(files.values())
        e = predicted.get((path, cause))
        kind = e.kind if e else effect_kind(cause)
        exact = e is None or e.exact
        want = e.count if e else 0
        matches = got == want if exact else True
        effects.append(
            {
                "path": path,
                "rule": plans[path].rule if path in plans else None,
                "cause": cause,
                "kind": kind,
                "predicted": want if exact else None,
                "exact": exact,
                "quarantined" if kind != "note" else "counted": got,
                "files": dict(sorted(files.items())),
                "matches": matches,
            }
        )
        if not matches:
            verb = "quarantined" if kind != "note" else "counted"
            differences.append(f"{path}: {cause}: {verb} {got}, predicted {want}, {_files_text(files)}")
    rows_in = sum(c.rows_in for c in counts)
    written = sum(c.rows_written for c in counts)
    rejected = sum(c.rows_rejected for c in counts)
    for c in counts:
        if not c.balanced:
            differences.append(f"{c.file}: {c.rows_in} rows in, {c.rows_written} written + {c.rows_rejected} rejected")
        if c.rows_rejected:
            differences.append(f"{c.file}: {c.rows_rejected} rows rejected; the recommendation predicted none")
    if rules_source == "scan" and rows_in != rec.rows:
        differences.append(f"rows: {rows_in} read, the recommendation counted {rec.rows}")
    columns: dict[str, dict[str, int]] = {}
    for c in counts:
        for name, n in c.nulls.items():
            columns.setdefault(name, {"nulls": 0})["nulls"] += n
    return {
        "format": RECONCILIATION_FORMAT,
        "version": RECONCILIATION_VERSION,
        "root": root,
        "rules": rules_source,
        "rows": {"in": rows_in, "written": written, "rejected": rejected, "balanced": rows_in == written + rejected},
        "columns": {name: columns.get(name, {"nulls": 0}) for name in (p.name for p in rec.fields)},
        "effects": effects,
        "dropped": [d.path for d in rec.dropped],
        "files": [c.to_json() for c in counts],
        "differences": differences,
        "matches": not differences,
    }
