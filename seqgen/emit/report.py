"""The preflight report: one self-contained HTML file.

`render_report(result, file)` turns a `pipeline.Result` into HTML: the
summary, every finding with the offending source line and its fix, what each
finding code means, the physics notes, the safety caution and the timeline as
inline SVG. For a scanned sequence (`scan=`, a run `scan.plan.Scan`) a scan section
comes first: the plan (params, values, combination, order), the per-code
summary with the param ranges where each code fires (`scan.summary.summarize`) and a
table of every shot (values, pass or fail, finding counts); the details that
follow are those of the base shot (each scanned param at its `value:`). Everything is inline (CSS, SVG); the page loads nothing from the
network and needs no JavaScript. The text depends only on the inputs (no time
stamps, no absolute paths beyond those given), so the same input gives the same
bytes. `write_report` writes it atomically and refuses to replace an existing
file without force.
"""

from __future__ import annotations

import html
from pathlib import Path

from ..version import __version__
from ..findings import SEVERITIES, summary
from ..textfmt import fmt_when
from .plot import OutputExists, write_atomic  # noqa: F401  (OutputExists re-exported for the CLI)

CONTEXT_LINES = 1  # source lines shown above and below the offending one

_CSS = """
:root { --ink: #1f2933; --muted: #5f6b7a; --line: #d5dbe3; --error: #b3202c; --warning: #a86200;
        --note: #46596d; --accept: #5a5a5a; --paper: #ffffff; --tint: #f4f6f9; }
* { box-sizing: border-box; }
body { margin: 0; padding: 1.5rem 2rem 3rem; font: 14px/1.45 system-ui, -apple-system, "Segoe UI", sans-serif;
       color: var(--ink); background: var(--paper); max-width: 1280px; }
h1 { font-size: 1.35rem; margin: 0 0 .25rem; }
h2 { font-size: 1.1rem; margin: 2rem 0 .6rem; border-bottom: 1px solid var(--line); padding-bottom: .2rem; }
.meta { color: var(--muted); margin: 0 0 1rem; }
.meta code { color: var(--ink); }
.chips { display: flex; gap: .5rem; flex-wrap: wrap; margin: .5rem 0 1rem; }
.chip { border-radius: 1rem; padding: .15rem .75rem; border: 1px solid var(--line); background: var(--tint); }
.chip b { font-size: 1.05rem; }
.chip.error { border-color: var(--error); color: var(--error); }
.chip.warning { border-color: var(--warning); color: var(--warning); }
.chip.note { border-color: var(--note); color: var(--note); }
.verdict { font-weight: 600; }
.verdict.bad { color: var(--error); }
.verdict.good { color: #1d6b3a; }
.caution { border-left: 4px solid var(--warning); background: #fff7e8; padding: .6rem .9rem; margin: 1rem 0; }
table { border-collapse: collapse; width: 100%; }
th, td { text-align: left; vertical-align: top; padding: .45rem .55rem; border-bottom: 1px solid var(--line); }
th { background: var(--tint); font-weight: 600; white-space: nowrap; }
td.sev { white-space: nowrap; font-weight: 600; }
tr.sev-error td.sev { color: var(--error); }
tr.sev-warning td.sev { color: var(--warning); }
tr.sev-note td.sev { color: var(--note); }
tr.accepted td { color: var(--accept); }
td.where, td.time { white-space: nowrap; font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: .85rem; }
.code { font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-weight: 600; }
.msg { margin: 0 0 .3rem; }
.fix { margin: .3rem 0 0; }
.fix::before { content: "fix: "; font-weight: 600; }
.accept-reason { margin: .3rem 0 0; font-style: italic; }
pre.src { margin: .35rem 0; padding: .3rem .5rem; background: var(--tint); border: 1px solid var(--line);
          overflow-x: auto; font-size: .82rem; line-height: 1.35; }
pre.src .ln { color: var(--muted); user-select: none; display: inline-block; min-width: 3.2em; }
pre.src .hit { background: #ffe9a8; display: block; }
details { margin-top: .3rem; color: var(--muted); }
details pre { white-space: pre-wrap; font-size: .82rem; margin: .3rem 0; color: var(--ink); }
figure { margin: 0; overflow-x: auto; border: 1px solid var(--line); padding: .5rem; }
figure svg { max-width: 100%; height: auto; display: block; }
figcaption { color: var(--muted); font-size: .85rem; margin-top: .4rem; }
ul.notes { margin: 0; padding-left: 1.1rem; }
ul.notes li { margin: .1rem 0; }
figure + figure { margin-top: 1rem; }
footer { margin-top: 2.5rem; color: var(--muted); font-size: .8rem; }
h3 { font-size: 1rem; margin: 1.3rem 0 .4rem; }
table.shots { width: auto; min-width: 50%; }
table.shots td, table.shots th { padding: .2rem .8rem; }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.val { font-family: ui-monospace, "DejaVu Sans Mono", monospace; font-size: .85rem; white-space: nowrap; }
td.pass { color: #1d6b3a; font-weight: 600; }
td.fail { color: var(--error); font-weight: 600; }
tr.base-shot td { background: #fff7e8; }
.tag { font-size: .75rem; border: 1px solid var(--line); border-radius: .6rem; padding: 0 .4rem; color: var(--muted); }
p.shot-choice { border-left: 4px solid var(--note); background: var(--tint); padding: .45rem .8rem; }
@media print { body { padding: 0; } figure { border: none; } }
"""


