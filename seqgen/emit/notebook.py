"""How a preflight result and a scan summary show themselves in a notebook (`_repr_html_`).

Jupyter calls `_repr_html_` on the last value of a cell; `pipeline.Result` and
`scan.summary.ScanSummary` delegate here. The HTML is a fragment: a summary
line, the findings table (severity, where, code, message, fix), the safety
caution and, for a result that resolved, the timeline as inline SVG. Nothing is
loaded from the network and nothing runs as script, so a notebook saved with
it stays trusted and readable offline.
"""

from __future__ import annotations

import html

from ..caution import CAUTION
from ..findings import SEVERITIES, summary
from ..textfmt import fmt_when

_STYLE = ("<style>.seqgen-nb table{border-collapse:collapse;font-size:12px}"
          ".seqgen-nb td,.seqgen-nb th{border:1px solid #ccc;padding:2px 6px;text-align:left;vertical-align:top}"
          ".seqgen-nb .error{color:#a40000}.seqgen-nb .warning{color:#8a5a00}.seqgen-nb .note{color:#555}"
          ".seqgen-nb .caution{font-size:11px;color:#444;max-width:60em}"
          ".seqgen-nb code{font-size:11px}.seqgen-nb svg{max-width:100%;height:auto}</style>")


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _counts(findings) -> str:
    return _counts_from(summary(findings))


def findings_table(findings) -> str:
    """The findings as an HTML table (empty text when there are none)."""
    if not findings:
        return "<p>No findings.</p>"
    rows = ["<table><thead><tr><th>severity</th><th>where</th><th>code</th><th>block</th><th>time</th>"
            "<th>message and fix</th></tr></thead><tbody>"]
    for f in findings:
        sev = _e(f.severity) + (" (accepted)" if f.accepted else "")
        time = _e(fmt_when(f.time_s)) if f.time_s is not None else ""
        fix = f"<br><i>fix:</i> {_e(f.hint)}" if f.hint else ""
        acc = f"<br><i>accepted:</i> {_e(f.accept_reason)}" if f.accepted else ""
        rows.append(f'<tr class="{_e(f.severity)}"><td>{sev}</td><td><code>{_e(f.where)}</code></td>'
                    f"<td><code>{_e(f.code)}</code></td><td>{_e(f.block or '')}</td><td>{time}</td>"
                    f"<td>{_e(f.message)}{fix}{acc}</td></tr>")
    rows.append("</tbody></table>")
    return "".join(rows)


def _caution() -> str:
    return f'<p class="caution"><b>Safety caution.</b> {_e(CAUTION)}</p>'


def result_html(res, *, timeline: bool = True) -> str:
    """HTML fragment of a `pipeline.Result`: summary, findings, caution and the timeline (inline SVG)."""
    shot = res.shot
    if shot is None:
        head = "the sequence could not be resolved: fix the findings below first"
    else:
        head = (f"rig <code>{_e(shot.rig.name)}</code>, {_e(fmt_when(shot.duration_s))}, {len(shot.blocks)} blocks, "
                f"{len(shot.segments)} writes; " + ("may be built" if res.ok else "error findings block a build"))
    parts = ['<div class="seqgen-nb">', _STYLE, f"<p><b>seqgen preflight</b>: {_counts(res.findings)}. {head}.</p>",
             _base_shot_line(res),
             findings_table(res.findings), _caution()]
    if timeline and shot is not None:
        parts.append(_timeline(res))
    parts.append("</div>")
    return "".join(parts)


def _base_shot_line(res) -> str:
    """For a scanned file: that this is its base shot (each scanned param at its written value)."""
    from ..scan.plan import has_scans

    if res.sources is None or not has_scans(res.sources):
        return ""
    return ("<p>This file scans params: this is its <b>base shot</b> (each scanned param at its written "
            "<code>value:</code>). <code>seqgen.scan_summary(seqgen.run_scan(seqgen.plan_scan(file)))</code> "
            "shows every shot.</p>")


def _timeline(res) -> str:
    from .plot import svg_text, timeline_figure

    try:
        return f"<div>{svg_text(timeline_figure(res.shot, res.compiled, res.findings), 'nb-')}</div>"
    except Exception as exc:  # a picture problem must not cost the user the findings above
        return f"<p>No timeline: it could not be drawn ({_e(type(exc).__name__)}: {_e(exc)}).</p>"


def scan_html(file: str, description: str, totals: dict, shots: int, passing: int, codes, shot_rows) -> str:
    """HTML fragment of a scan summary: per finding code where it fires, then one row per shot.

    `codes`: (code, severity, count text, where) tuples; `shot_rows`: (index, values text, ok, counts dict)."""
    parts = ['<div class="seqgen-nb">', _STYLE,
             f"<p><b>seqgen scan</b> of <code>{_e(file)}</code>: {_e(description)}; {passing} of {shots} shots pass; "
             f"over all shots {_counts_from(totals)}.</p>"]
    if codes:
        parts.append("<table><thead><tr><th>code</th><th>severity</th><th>shots</th><th>where it fires</th></tr>"
                     "</thead><tbody>")
        parts += [f'<tr class="{_e(sev)}"><td><code>{_e(code)}</code></td><td>{_e(sev)}</td><td>{_e(count)}</td>'
                  f"<td>{_e(where)}</td></tr>" for code, sev, count, where in codes]
        parts.append("</tbody></table>")
    else:
        parts.append("<p>No findings in any shot.</p>")
    parts.append("<table><thead><tr><th>shot</th><th>params</th><th>verdict</th><th>findings</th></tr></thead><tbody>")
    for index, values, ok, counts in shot_rows:
        verdict = "pass" if ok else '<span class="error">fail</span>'
        parts.append(f"<tr><td>{index}</td><td>{_e(values)}</td><td>{verdict}</td><td>{_counts_from(counts)}</td></tr>")
    parts += ["</tbody></table>", _caution(), "</div>"]
    return "".join(parts)


def _counts_from(counts: dict) -> str:
    parts = [f'<span class="{sev}">{counts.get(sev, 0)} {sev}{"s" if counts.get(sev, 0) != 1 else ""}</span>'
             for sev in SEVERITIES]
    if counts.get("accepted"):
        parts.append(f'{counts["accepted"]} accepted')
    return ", ".join(parts)
