"""Recommend a unified schema with cast rules and their measured loss, from a Profile alone.

The observation already counted what each cast would lose (content classes, leap seconds,
integers beyond 2**53 ...), so no second pass over the data is needed. ``apply`` (in
apply.py) casts real Arrow data by the same rules, which is how the counts are checked.

>>> import driftline, tempfile, pathlib
>>> d = pathlib.Path(tempfile.mkdtemp())
>>> _ = (d / "a.jsonl").write_text('{"pm25": 12.5}\\n{"pm25": "13.1"}\\n{"pm25": "n/a"}\\n')
>>> rec = recommend(driftline.scan(d))
>>> p = rec.plan("pm25")
>>> p.rule, p.target.key(), p.nulled, p.effects[0].examples[0].value
('parse_float', 'float64', 1, '"n/a"')
"""

from __future__ import annotations

from driftline.errors import OptionError, SchemaConflictError
from driftline.recommendation.facts import gather
from driftline.recommendation.options import RecommendOptions
from driftline.recommendation.partitions import partition_columns
from driftline.recommendation.plan import CAUSES, Alternative, Dropped, Effect, FieldPlan, Recommendation, is_conflict
from driftline.recommendation.rules import REGISTRY, Context
from driftline.results.profile import Profile

__all__ = [
    "CAUSES",
    "REGISTRY",
    "Alternative",
    "Dropped",
    "Effect",
    "FieldPlan",
    "Partition",
    "RecommendOptions",
    "Recommendation",
    "SchemaConflictError",
    "is_conflict",
    "recommend",
]


def recommend(profile: Profile, *, options: RecommendOptions | None = None, **overrides: object) -> Recommendation:
    """The unified schema for a profile: one FieldPlan per field path.

    options or keyword overrides (the fields of RecommendOptions) set the policy; an
    unknown option or a bad value raises PolicyError, a profile that is not a Profile
    OptionError; strict mode raises SchemaConflictError when any plan is a conflict.

    >>> import driftline, tempfile, pathlib
    >>> d = pathlib.Path(tempfile.mkdtemp()); _ = (d / "a.csv").write_text("n\\n7\\nn/a\\n")
    >>> p = driftline.recommend(driftline.scan(d)).plan("n")
    >>> p.rule, p.target.key(), [(e.cause, e.count) for e in p.effects]
    ('parse_integer', 'int64', [('null_token', 1)])
    """
    if not isinstance(profile, Profile):
        raise OptionError(f"recommend takes a Profile (driftline.scan or load_report), got {type(profile).__name__}")
    if options is not None and not isinstance(options, RecommendOptions):
        raise OptionError(f"options must be a RecommendOptions, got {type(options).__name__}")
    opts = (options or RecommendOptions()).replace(**overrides) if overrides else (options or RecommendOptions())
    tree = gather(profile)
    ctx = Context(tree, opts)
    plans = [ctx.plan(tree[path]) for path in tree.top]
    fields = tuple(sorted((p for p in plans if p is not None), key=lambda p: p.name))
    rec = Recommendation(
        root=profile.root,
        rows=profile.rows,
        files=len(profile.files),
        fields=fields,
        options=opts,
        dropped=tuple(sorted(ctx.dropped, key=lambda d: d.path)),
        partitions=partition_columns(profile.files, profile.partition_keys()),
    )
    if opts.strict and rec.conflicts():
        raise SchemaConflictError(rec)
    return rec