def _e(text) -> str:
    return html.escape(str(text), quote=True)


class _Sources:
    """Lines of source files, read once each (missing or unreadable files give no lines)."""

    def __init__(self):
        self._cache: dict[str, list[str] | None] = {}

    def lines(self, file: str):
        if file not in self._cache:
            try:
                text = Path(file).read_text(encoding="utf-8", errors="replace")
                self._cache[file] = text.splitlines()
            except (OSError, ValueError):
                self._cache[file] = None
        return self._cache[file]

    def snippet(self, file: str, line: int) -> str:
        lines = self.lines(file) if file and line else None
        if not lines or line > len(lines):
            return ""
        lo, hi = max(1, line - CONTEXT_LINES), min(len(lines), line + CONTEXT_LINES)
        parts = []
        for n in range(lo, hi + 1):
            body = f'<span class="ln">{n}</span>{_e(lines[n - 1]) or " "}'
            parts.append(f'<span class="hit">{body}</span>' if n == line else body + "\n")
        return f'<pre class="src" data-line="{line}">' + "".join(parts).rstrip("\n") + "</pre>"


def _code_doc(code: str) -> str:
    from ..codes import lookup

    info = lookup(code)
    if info is None:
        return ""
    return (f'<details><summary>what <span class="code">{_e(code)}</span> means</summary>'
            f"<pre>{_e(info.doc)}\n\nSource: {_e(info.source)}</pre></details>")


def _finding_row(k: int, f, sources: _Sources, prefix: str = "finding") -> str:
    classes = f"finding sev-{_e(f.severity)}" + (" accepted" if f.accepted else "")
    where = _e(f.where)
    time = _e(fmt_when(f.time_s)) if f.time_s is not None else "&ndash;"
    block = _e(f.block) if f.block else "&ndash;"
    parts = [f'<p class="msg"><span class="code">{_e(f.code)}</span>: {_e(f.message)}</p>',
             sources.snippet(f.file, f.line)]
    if f.hint:
        parts.append(f'<p class="fix">{_e(f.hint)}</p>')
    if f.accepted:
        parts.append(f'<p class="accept-reason">accepted in the sequence file: {_e(f.accept_reason)}</p>')
    parts.append(_code_doc(f.code))
    sev = _e(f.severity) + (" (accepted)" if f.accepted else "")
    return (f'<tr class="{classes}" id="{prefix}-{k}" data-code="{_e(f.code)}" data-line="{f.line}">'
            f'<td class="sev">{sev}</td><td class="where">{where}</td><td>{block}</td><td class="time">{time}</td>'
            f'<td>{"".join(p for p in parts if p)}</td></tr>')


