"""Compare a Profile with a Baseline under a Policy: every change the rules see, judged.

The walk goes batch by batch in scan order (path order, then batch order), so each change
is reported with the first file, partition, row and value that shows it, and counted
over the whole scan. Each rule is a small function of the walk; RULE_CHECKS runs them in
the order of policy.RULES.

>>> from driftline.results.profile import Profile
>>> from driftline.gate.baseline import Baseline
>>> compare(Profile("r", ()), Baseline("report", "b")).passed
True
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable, Iterator
from dataclasses import dataclass, field
from types import MappingProxyType

from driftline.core import paths
from driftline.core.lattice import DType, family, join, join_all, parse_key, shallow, type_of_key, type_text
from driftline.core.observation import TEXT_CLASS_TYPE, Observation
from driftline.core.stats import NULL_SAMPLE, Example, FieldStats, class_sample, type_sample
from driftline.core.words import count, plural
from driftline.gate.baseline import NULL_CLASSES, Baseline, Expected
from driftline.gate.policy import RULES, Policy
from driftline.gate.verdict import RuleResult, Verdict, Violation
from driftline.results.profile import Profile, container_count

# What a cast rule (recommendation/rules.py names them) lets into its target besides values that
# already fit: parse_* rules parse strings (judged by content class, as cast_loss); these
# write any value as text; wrap_scalar_in_list wraps scalars that fit the list's item type.
# Every other rule (identity, merge_struct, widen_*, map_null_tokens) casts no kind into another.
TEXT_RULES = frozenset({"format_as_string", "keep_as_json_text"})
WRAP_RULE = "wrap_scalar_in_list"


def parses_strings(rule: str | None) -> bool:
    """True for the rules that parse strings into the target type (parse_integer, ...)."""
    return rule is not None and rule.startswith("parse_")


def _wrapped(key: str, exp: Expected) -> bool:
    """A scalar the wrap rule turns into a one-element list of the agreed item type."""
    t = exp.type
    return (
        exp.rule == WRAP_RULE
        and t is not None
        and t.name == "list"
        and t.item is not None
        and key not in ("list", "struct", "map")
        and fits(type_of_key(key), shallow(t.item))
    )


# -- type relations --------------------------------------------------------------------


def fits(t: DType, b: DType) -> bool:
    """True when every value of type t is held by type b as it is (b is t or wider)."""
    return join(b, t).with_nullable(False) == b.with_nullable(False)


def _has_string(b: DType) -> bool:
    return any(family(m) == "string" for m in (b.members or (b,)))


def _casts(cls: str, b: DType, st: FieldStats, accept: frozenset[str] | None = None) -> bool:
    """Does a string of content class cls cast into b without becoming null?

    accept, when the rule names them, are the classes it parses; else the class's type decides.
    """
    if _has_string(b):
        return True
    if accept is not None:
        return cls in accept
    inferred = TEXT_CLASS_TYPE.get(cls)
    if inferred is None:
        return False  # empty strings and null tokens would become null
    if b.name == "decimal" and cls in ("integer", "decimal"):
        # int_digits / frac_digits are the widest of the batch's numeric strings.
        assert b.precision is not None and b.scale is not None
        return st.int_digits <= b.precision - b.scale and st.frac_digits <= b.scale
    return fits(parse_key(inferred), b)


# -- findings ----------------------------------------------------------------------------


@dataclass(slots=True)
class _Tally:
    """One (rule, field, change) over the walk: counts, files and the first example.

    within marks a threshold rule's finding that stays under its limit: shown, never gated.
    """

    rule: str
    path: str | None
    change: str
    message: str
    within: bool = False
    count: int = 0
    files: set[str] = field(default_factory=set)
    first: Example | None = None
    file: str | None = None
    row: int | None = None

    def add(self, n: int, file: str, ex: Example | None, row: int | None = None) -> None:
        self.count += n
        if file:
            self.files.add(file)
        # The walk is in scan order, but one batch may add several classes: keep the earliest.
        if self.file is None or ex is not None and self.first is not None and ex < self.first:
            self.file, self.first, self.row = file, ex, ex.row if ex is not None else row


class _Findings:
    def __init__(self) -> None:
        self.tallies: dict[tuple[str, str | None, str], _Tally] = {}

    def add(
        self,
        rule: str,
        path: str | None,
        change: str,
        message: str,
        n: int,
        file: str,
        ex: Example | None = None,
        row: int | None = None,
        *,
        within: bool = False,
    ) -> None:
        key = (rule, path, change)
        tally = self.tallies.get(key)
        if tally is None:
            tally = self.tallies[key] = _Tally(rule, path, change, message, within)
        tally.add(n, file, ex, row)


@dataclass(frozen=True)
class _Walk:
    profile: Profile
    baseline: Baseline
    policy: Policy

    def batches(self) -> Iterator[tuple[Observation, dict[str, int]]]:
        """Each batch with the container count of each of its paths."""
        for f in self.profile.files:
            for obs in f.observations:
                yield obs, {p: container_count(p, obs.fields, obs.rows) for p in obs.fields}

    def expected(self, path: str) -> Expected | None:
        return self.baseline.fields.get(path)


def _earliest(st: FieldStats) -> Example | None:
    firsts = [exs[0] for exs in st.samples.values() if exs]
    return min(firsts) if firsts else None


# -- the rules ---------------------------------------------------------------------------


def _string_values(st: FieldStats) -> dict[str, int]:
    """Content class → count of the string-typed values (JSON strings, or CSV 'text' cells)."""
    if st.text:
        return {"text": st.types["string"]} if st.types.get("string") else {}
    return {c: n for c, n in st.classes.items()}


def check_types(w: _Walk, out: _Findings) -> None:
    """type_change, widening and cast_loss, value by value against the baseline type."""
    for obs, _ in w.batches():
        for path, st in obs.fields.items():
            exp = w.expected(path)
            if exp is None or exp.type is None or not st.types:
                continue
            b = shallow(exp.type)
            casting = parses_strings(exp.rule)
            # CSV cells are text: a string column takes any; text rules write any value as text.
            any_fits = st.text and _has_string(b) or exp.rule in TEXT_RULES
            for key, n in st.types.items():
                t = type_of_key(key)
                if any_fits or fits(t, b) or _wrapped(key, exp):
                    continue
                if key == "string" and casting:
                    continue  # the rule parses strings: judged by content class below
                joined = join(b, t).with_nullable(False)
                if joined.name != "union" and family(joined) == family(b):
                    out.add(
                        "widening",
                        path,
                        f"{type_text(b)} → {type_text(joined)}",
                        f"{{n value}} of type {key} in {{files}} widen the baseline type",
                        n,
                        obs.file,
                        st.first(type_sample(key)),
                    )
                else:
                    out.add(
                        "type_change",
                        path,
                        f"{type_text(b)} → {key}",
                        f"{{n value}} of type {key} in {{files}}, which the baseline type {type_text(b)} cannot hold",
                        n,
                        obs.file,
                        st.first(type_sample(key)),
                    )
            if casting and not _has_string(b):
                for cls, n in _string_values(st).items():
                    if not _casts(cls, b, st, exp.accept):
                        out.add(
                            "cast_loss",
                            path,
                            f"cast rule {exp.rule}: string → {type_text(b)}",
                            "{n string} in {files} that the cast rule would turn into null",
                            n,
                            obs.file,
                            st.first(class_sample(cls)) if not st.text else st.first(type_sample("string")),
                        )


def check_narrowing(w: _Walk, out: _Findings) -> None:
    for path, s in w.profile.fields.items():
        exp = w.expected(path)
        if exp is None or exp.type is None or not s.stats.types:
            continue
        b = shallow(exp.type)
        seen = join_all(type_of_key(k) for k in s.stats.types).with_nullable(False)
        if seen != b and fits(seen, b) and not (s.stats.text and _has_string(b)):
            ex = _earliest(s.stats)
            out.add(
                "narrowing",
                path,
                f"{type_text(b)} → {type_text(seen)}",
                f"{_all(s.stats.nonnull, 'value')} {plural(s.stats.nonnull, 'fits', 'fit')} {type_text(seen)}",
                s.stats.nonnull,
                ex.file if ex else "",
                ex,
            )


def _parent_known(w: _Walk, path: str) -> bool:
    """A new path is reported only where the baseline lists its container's children."""
    parent, _ = paths.parent(path)
    if parent is None:
        return True
    pexp = w.expected(parent)
    # A text rule writes the whole value as text, so its children are no fields of their own.
    return pexp is not None and not pexp.open and pexp.rule not in TEXT_RULES


