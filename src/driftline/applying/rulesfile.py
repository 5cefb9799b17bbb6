"""A saved rules file (`driftline schema --rules`, docs/rules.schema.json) read back as the
Recommendation it was written from, so that apply casts with rules a person reviewed."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from driftline.core.lattice import parse_key
from driftline.core.stats import Example
from driftline.emit.schemas.rules_json import load_rules
from driftline.recommendation.options import RecommendOptions
from driftline.recommendation.plan import Alternative, Dropped, Effect, FieldPlan, Recommendation


def _effect(d: dict[str, Any]) -> Effect:
    examples = tuple(Example.from_json(e) for e in d.get("examples", []))
    return Effect(d["kind"], d["cause"], d["count"], examples, d.get("exact", True), d.get("note", ""))


def _plan(d: dict[str, Any], children: dict[str | None, list[dict[str, Any]]]) -> FieldPlan:
    return FieldPlan(
        path=d["path"],
        name=d["name"],
        target=parse_key(d["target"]).with_nullable(d["nullable"]),
        rule=d["rule"],
        does=d["does"],
        why=d["why"],
        inputs=dict(d.get("inputs", {})),
        effects=tuple(_effect(e) for e in d.get("effects", [])),
        params=dict(d.get("params", {})),
        alternatives=tuple(Alternative(a["rule"], a["target"], a["note"]) for a in d.get("alternatives", [])),
        children=tuple(_plan(c, children) for c in children.get(d["path"], [])),
        required=d.get("required", False),
        max_chars=d.get("max_chars"),
    )


def recommendation_of(doc: dict[str, Any]) -> Recommendation:
    """The Recommendation a rules document describes (its fields are listed parents first)."""
    children: dict[str | None, list[dict[str, Any]]] = {}
    for f in doc["fields"]:
        children.setdefault(f["parent"], []).append(f)
    source = doc.get("source", {})
    return Recommendation(
        root=source.get("root", ""),
        rows=source.get("rows", 0),
        files=source.get("files", 0),
        fields=tuple(_plan(f, children) for f in children.get(None, [])),
        options=RecommendOptions.from_mapping(doc.get("options", {})),
        dropped=tuple(Dropped(d["path"], d["present"], d["container"]) for d in doc.get("dropped", [])),
    )


def load_recommendation(path: str | Path) -> Recommendation:
    """A rules file as a Recommendation; ReportVersionError / DamagedFileError for a bad file."""
    return recommendation_of(load_rules(path))