def _physics_rows(shot) -> list[dict]:
    if shot is None:
        return []
    try:
        from ..predict import report_rows

        rows = [r.as_dict() for r in report_rows(shot)]
    except Exception:  # physics trouble is reported as findings; the report just lists what it can
        return []
    out, seen = [], set()
    for r in rows:
        key = (r.get("block"), r.get("kind"), r.get("time_s"), tuple(r.get("items", ())))
        if key not in seen:
            seen.add(key)
            out.append(r)
    return out


MAX_SHOT_ROWS = 1000  # a larger scan lists its shots with error findings first, then those with warnings
MAX_PLAN_VALUES = 24  # a longer list of scan values shows its first and last ones


def _qty(q) -> str:
    from ..resolve.units import format_qty

    return format_qty(q)


def _plan_values(axis) -> str:
    vals = [_e(_qty(q)) for q in axis.values]
    if len(vals) > MAX_PLAN_VALUES:
        vals = vals[:10] + [f"&hellip; {len(vals) - 13} more &hellip;"] + vals[-3:]
    return ", ".join(vals)


def _plan_html(plan) -> list[str]:
    kinds = {"list": "list", "linear": "linear range", "log": "log range", "random": "random set"}
    out = ['<h3>Plan</h3><table class="plan"><thead><tr><th>param</th><th class="num">values</th><th>kind</th>'
           "<th>group</th><th>scan values</th></tr></thead><tbody>"]
    for a in plan.axes:
        out.append(f'<tr class="scan-param" data-param="{_e(a.name)}"><td class="code">{_e(a.name)}</td>'
                   f'<td class="num">{len(a.values)}</td><td>{_e(kinds.get(a.kind, a.kind))}</td>'
                   f'<td>{_e(a.group) if a.group else "&ndash;"}</td><td class="val">{_plan_values(a)}</td></tr>')
    out.append("</tbody></table>")
    groups = {}
    for a in plan.axes:
        key = "*" if plan.combine == "lockstep" else (a.group or a.name)
        groups.setdefault(key, []).append(a.name)
    names = [" + ".join(groups[k]) for k in plan.nest]
    if len(plan.nest) == 1 and len(plan.axes) > 1:
        how = f"lockstep: {_e(names[0])} advance together, one shot per value"
    elif len(plan.nest) == 1:
        how = "one shot per value"
    else:
        sizes = " &times; ".join(str(len(plan.axis(groups[k][0]).values)) for k in plan.nest)
        how = (f"grid ({sizes}): nested loops, outermost (slowest) first: "
               + ", ".join(f"<code>{_e(n)}</code>" for n in names))
        if any(len(groups.get(k, ())) > 1 for k in plan.nest):
            how += "; params joined by + advance in lockstep"
    order = (f"shuffled, reproducibly (seed {plan.seed}): a shot's index is its place in run order; "
             "the written-order position is listed beside it" if plan.order == "shuffled" else
             "as written (shot index = position in written order)")
    out.append(f'<p class="meta" id="scan-combination">Combination: {how}. Order: {_e(order)}. '
               f"{len(plan)} shot{'s' if len(plan) != 1 else ''} in all.</p>")
    return out


