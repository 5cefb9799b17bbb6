"""The cast rules file: every field path's target, rule, parameters and measured loss, as JSON.

The format is documented by docs/rules.schema.json (JSON Schema 2020-12). Fields are
listed flat, parents before children, each with its path as the scan spells it.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import orjson

from driftline.core import jsonnum, paths
from driftline.core.documents import read_json_document
from driftline.core.stats import example_json
from driftline.core.validation import check_document
from driftline.core.version import __version__
from driftline.errors import ReportVersionError
from driftline.recommendation.plan import FieldPlan, Recommendation

RULES_FORMAT = "driftline-rules"
RULES_VERSION = 2  # 2: example values are JSON values (1: JSON text in a string); version 1 is upgraded on load


def upgrade_rules_v1(doc: dict[str, Any]) -> dict[str, Any]:
    """A version 1 rules file as version 2 writes it: every example's value (in each effect's
    examples, the alternatives' included) from JSON text in a string to the value itself."""

    def walk(node: Any) -> Any:
        if isinstance(node, dict):
            return {
                k: [upgraded(e) for e in v] if k == "examples" and isinstance(v, list) else walk(v)
                for k, v in node.items()
            }
        if isinstance(node, list):
            return [walk(x) for x in node]
        return node

    def upgraded(e: Any) -> Any:
        if not isinstance(e, dict) or not isinstance(e.get("value"), str):
            return e  # left for the schema check to name
        return {**{k: v for k, v in e.items() if k != "value"}, **example_json(e["value"])}

    return {**walk(doc), "version": RULES_VERSION}


def _field(plan: FieldPlan) -> dict[str, Any]:
    parent, how = paths.parent(plan.path)
    out: dict[str, Any] = {
        "path": plan.path,
        "name": plan.name,
        "parent": parent,
        "as": how,
        "target": plan.target.key(),
        "nullable": plan.nullable,
        "required": plan.required,
        "rule": plan.rule,
        "does": plan.does,
        "why": plan.why,
        "inputs": dict(plan.inputs),
        "params": dict(plan.params),
        "nulled": plan.nulled,
        "changed": plan.changed,
        "exact": plan.exact,
        "effects": [e.to_json() for e in plan.effects],
        "alternatives": [a.to_json() for a in plan.alternatives],
    }
    if plan.max_chars is not None:
        out["max_chars"] = plan.max_chars
    return out


def renames(rec: Recommendation, flatten: str | None = None) -> list[dict[str, str]]:
    """The column names the naming rule changed (emit/schemas/names.py), as the SQL file makes them."""
    from driftline.emit.schemas.sql import layout  # sqlglot: only when a rules file is written

    return [r.to_json() for r in layout(rec, "duckdb", flatten).renames]


def rules_document(rec: Recommendation, *, flatten: str | None = None) -> dict[str, Any]:
    """The rules file as JSON data (flatten: the renames of the SQL columns flattened with that separator).

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.jsonl").write_text('{"x": 1}\\n{"x": 2.5}\\n')
    >>> doc = rules_document(driftline.scan(d).recommend())
    >>> doc["format"], [(f["path"], f["rule"], f["target"]) for f in doc["fields"]]
    ('driftline-rules', [('x', 'widen_numeric', 'float64')])
    """
    return {
        "format": RULES_FORMAT,
        "version": RULES_VERSION,
        "tool": {"name": "driftline", "version": __version__},
        "source": {"root": rec.root, "rows": rec.rows, "files": rec.files},
        "options": rec.options.to_json(),
        "fields": [_field(p) for p in rec.walk()],
        "dropped": [d.to_json() for d in rec.dropped],
        "renames": renames(rec, flatten),
    }


def dumps(rec: Recommendation, *, flatten: str | None = None) -> bytes:
    return jsonnum.dumps(rules_document(rec, flatten=flatten), option=orjson.OPT_INDENT_2) + b"\n"


def load_rules(path: str | Path) -> dict[str, Any]:
    """Read a rules file back as JSON data; ReportVersionError for another format or version."""
    source = repr(str(path))
    doc = read_json_document(path, "rules file", ReportVersionError)
    if not isinstance(doc, dict) or doc.get("format") != RULES_FORMAT:
        raise ReportVersionError(f'{source} is not a driftline rules file (no "format": "{RULES_FORMAT}")')
    if doc.get("version") == 1:
        doc = upgrade_rules_v1(doc)
    if doc.get("version") != RULES_VERSION:
        raise ReportVersionError(
            f"{source} has rules version {doc.get('version')!r} (at /version); this driftline "
            f"reads versions 1 and {RULES_VERSION}. Write the rules again with driftline schema --rules"
        )
    check_document(doc, "rules", "rules file", source)
    return doc
