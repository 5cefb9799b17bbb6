"""The verdict of a check, and its renderings: JSON, JUnit XML and the terminal.

A Verdict is a value: passed, the violations (severity fail), the warnings, the changes the
policy allows, one result per rule, and counts. Every piece of data shown on a terminal
goes through safe_text; the XML writer escapes what XML cannot hold.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET
from collections.abc import Mapping
from dataclasses import dataclass, field

from rich.console import Console
from rich.rule import Rule
from rich.text import Text

from driftline.core.jsontypes import JSONObject
from driftline.core.marker import remark
from driftline.core.stats import example_json
from driftline.core.version import __version__
from driftline.core.words import count
from driftline.emit.safe import safe_text
from driftline.gate.policy import RULES

VERDICT_FORMAT = "driftline-verdict"
VERDICT_VERSION = 2  # 2: the example as a JSON value ({"value": …} or {"text": …}, as in the report)
VERDICT_SET_FORMAT = "driftline-verdict-set"  # a root checked dataset by dataset
VERDICT_SET_VERSION = 2  # 2: its verdicts are version 2
MAX_SHOWN = 100  # violations and warnings listed on the terminal; --json has them all


@dataclass(frozen=True, slots=True)
class Violation:
    """One change the policy sees, with its provenance: the first place it shows.

    rule      the policy key that judged it (policy.RULES)
    severity  'allow' | 'warn' | 'fail', from the policy
    field     the field path, or None for a file-level rule (file_errors)
    change    what changed, e.g. 'int64 → string'
    count     values (or rows) that show it; files: how many files
    file, partitions, row, line, example   the first occurrence, when known
    """

    rule: str
    severity: str
    field: str | None
    change: str
    message: str
    count: int = 0
    files: int = 0
    file: str | None = None
    partitions: tuple[tuple[str, str], ...] = ()
    row: int | None = None
    line: int | None = None
    example: str | None = None

    def where(self) -> str:
        """'file, partition k=v, row n (line m)' as far as known."""
        parts = []
        if self.file is not None:
            parts.append(self.file)
        if self.partitions:
            parts.append("partition " + "/".join(f"{k}={v}" for k, v in self.partitions))
        if self.row is not None:
            parts.append(f"row {self.row}" + (f" (line {self.line})" if self.line is not None else ""))
        return ", ".join(parts)

    def to_json(self) -> JSONObject:
        """The violation as plain JSON data, with its provenance."""
        return {
            "rule": self.rule,
            "severity": self.severity,
            "field": self.field,
            "change": self.change,
            "message": self.message,
            "count": self.count,
            "files": self.files,
            "file": self.file,
            "partitions": dict(self.partitions),
            "row": self.row,
            "line": self.line,
            "example": None if self.example is None else example_json(self.example),
        }


@dataclass(frozen=True, slots=True)
class RuleResult:
    """How one policy rule came out: 'passed' | 'warned' | 'failed' | 'skipped' (with why)."""

    rule: str
    action: str
    status: str
    reason: str = ""


@dataclass(frozen=True)
class Verdict:
    """The outcome of a check. passed is True when no change has severity 'fail'.

    >>> v = Verdict(passed=False, violations=(Violation("type_change", "fail", "x", "int64 → string",
    ...             "1 value", 1, 1, "a.jsonl", (), 4, 5, '"n/a"'),), warnings=())
    >>> v.exit_code, v.violations[0].where()
    (1, 'a.jsonl, row 4 (line 5)')
    """

    passed: bool
    violations: tuple[Violation, ...]
    warnings: tuple[Violation, ...]
    allowed: tuple[Violation, ...] = ()
    rules: tuple[RuleResult, ...] = ()
    counts: Mapping[str, int] = field(default_factory=dict)
    baseline: str = ""
    root: str = ""
    # A root checked dataset by dataset (split): one Verdict per dataset, in name order; this
    # verdict is then the overall one (passed when every dataset passed), its own violations and
    # warnings those of the root (a baseline naming no dataset, a file gone to the loose files).
    datasets: Mapping[str, Verdict] = field(default_factory=dict)
    split: bool = False

    @property
    def exit_code(self) -> int:
        """0 passed (warnings allowed), 1 a policy violation (in any dataset)."""
        return 0 if self.passed else 1

    def to_json(self) -> JSONObject:
        """The verdict as plain JSON data: passed, exit code, violations, warnings and rules;
        for a root checked dataset by dataset, the verdict set (one verdict per dataset)."""
        if self.split:
            return self._set_json()
        return {
            "format": VERDICT_FORMAT,
            "version": VERDICT_VERSION,
            "passed": self.passed,
            "exit_code": self.exit_code,
            "root": self.root,
            "baseline": self.baseline,
            "counts": dict(self.counts),
            "rules": [{"rule": r.rule, "action": r.action, "status": r.status, "reason": r.reason} for r in self.rules],
            "violations": [v.to_json() for v in self.violations],
            "warnings": [v.to_json() for v in self.warnings],
            "allowed": [v.to_json() for v in self.allowed],
        }

    def _set_json(self) -> JSONObject:
        statuses = [dataset_status(v) for v in self.datasets.values()]
        return {
            "format": VERDICT_SET_FORMAT,
            "version": VERDICT_SET_VERSION,
            "passed": self.passed,
            "exit_code": self.exit_code,
            "root": self.root,
            "baselines": self.baseline,
            "counts": {
                "datasets": len(self.datasets),
                **{s: statuses.count(s) for s in ("passed", "warned", "failed")},
                **dict(self.counts),
            },
            "datasets": {name: {**v.to_json(), "status": dataset_status(v)} for name, v in self.datasets.items()},
            "violations": [v.to_json() for v in self.violations],
            "warnings": [v.to_json() for v in self.warnings],
            "allowed": [v.to_json() for v in self.allowed],
        }


def dataset_status(v: Verdict) -> str:
    """'failed' (a violation), 'warned' (passed with warnings) or 'passed'."""
    return "failed" if not v.passed else "warned" if v.warnings else "passed"


# -- JUnit XML ---------------------------------------------------------------------------

# XML 1.0 section 2.2 (Char): these code points cannot appear in a document at all.
_NOT_XML = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _xml_text(value: object) -> str:
    return _NOT_XML.sub(lambda m: f"\\x{ord(m.group(0)):02x}", str(value))


def _line(v: Violation) -> str:
    head = f"{v.field}: {v.change}" if v.field is not None else v.change
    where = v.where()
    example = f", e.g. {v.example}" if v.example else ""
    return f"{head} — {v.message}" + (f" at {where}" if where else "") + example


def junit_xml(verdict: Verdict, *, suite: str = "driftline check") -> bytes:
    """The verdict as JUnit XML: one <testcase> per policy rule, a <failure> per failing rule.

    Warnings go to the test case's <system-out>; rules the policy allows, or that the
    baseline cannot check, are <skipped> with the reason. A root checked dataset by dataset
    gives one <testsuite> per dataset (named after it), and one more, "(root)", when the root
    itself has findings (a baseline naming no dataset, a file gone to the loose files).
    """
    suites = [(name, v) for name, v in verdict.datasets.items()] if verdict.split else [(suite, verdict)]
    if verdict.split and (verdict.violations or verdict.warnings or verdict.allowed):
        suites.append((ROOT_SUITE, verdict))
    tally = [_tally(v) for _, v in suites]
    root = ET.Element(
        "testsuites",
        name=suite,
        tests=str(sum(t[0] for t in tally)),
        failures=str(sum(t[1] for t in tally)),
        errors="0",
        skipped=str(sum(t[2] for t in tally)),
    )
    for (name, v), (tests, failures, skipped) in zip(suites, tally, strict=True):
        ts = ET.SubElement(
            root,
            "testsuite",
            name=_xml_text(name),
            tests=str(tests),
            failures=str(failures),
            errors="0",
            skipped=str(skipped),
        )
        props = ET.SubElement(ts, "properties")
        ET.SubElement(props, "property", name="root", value=_xml_text(v.root))
        ET.SubElement(props, "property", name="baseline", value=_xml_text(v.baseline))
        for key, n in v.counts.items():
            ET.SubElement(props, "property", name=key, value=str(n))
        _cases(ts, v, _root_rules(v) if v is verdict and verdict.split else v.rules)
    ET.indent(root)
    body = ET.tostring(root, encoding="utf-8", xml_declaration=False)
    # The declaration must come first (XML 1.0 section 2.8); the marker comment follows it.
    mark = remark(f"a check verdict written by driftline {__version__}; driftline never reads it as data")
    return b"<?xml version='1.0' encoding='utf-8'?>\n<!-- " + mark.encode() + b" -->\n" + body + b"\n"


ROOT_SUITE = "(root)"  # the JUnit suite of what a root checked dataset by dataset shows outside its datasets


def _root_rules(v: Verdict) -> tuple[RuleResult, ...]:
    """The root's findings as rules: one per rule name, failed, warned or allowed (skipped)."""
    out = []
    for rule in dict.fromkeys(x.rule for x in (*v.violations, *v.warnings, *v.allowed)):
        sev = {x.severity for x in (*v.violations, *v.warnings, *v.allowed) if x.rule == rule}
        status = "failed" if "fail" in sev else "warned" if "warn" in sev else "skipped"
        out.append(RuleResult(rule, "fail" if "fail" in sev else "warn", status, "allowed by the policy"))
    return tuple(out)