def _codes_html(scan, sources: _Sources) -> list[str]:
    from ..scan.summary import summarize

    codes = summarize(scan)
    n = len(scan.shots)
    out = [f'<h3>Finding codes over the {n} shots</h3>']
    if not codes:
        return out + ["<p>No shot has any finding.</p>"]
    out.append('<table class="codes"><thead><tr><th>severity</th><th>code</th><th class="num">shots</th>'
               "<th>where it fires</th><th>first occurrence</th></tr></thead><tbody>")
    for c in codes:
        r = scan.shots[c.shots[0]]
        f = c.first
        count = f"all {n}" if len(c.shots) == n else f"{len(c.shots)} of {n}"
        acc = f" ({c.accepted} accepted)" if c.accepted else ""
        values = ", ".join(f"{name} = {_qty(q)}" for name, q in zip(scan.plan.names, r.values))
        first = [f'<p class="msg">shot {r.index} ({_e(values)}): <span class="where">{_e(f.where)}</span>'
                 + (f" [{_e(f.block)}]" if f.block else "")
                 + (f" t={_e(fmt_when(f.time_s))}" if f.time_s is not None else "") + f" {_e(f.message)}</p>",
                 sources.snippet(f.file, f.line)]
        if f.hint:
            first.append(f'<p class="fix">{_e(f.hint)}</p>')
        first.append(_code_doc(c.code))
        out.append(f'<tr class="scan-code sev-{_e(c.severity)}" data-code="{_e(c.code)}" '
                   f'data-shots="{" ".join(map(str, c.shots))}"><td class="sev">{_e(c.severity)}{_e(acc)}</td>'
                   f'<td class="code">{_e(c.code)}</td><td class="num">{count}</td><td>{_e(c.where)}</td>'
                   f'<td>{"".join(p for p in first if p)}</td></tr>')
    out.append("</tbody></table>")
    return out


def _shots_html(scan, choice) -> list[str]:
    plan, shots = scan.plan, scan.shots
    shown = shots
    note = ""
    if len(shots) > MAX_SHOT_ROWS:
        bad = [r for r in shots if not r.ok]
        warn = [r for r in shots if r.ok and any(f.severity == "warning" for f in r.findings)]
        keep = {r.index for r in (bad + warn)[:MAX_SHOT_ROWS]}
        shown = [r for r in shots if r.index in keep]
        note = (f'<p class="meta">{len(shown)} of {len(shots)} shots listed: those with error findings first, then '
                "those with warnings; <code>seqgen check --json</code> lists every shot.</p>")
    shuffled = plan.order == "shuffled"
    base = choice.same_as if choice is not None else None
    head = ['<th class="num">shot</th>'] + (['<th class="num">written order</th>'] if shuffled else [])
    head += [f'<th class="num">{_e(n)}</th>' for n in plan.names]
    head += ['<th>result</th>', '<th class="num">errors</th>', '<th class="num">warnings</th>',
             '<th class="num">notes</th>', '<th class="num">accepted</th>']
    out = [f"<h3>Shots ({len(shots)})</h3>", note,
           f'<table class="shots"><thead><tr>{"".join(head)}</tr></thead><tbody>']
    for r in shown:
        s = summary(r.findings)
        if r.ok:
            result = '<td class="pass">pass</td>'
        else:
            result = f'<td class="fail">{"fail" if r.input_sha256 is not None else "fail (not resolved)"}</td>'
        cells = [f'<td class="num">{r.index}</td>'] + ([f'<td class="num">{r.written_index}</td>'] if shuffled else [])
        cells += [f'<td class="num val">{_e(_qty(q))}</td>' for q in r.values]
        cells.append(result)
        cells += [f'<td class="num">{s[k]}</td>' for k in ("error", "warning", "note", "accepted")]
        if r.index == base:
            cells[0] = f'<td class="num">{r.index} <span class="tag">base</span></td>'
        cls = "shot" + (" base-shot" if r.index == base else "") + (" ok" if r.ok else " failed")
        out.append(f'<tr class="{cls}" data-index="{r.index}">{"".join(cells)}</tr>')
    out.append("</tbody></table>")
    return [x for x in out if x]


