"""The small HTML view a notebook shows for a Profile (`Profile._repr_html_`).

Everything that comes from the data (paths, field names, type keys, event kinds) is
passed through html.escape: field names and file names are untrusted text.
"""

from __future__ import annotations

from collections import Counter
from html import escape
from typing import TYPE_CHECKING

from driftline.core.words import count

if TYPE_CHECKING:
    from driftline.results.profile import Profile

MAX_FIELDS = 40  # a notebook cell stays readable; the full list is in profile.to_arrow()


def _types(types: dict[str, int]) -> str:
    total = sum(types.values())
    if not total:
        return "null"
    return ", ".join(f"{k} {v / total:.0%}" for k, v in sorted(types.items(), key=lambda kv: (-kv[1], kv[0])))


def profile_html(profile: Profile) -> str:
    """An HTML summary: totals, the first MAX_FIELDS fields, drift events per kind.

    >>> import driftline
    >>> "<b>Profile</b> &lt;r&gt;: 0 files, 0 rows" in profile_html(driftline.Profile("<r>", ()))
    True
    """
    e = escape
    out = [
        '<div class="driftline-profile">',
        f"<p><b>Profile</b> {e(profile.root)}: {count(len(profile.files), 'file')}, {count(profile.rows, 'row')}, "
        f"{count(len(profile.fields), 'field')}, {count(len(profile.events), 'drift event')}, "
        f"{count(profile.error_count, 'error')}</p>",
    ]
    if profile.fields:
        out.append("<table><thead><tr><th>field</th><th>types</th><th>null</th><th>absent</th></tr></thead><tbody>")
        for path, s in list(profile.fields.items())[:MAX_FIELDS]:
            out.append(
                f"<tr><td><code>{e(path)}</code></td><td>{e(_types(s.stats.types))}</td>"
                f"<td>{s.share(s.stats.nulls):.1%}</td><td>{s.share(s.absent):.1%}</td></tr>"
            )
        out.append("</tbody></table>")
        if len(profile.fields) > MAX_FIELDS:
            out.append(f"<p>… {len(profile.fields) - MAX_FIELDS:,} more fields: see profile.to_arrow().fields</p>")
    if profile.events:
        kinds = Counter(ev.kind for ev in profile.events)
        out.append("<p>Drift: " + ", ".join(f"{e(k)} ×{n}" for k, n in kinds.items()) + "</p>")
    out.append("</div>")
    return "".join(out)