def check_fields(w: _Walk, out: _Findings) -> None:
    """new_field, missing_required and unexpected_nulls, batch by batch."""
    for obs, containers in w.batches():
        for path, st in obs.fields.items():
            exp = w.expected(path)
            if exp is None:
                if st.present and _parent_known(w, path):
                    types = ", ".join(sorted(st.types)) or "null"
                    out.add(
                        "new_field",
                        path,
                        f"new field ({types})",
                        "a field the baseline does not name: {n value} in {files}",
                        st.present,
                        obs.file,
                        _earliest(st),
                    )
                continue
            if st.nulls and not exp.nullable:
                out.add(
                    "unexpected_nulls",
                    path,
                    "null in a non-nullable field",
                    "{n null} in {files} where the baseline allows none",
                    st.nulls,
                    obs.file,
                    st.first(NULL_SAMPLE),
                )
        for path, exp in w.baseline.fields.items():
            if not exp.required:
                continue
            parent, _ = paths.parent(path)
            seen = obs.fields.get(path)
            container = (
                containers.get(path)
                if seen is not None
                else (obs.rows if parent is None else container_count(path, obs.fields, obs.rows))
            )
            absent = (container or 0) - (seen.present if seen is not None else 0)
            if absent > 0:
                # The first absent row is known only when the whole batch lacks a top-level field.
                row = obs.row_start if seen is None and parent is None else None
                places = "{n row}" if parent is None else "{n} of its containers"
                out.add(
                    "missing_required",
                    path,
                    "required field absent",
                    f"absent from {places} in {{files}}, where the baseline requires it",
                    absent,
                    obs.file,
                    None,
                    row,
                )