def _scan_section(scan, choice, sources: _Sources) -> list[str]:
    """The scan's plan, its scan-level findings, the per-code summary and the per-shot table."""
    n = len(scan.plan) if scan.plan is not None else 0
    out = [f'<section id="scan"><h2>Scan{f" ({n} shots)" if n else ""}</h2>']
    if scan.findings:
        out.append("<p>Findings of the scan itself (its expansion into shots):</p>")
        out.append("<table><thead><tr><th>severity</th><th>where</th><th>block</th><th>time</th>"
                   "<th>finding, source line and fix</th></tr></thead><tbody>")
        out += [_finding_row(k, f, sources, "scan-finding") for k, f in enumerate(scan.findings, 1)]
        out.append("</tbody></table>")
    if scan.plan is None:
        out.append("<p>The scan cannot be expanded into shots, so no shot was preflighted; the details below are "
                   "those of the base shot (each scanned param at its <code>value:</code>).</p></section>")
        return out
    out += _plan_html(scan.plan)
    if len(scan.shots) == n:
        out += _codes_html(scan, sources)
        out += _shots_html(scan, choice)
    else:
        out.append("<p>The shots were not preflighted (the scan did not run).</p>")
    out.append("</section>")
    return out


def _scan_summary(scan) -> tuple[dict, str, bool]:
    """(counts over every shot, verdict, blocking) of a scan."""
    from ..scan.summary import totals

    if scan.plan is None:
        return summary(scan.findings), "the scan cannot be expanded into shots: fix the scan findings below", True
    t = totals(scan)
    n, good = len(scan.shots), sum(r.ok for r in scan.shots)
    if n < len(scan.plan):
        return t, "the shots of the scan were not preflighted", True
    if good == n:
        return t, f"every one of the {n} shots passes: the scan may be built", False
    bad = n - good
    return t, (f"{good} of {n} shots pass; {bad} {'has' if bad == 1 else 'have'} error findings: a build of the "
               f"scan leaves {'it' if bad == 1 else 'them'} out until the errors are fixed or accepted"), True


_CAPTION = ("One lane per output, grouped by device: the solid curve is what the channel table makes the hardware "
            "output (after latency compensation and quantization), the dashed curve the value the sequence asks "
            "for. Shaded spans are blocks; dashed vertical lines mark findings (error &#x2716;, warning &#x25B2;, "
            "note &#x25CF;).")