def _tally(v: Verdict) -> tuple[int, int, int]:
    rules = _root_rules(v) if v.split else v.rules
    return (
        len(rules),
        sum(1 for r in rules if r.status == "failed"),
        sum(1 for r in rules if r.status == "skipped"),
    )


def _cases(ts: ET.Element, verdict: Verdict, rules: tuple[RuleResult, ...]) -> None:
    by_rule: dict[str, list[Violation]] = {}
    for v in (*verdict.violations, *verdict.warnings, *verdict.allowed):
        by_rule.setdefault(v.rule, []).append(v)
    for r in rules:
        case = ET.SubElement(ts, "testcase", name=r.rule, classname="driftline.check")
        found = by_rule.get(r.rule, [])
        if r.status == "failed":
            fails = [v for v in found if v.severity == "fail"]
            first = fails[0]
            message = _xml_text(f"{count(len(fails), 'violation')}; first: {_line(first)}")
            failure = ET.SubElement(case, "failure", message=message, type=r.rule)
            failure.text = _xml_text("\n".join(_line(v) for v in fails))
        elif r.status == "skipped":
            ET.SubElement(case, "skipped", message=_xml_text(r.reason))
        warns = [v for v in found if v.severity == "warn"]
        if warns:
            out = ET.SubElement(case, "system-out")
            out.text = _xml_text("\n".join("warning: " + _line(v) for v in warns))