def check_gone(w: _Walk, out: _Findings) -> None:
    """optional_gone: an optional field absent from every row (its container still there)."""
    seen = w.profile.fields
    for path, exp in w.baseline.fields.items():
        if exp.required or (path in seen and seen[path].stats.present):
            continue
        parent, _ = paths.parent(path)
        if parent is not None and not (parent in seen and container_count(path, w.profile.stats, w.profile.rows)):
            continue  # its container is gone too: that one is reported
        if w.profile.rows:
            out.add(
                "optional_gone",
                path,
                "optional field no longer seen",
                f"absent from {_all(w.profile.rows, 'row')}",
                w.profile.rows,
                "",
            )


def check_content(w: _Walk, out: _Findings) -> None:
    """content_class: strings of a class the baseline's format or observed classes lack."""
    for obs, _ in w.batches():
        for path, st in obs.fields.items():
            exp = w.expected(path)
            if exp is None or exp.classes is None or not st.classes:
                continue
            b = shallow(exp.type) if exp.type is not None else None
            casting = parses_strings(exp.rule)
            for cls, n in st.classes.items():
                if cls in NULL_CLASSES or cls in exp.classes:
                    continue
                if b is not None and not _class_kept(cls, b, st, casting, exp.accept):
                    continue  # the value's type changed: check_types reports it
                allowed = ", ".join(sorted(exp.classes)) or "none"
                out.add(
                    "content_class",
                    path,
                    f"new content class {cls}",
                    f"{{n string}} in {{files}}; the baseline allows: {allowed}",
                    n,
                    obs.file,
                    st.first(class_sample(cls)),
                )


def _class_kept(cls: str, b: DType, st: FieldStats, casting: bool, accept: frozenset[str] | None) -> bool:
    """True when a value of this class keeps a type the baseline holds."""
    if _has_string(b):
        return True
    if st.text:
        inferred = TEXT_CLASS_TYPE.get(cls)
        return inferred is not None and fits(parse_key(inferred), b)
    return casting and _casts(cls, b, st, accept)