def render_report(res, file: str, *, svg: str | None = None, svg_note: str = "", scanned: bool = False,
                  detail: tuple | None = None, scan=None, choice=None, images: tuple | None = None) -> str:
    """HTML text of the preflight report of `res` (a `pipeline.Result`) for sequence `file`.

    `svg` is the inline SVG of the whole timeline; `detail` an optional (caption, svg) of a zoomed one.
    `scan`: the run scan (`scan.plan.Scan`) of a scanned sequence, whose section heads the report; `res` is then
    its base shot. `choice` (`seqgen.show.ShotChoice`): which shot of a scan `res` is, said above its details.
    `images`: (PNG data URI or None, notes) of the predicted absorption images (`report_images`)."""
    from ..caution import CAUTION

    findings = list(res.findings)
    s = summary(findings)
    shot = res.shot
    sources = _Sources()
    title = f"Preflight report: {file}"
    meta = [f"sequence <code>{_e(file)}</code>"]
    if shot is not None:
        meta.append(f"rig <code>{_e(shot.rig.name)}</code> (<code>{_e(shot.rig.file)}</code>)")
        meta.append(f"duration {_e(fmt_when(shot.duration_s))}")
        meta.append(f"{len(shot.blocks)} blocks, {len(shot.segments)} writes")
    blocking = s["error"] > 0
    verdict = ("error findings remain: a build is refused until they are fixed or accepted" if blocking
               else "no error findings: the sequence may be built")
    if shot is None:
        verdict = "the sequence could not be resolved: fix the findings below first"
    if scan is None and choice is not None and shot is not None:  # one shot of a scan
        verdict = ("error findings remain in this shot: a build of the scan leaves it out until they are fixed or "
                   "accepted" if blocking else "no error findings in this shot (a build of the scan preflights "
                   "every shot)")
    counts = s
    if scan is not None:  # the summary speaks for every shot; the details below are the base shot's
        counts, verdict, blocking = _scan_summary(scan)
        n = len(scan.plan) if scan.plan is not None else 0
        meta.append(f"scan of {n} shot{'s' if n != 1 else ''}" if scan.plan is not None else "scan (not expanded)")
    chips = "".join(f'<span class="chip {sev}"><b>{counts[sev]}</b> {sev}{"s" if counts[sev] != 1 else ""}</span>'
                    for sev in SEVERITIES)
    if counts["accepted"]:
        chips += f'<span class="chip"><b>{counts["accepted"]}</b> accepted</span>'
    if scan is not None and scan.plan is not None:
        chips += '<span class="chip">over every shot</span>'
    out = ["<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>{_e(title)}</title>", f"<style>{_CSS}</style>", "</head>", "<body>",
           f"<h1>{_e(title)}</h1>", f'<p class="meta">{" · ".join(meta)}</p>',
           '<section id="summary"><h2>Summary</h2>', f'<div class="chips">{chips}</div>',
           f'<p class="verdict {"bad" if blocking or shot is None else "good"}">{_e(verdict)}</p>',
           f'<p class="caution" id="caution"><b>Safety caution.</b> {_e(CAUTION)}</p></section>']
    if scanned and scan is None and choice is None:
        out.insert(-1, '<p class="meta">This sequence scans params. The report shows the nominal shot (every param at '
                       "its written value); <code>seqgen check</code> lists the findings of every shot of the scan.</p>")
    of = ""
    if scan is not None:
        out += _scan_section(scan, choice, sources)
        of = " of the base shot"
        out.append('<h2 id="base-shot">The base shot in detail</h2>')
    elif choice is not None:
        of = f" of shot {choice.index}" if choice.index is not None else " of the base shot"
    if choice is not None:
        more = ("; <code>seqgen check</code> without <code>--shot</code> preflights every shot" if scan is None else
                "; the scan section above covers every shot")
        out.append(f'<p class="shot-choice" id="shot-choice">{_e(file)}: {_e(choice.caption())}{more}.</p>')

    out.append(f'<section id="findings"><h2>Findings{of} ({len(findings)})</h2>')
    if findings:
        out.append("<table><thead><tr><th>severity</th><th>where</th><th>block</th><th>time</th>"
                   "<th>finding, source line and fix</th></tr></thead><tbody>")
        out += [_finding_row(k, f, sources) for k, f in enumerate(findings, 1)]
        out.append("</tbody></table>")
    else:
        out.append("<p>No findings.</p>")
    out.append("</section>")

    prows = _physics_rows(shot)
    out.append(f'<section id="physics"><h2>Physics notes{of}</h2>')
    if prows:
        out.append('<table><thead><tr><th>time</th><th>block</th><th>action</th><th>predictions</th></tr></thead><tbody>')
        for r in prows:
            items = "".join(f"<li>{_e(i)}</li>" for i in r.get("items", ()))
            t = _e(fmt_when(r["time_s"])) if r.get("time_s") is not None else "&ndash;"
            out.append(f'<tr class="physics-note"><td class="time">{t}</td><td>{_e(r.get("block", ""))}</td>'
                       f'<td class="code">{_e(r.get("kind", ""))}</td><td><ul class="notes">{items}</ul></td></tr>')
        out.append("</tbody></table>")
    else:
        out.append("<p>No physics predictions for this sequence (no sample, or no physics-level actions).</p>")
    out.append("</section>")

    out.append(f'<section id="timeline"><h2>Timeline{of}</h2>')
    if svg:
        whole = "The whole shot" + (f" ({_e(choice.values_text)})" if choice is not None else "")
        out.append(f'<figure id="timeline-full">{svg}<figcaption>{whole}. {_CAPTION}</figcaption></figure>')
        if detail:
            out.append(f'<figure id="timeline-detail">{detail[1]}<figcaption>{_e(detail[0])}</figcaption></figure>')
    else:
        out.append(f"<p>No timeline: {_e(svg_note or 'the sequence could not be resolved')}.</p>")
    out.append("</section>")

    if images is not None:
        uri, notes = images
        out.append(f'<section id="images"><h2>Predicted images{of}</h2>')
        if uri:
            items = "".join(f"<li>{_e(n)}</li>" for n in notes)
            out.append(f'<figure id="predicted-images"><img src="{uri}" alt="predicted optical depth of each image" '
                       f'style="max-width:100%"><figcaption>What the camera will record (optical depth, axes in um '
                       f'at the atoms), predicted from the clouds at each image; <code>seqgen plot FILE --images -o '
                       f'images.npz</code> saves the arrays.<ul class="notes">{items}</ul></figcaption></figure>')
        else:
            out.append(f"<p>No predicted images: {_e(notes[0] if notes else 'none')}.</p>")
        out.append("</section>")

    if shot is not None and shot.sources:
        out.append('<section id="sources"><h2>Source files</h2><table><thead><tr><th>file</th><th>sha256</th>'
                   "</tr></thead><tbody>")
        for path, sha in sorted(shot.sources.items()):
            out.append(f'<tr><td class="where">{_e(path)}</td><td class="where">{_e(sha)}</td></tr>')
        out.append("</tbody></table></section>")
    out.append(f"<footer>Written by seqgen {_e(__version__)}. {_e(CAUTION)}</footer>")
    out += ["</body>", "</html>", ""]
    return "\n".join(out)


