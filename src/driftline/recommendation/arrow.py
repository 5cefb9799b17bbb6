"""The recommendation as an Arrow schema: the exact schema apply() produces.

Field order is name order at every level (struct fields included); each top-level field
carries its rule as metadata, and the schema carries every path's rule as JSON.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import orjson
import pyarrow as pa

from driftline.core.lattice import to_arrow

if TYPE_CHECKING:  # annotations only: plan.py imports this module (Recommendation.schema)
    from driftline.recommendation.plan import FieldPlan, Recommendation

RULE_KEY = b"driftline.rule"
RULES_KEY = b"driftline.rules"


def arrow_type(plan: FieldPlan) -> pa.DataType:
    """The Arrow type of a plan, nested fields built from the child plans."""
    name = plan.target.name
    if name == "struct":
        return pa.struct([arrow_field(c) for c in plan.children])
    if name == "list":
        return pa.list_(arrow_field(plan.children[0], "item"))
    if name == "map":
        key, value = plan.children
        return pa.map_(pa.field("key", arrow_type(key), nullable=False), arrow_field(value, "value"))
    return to_arrow(plan.target)


def arrow_field(plan: FieldPlan, name: str | None = None) -> pa.Field:
    return pa.field(plan.name if name is None else name, arrow_type(plan), nullable=plan.nullable)


def target_schema(rec: Recommendation) -> pa.Schema:
    """The unified schema, with rules as metadata.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> print(target_schema(driftline.scan(d).recommend()).field("x"))
    pyarrow.Field<x: double not null>
    """
    fields = [arrow_field(p).with_metadata({RULE_KEY: p.rule.encode()}) for p in rec.fields]
    rules = {p.path: p.rule for p in rec.walk()}
    return pa.schema(fields, metadata={RULES_KEY: orjson.dumps(rules)})