def check_range(w: _Walk, out: _Findings) -> None:
    """out_of_range: batch minimum / maximum (and longest string) against the baseline's; reports the extreme."""
    hits: dict[tuple[str, str], list[tuple[float, str]]] = {}
    for obs, _ in w.batches():
        for path, st in obs.fields.items():
            exp = w.expected(path)
            if exp is None:
                continue
            for side, limit, value in (("minimum", exp.minimum, st.minimum), ("maximum", exp.maximum, st.maximum)):
                if limit is None or isinstance(value, bool) or not isinstance(value, int | float):
                    continue
                if value < limit if side == "minimum" else value > limit:
                    hits.setdefault((path, side), []).append((value, obs.file))
            if exp.max_length is not None and st.max_length > exp.max_length and (st.types.get("string") or st.text):
                hits.setdefault((path, "maxLength"), []).append((st.max_length, obs.file))
    for (path, side), found in hits.items():
        exp = w.expected(path)
        assert exp is not None
        value, file = min(found) if side == "minimum" else max(found)
        if side == "maxLength":  # a string longer than the baseline's maxLength (JSON Schema §6.3.1)
            change = f"longer than the maxLength {exp.max_length}"
            message = f"{len(found)} batch(es) hold longer strings; the longest has {value:,} characters"
            ex = Example(file, -1, None, f"{value} characters")
        else:
            limit = exp.minimum if side == "minimum" else exp.maximum
            word = "below" if side == "minimum" else "above"
            change = f"{word} the {side} {limit:g}"
            message = f"{len(found)} batch(es) hold values {word} it; the most extreme is {value!r}"
            ex = Example(file, -1, None, repr(value))
        out.add("out_of_range", path, change, message, len(found), file, ex)
        out.tallies[("out_of_range", path, change)].files.update(f for _, f in found)


def check_null_share(w: _Walk, out: _Findings) -> None:
    """null_share_rise: null or absent values over the places the field could be, whole scan."""
    limit = w.policy.max_null_share_rise
    for path, s in w.profile.fields.items():
        exp = w.expected(path)
        if exp is None or exp.null_share is None or not s.container:
            continue
        share = (s.stats.nulls + s.absent) / s.container
        rise = 100 * (share - exp.null_share)
        if rise <= 0:
            continue
        ex = s.stats.first(NULL_SAMPLE)
        within = rise <= limit
        out.add(
            "null_share_rise",
            path,
            f"null share {100 * exp.null_share:.1f}% → {100 * share:.1f}%",
            f"rose {rise:.1f} points; the limit is {limit:g}",
            s.stats.nulls + s.absent,
            ex.file if ex else "",
            ex,
            within=within,
        )


def _all(n: int, noun: str) -> str:
    """'all 3 values', and 'the only value' for one."""
    return f"the only {noun}" if n == 1 else f"all {count(n, noun)}"


def check_file_errors(w: _Walk, out: _Findings) -> None:
    """file_errors: the share of files with at least one read error, against the limit."""
    files = w.profile.files
    bad = [f for f in files if f.errors]
    if not bad:
        return
    rate = 100 * len(bad) / len(files)
    limit = w.policy.max_file_error_rate
    for f in bad:
        issue = next(i for i in f.issues if i.severity == "error")
        out.add(
            "file_errors",
            None,
            f"file error: {issue.kind}",
            f"{len(bad):,} of {count(len(files), 'file')} ({rate:.1f}%) {plural(len(bad), 'has', 'have')} read errors; "
            f"the limit is {limit:g}%",
            f.errors,
            f.rel,
            Example(f.rel, issue.row if issue.row is not None else -1, issue.line, issue.message),
            within=rate <= limit,
        )


def check_unread_rows(w: _Walk, out: _Findings) -> None:
    """unread_rows: every file the scan could not read whole, whatever the error rate allows.

    A gate must not pass data it did not see: rows set aside (a malformed line, a ragged row,
    a line past --max-record-bytes), a read stopped early (truncated, changed, unreadable),
    or a file read as empty although it holds data (nothing-read).  Each file is listed with
    its first such problem; the count is the problems, as rows lost cannot always be told.
    """
    for f in w.profile.files:
        lost = [i for i in f.issues if i.severity == "error"]
        if not lost and f.complete:
            continue
        first = lost[0] if lost else None
        what = first.kind if first else "incomplete"
        where = Example(
            f.rel,
            first.row if first and first.row is not None else -1,
            first.line if first else None,
            first.message if first else "the read stopped early",
        )
        out.add(
            "unread_rows",
            None,
            f"rows not read: {what}",
            "{files} not read whole: rows set aside or never read; a gate passes only data it read",
            max(len(lost), 1),
            f.rel,
            where,
        )