def report_svg(res, prefix: str = "full-", **kw) -> tuple[str | None, str]:
    """(inline SVG of the timeline or None, reason when None)."""
    if res.shot is None:
        return None, "the sequence could not be resolved"
    from .plot import svg_text, timeline_figure

    try:
        fig = timeline_figure(res.shot, res.compiled, res.findings, **kw)
        return svg_text(fig, prefix), ""
    except Exception as exc:  # a picture problem must not cost the user the report
        return None, f"the timeline could not be drawn ({type(exc).__name__}: {exc})"


def report_images(res) -> tuple | None:
    """(PNG data URI or None, notes) of the shot's predicted absorption images; None without an image action."""
    if res.shot is None or not res.shot.actions("image"):
        return None
    import base64

    from ..predict.images import predicted_images
    from .plot import figure_bytes
    from .plot.images import image_notes, images_figure

    try:
        imgs = predicted_images(res.shot)
        png = figure_bytes(images_figure([(None, imgs)]), "png")
    except Exception as exc:  # a picture problem must not cost the user the report
        return None, [f"the images could not be predicted ({type(exc).__name__}: {exc})"]
    notes = [n for img in imgs for n in image_notes(img)]
    return "data:image/png;base64," + base64.b64encode(png).decode("ascii"), notes


def report_detail_svg(res) -> tuple | None:
    """(caption, SVG) of a zoom on the busiest run of short blocks, when the full view crowds them."""
    if res.shot is None:
        return None
    from .plot import detail_window

    win = detail_window(res.shot)
    if win is None:
        return None
    svg, _ = report_svg(res, "detail-", t_from=win[0], t_to=win[1], physics=False)
    if svg is None:
        return None
    return (f"Detail from {fmt_when(win[0])} to {fmt_when(win[1])}, where short blocks crowd the full view "
            "(physics panels are in the full view above).", svg)


def write_report(path: str | Path, res, file: str, *, force: bool = False, timeline: bool = True,
                 scanned: bool = False, scan=None, choice=None) -> Path:
    """Render and write the report atomically; raises OutputExists when `path` exists and not force, OutputBusy
    (seqgen/emit/claim.py) when another process is writing it (with force: waits for it, then replaces).

    `scan` (a run `scan.plan.Scan`) adds the scan section; `choice` says which shot of a scan `res` is."""
    path = Path(path)
    if path.exists() and not force:
        raise OutputExists(f"{path} exists; use --force to replace it")
    sub = {"subtitle": choice.caption()} if choice is not None else {}
    svg, note = report_svg(res, **sub) if timeline else (None, "not requested")
    detail = report_detail_svg(res) if svg else None
    text = render_report(res, file, svg=svg, svg_note=note, scanned=scanned, detail=detail, scan=scan,
                         choice=choice, images=report_images(res) if timeline else None)
    return write_atomic(path, text.encode("utf-8"), force=force)
