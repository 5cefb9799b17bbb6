"""Example values kept home: shown, hidden, or replaced by a keyed hash, in every output.

A report, an HTML page, a verdict or a schema annotation quotes the data it saw: the
first values of each type, content class and drift event, and the cell text of a CSV
parser's message.  Landing folders often hold personal data, so a report that is mailed
or attached can be made to carry none of it:

    show  the values as they are (the default)
    hide  every example value is dropped (written as an empty value); counts, types,
          places (file, row, line) and statistics stay
    hash  every example value becomes "hmac:" and the first 16 hex digits of its
          HMAC-SHA256 under a key the user gives (RFC 2104 with SHA-256, FIPS 180-4):
          the same value always gives the same text under one key, so two reports can
          still be compared, and without the key the value cannot be looked up by
          hashing guesses

The concealing happens once, on the Profile (conceal), before any output is made, so
every output format derives from values already concealed.  Minimum and maximum are
statistics, not examples, and stay (a baseline needs them for out_of_range).

>>> vp = ValuePolicy("hash", b"k")
>>> vp.text('"alice@example.com"') == vp.text('"alice@example.com"'), vp.text('"x"')[:5]
(True, 'hmac:')
>>> ValuePolicy("hide").text('"x"')
''
"""

from __future__ import annotations

from dataclasses import replace

import orjson

from driftline.core.files import FileIssue, FileResult
from driftline.core.observation import Observation
from driftline.core.stats import Example, FieldStats
from driftline.core.valuepolicy import ValuePolicy
from driftline.results.profile import Profile
from driftline.results.shapes import Discriminator


def conceal(profile: Profile, policy: ValuePolicy) -> Profile:
    """The profile with every example value (and every data quoted in a file problem) concealed."""
    if policy.mode == "show":
        return profile
    files = tuple(_file(f, policy) for f in profile.files)
    options = {**profile.options, "example_values": policy.mode}
    return Profile(profile.root, files, profile.skipped, options, profile.duration_s, _shapes(profile.shapes, policy))


def _shapes(found: Discriminator | None, policy: ValuePolicy) -> Discriminator | None:
    """A record field's values are data (a partition's are folder names, in every file path):
    concealed as examples are. Found before, so concealed values cannot merge."""
    if found is None or found.source != "field":
        return found
    shapes = tuple(replace(s, value=policy.text(orjson.dumps(s.value).decode())) for s in found.shapes)
    return replace(found, shapes=shapes)


def _file(f: FileResult, policy: ValuePolicy) -> FileResult:
    return replace(
        f,
        observations=tuple(_observation(o, policy) for o in f.observations),
        issues=tuple(_issue(i, policy) for i in f.issues),
    )


def _observation(o: Observation, policy: ValuePolicy) -> Observation:
    return replace(o, fields={p: _stats(st, policy) for p, st in o.fields.items()})


def _stats(st: FieldStats, policy: ValuePolicy) -> FieldStats:
    return replace(st, samples={k: tuple(_example(e, policy) for e in exs) for k, exs in st.samples.items()})


def _example(e: Example, policy: ValuePolicy) -> Example:
    return Example(e.file, e.row, e.line, policy.text(e.value))


def _issue(i: FileIssue, policy: ValuePolicy) -> FileIssue:
    message = policy.message(i.message)
    return i if message == i.message else replace(i, message=message)