RULE_CHECKS: tuple[Callable[[_Walk, _Findings], None], ...] = (
    check_types,
    check_narrowing,
    check_fields,
    check_gone,
    check_content,
    check_range,
    check_null_share,
    check_file_errors,
    check_unread_rows,
)


# -- judging -----------------------------------------------------------------------------


def _applies(rule: str, baseline: Baseline) -> str:
    """'' when the baseline can check the rule, else why not."""
    if rule == "cast_loss" and not baseline.has_rules:
        return "the baseline declares no cast rules"
    if rule == "null_share_rise" and not baseline.has_shares:
        return "the baseline records no null shares; a saved scan report does"
    if rule == "out_of_range" and not baseline.has_ranges:
        return "the baseline declares no minimum, maximum or maxLength"
    if rule == "content_class" and not any(e.classes is not None for e in baseline.fields.values()):
        return "the baseline declares no string formats or content classes"
    return ""


def _filled(template: str, n: int, files: int) -> str:
    """A tally's message with its counts: '{n}' the number alone, '{n noun}' the number and its
    noun agreeing, '{files}' the files counted.

    >>> _filled("{n null} in {files}", 1, 2)
    '1 null in 2 files'
    """
    text = _NOUN_SLOT.sub(lambda m: count(n, m.group(1)), template)
    return text.replace("{n}", f"{n:,}").replace("{files}", count(files, "file"))


_NOUN_SLOT = re.compile(r"\{n (\w+)\}")


def _violations(profile: Profile, tallies: Iterable[_Tally], policy: Policy) -> list[Violation]:
    parts = {f.rel: f.partitions for f in profile.files}
    out = []
    for t in tallies:
        within = t.within or t.rule == "cast_loss" and t.count <= policy.max_cast_loss
        severity = "allow" if within else policy.action(t.rule)
        ex = t.first
        message = _filled(t.message, t.count, len(t.files))
        out.append(
            Violation(
                rule=t.rule,
                severity=severity,
                field=t.path,
                change=t.change,
                message=message,
                count=t.count,
                files=len(t.files),
                file=t.file or None,
                partitions=parts.get(t.file or "", ()),
                row=t.row if t.row is not None and t.row >= 0 else None,
                line=ex.line if ex else None,
                example=ex.value if ex and ex.value else None,
            )
        )
    order = {r: i for i, r in enumerate(RULES)}
    out.sort(key=lambda v: (order[v.rule], v.field or "", v.file or "", v.row if v.row is not None else -1, v.change))
    return out


def compare(
    profile: Profile, baseline: Baseline, policy: Policy | None = None, *, counts: dict[str, int] | None = None
) -> Verdict:
    """Judge a profile against a baseline. counts adds to the verdict's counts (files read ...)."""
    policy = policy or Policy()
    walk = _Walk(profile, baseline, policy)
    found = _Findings()
    for check in RULE_CHECKS:
        check(walk, found)
    judged = _violations(profile, found.tallies.values(), policy)
    rules = []
    for rule in RULES:
        action = policy.action(rule)
        hits = [v for v in judged if v.rule == rule]
        why_not = _applies(rule, baseline)
        if action == "allow":
            status, reason = "skipped", f"allowed by the policy ({count(len(hits), 'change')} seen)"
        elif why_not:
            status, reason = "skipped", why_not
        elif any(v.severity == "fail" for v in hits):
            status, reason = "failed", ""
        elif any(v.severity == "warn" for v in hits):
            status, reason = "warned", ""
        else:
            status, reason = "passed", ""
        rules.append(RuleResult(rule, action, status, reason))
    fails = tuple(v for v in judged if v.severity == "fail")
    all_counts = {
        "files": len(profile.files),
        "rows": profile.rows,
        "fields": len(profile.fields),
        "files_read": len(profile.files),
        "files_reused": 0,
        "files_dropped": 0,
    }
    all_counts.update(counts or {})
    all_counts.update({"violations": len(fails), "warnings": sum(1 for v in judged if v.severity == "warn")})
    return Verdict(
        passed=not fails,
        violations=fails,
        warnings=tuple(v for v in judged if v.severity == "warn"),
        allowed=tuple(v for v in judged if v.severity == "allow"),
        rules=tuple(rules),
        counts=MappingProxyType(all_counts),
        baseline=baseline.source,
        root=profile.root,
    )