# -- terminal ----------------------------------------------------------------------------


def _block(text: Text, v: Violation, style: str) -> None:
    text.append(f"  {v.severity.upper():<5} ", style=style)
    text.append(f"{v.rule:<17} ", style="bold")
    if v.field is not None:
        text.append(safe_text(v.field))
        text.append(": ")
    text.append(safe_text(v.change, 200))
    text.append("\n        " + safe_text(v.message, 300))
    where = v.where()
    if where:
        text.append("\n        at " + safe_text(where, 300))
    if v.example:
        text.append("\n        value " + safe_text(v.example, 80))
    text.append("\n")


def render(verdict: Verdict, console: Console) -> None:
    """Verdict first, then each violation and warning with field, change, where and value."""
    c = verdict.counts
    head = Text()
    # Both verdict lines count violations first, then warnings: the order of the sections below.
    if verdict.passed:
        head.append("PASS", style="bold green")
    else:
        head.append("FAIL", style="bold red")
    head.append(f"  {count(len(verdict.violations), 'violation')}, {count(len(verdict.warnings), 'warning')}")
    head.append(
        f"\nchecked {safe_text(verdict.root, None)} against {safe_text(verdict.baseline or 'no baseline', None)}: "
        f"{count(c.get('files', 0), 'file')} ({c.get('files_read', 0):,} read, {c.get('files_reused', 0):,} "
        f"from state), {count(c.get('rows', 0), 'row')}, {count(c.get('fields', 0), 'field')}"
    )
    console.print(head, soft_wrap=True)
    for title, items, style in (("Violations", verdict.violations, "red"), ("Warnings", verdict.warnings, "yellow")):
        if not items:
            continue
        body = Text()
        body.append(f"\n{title} ({len(items)})\n", style="bold")
        for v in items[:MAX_SHOWN]:
            _block(body, v, style)
        if len(items) > MAX_SHOWN:
            body.append(f"  … {len(items) - MAX_SHOWN} more in --json\n")
        console.print(body, end="", soft_wrap=True)
    if verdict.allowed:
        console.print(f"\n{count(len(verdict.allowed), 'change')} allowed by the policy (listed in --json)")
    skipped = [r for r in verdict.rules if r.status == "skipped" and r.action != "allow"]
    if skipped:
        console.print(
            "not checked: " + "; ".join(f"{r.rule} ({r.reason})" for r in skipped), markup=False, soft_wrap=True
        )


def render_split(verdict: Verdict, console: Console) -> None:
    """A root checked dataset by dataset: each dataset's verdict under a heading 'dataset NAME',
    then the root's own findings, then the overall line (the worst of them)."""
    for name, v in verdict.datasets.items():
        console.print(Rule(Text(f"dataset {safe_text(name)}", style="bold"), align="left"))
        render(v, console)
        console.print()
    items = [("Violations", verdict.violations, "red"), ("Warnings", verdict.warnings, "yellow")]
    for title, found, style in items:
        if found:
            body = Text()
            body.append(f"{title} of the root ({len(found)})\n", style="bold")
            for x in found[:MAX_SHOWN]:
                _block(body, x, style)
            console.print(body, end="", soft_wrap=True)
            console.print()
    statuses = {name: dataset_status(v) for name, v in verdict.datasets.items()}
    failed = [n for n, st in statuses.items() if st == "failed"]
    warned = [n for n, st in statuses.items() if st == "warned"]
    line = Text()
    line.append("overall ")
    line.append("PASS" if verdict.passed else "FAIL", style="bold green" if verdict.passed else "bold red")
    line.append(
        f"  {count(len(statuses), 'dataset')}: {len(statuses) - len(failed) - len(warned)} passed, "
        f"{len(warned)} warned, {len(failed)} failed"
    )
    if failed:
        line.append(" (failed: " + ", ".join(safe_text(n) for n in failed) + ")")
    if verdict.violations:
        line.append(f"; {count(len(verdict.violations), 'violation')} of the root")
    console.print(line, soft_wrap=True)


def rule_names() -> tuple[str, ...]:
    return tuple(RULES)
