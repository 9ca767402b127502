"""Pictures of a shot: timeline plots, diff plots and the SVG of the preflight report.

`timeline_figure(shot, compiled, findings)` draws one lane per output, grouped
by device, in physical units (the output unit on a secondary axis where a
calibration maps one to the other). The solid step curve is what the channel
table makes the hardware output (after latency compensation and quantization);
the dashed curve is the intended value from the sequence's segments, i.e. when the output acts (a lane
whose latency shows in the window says its table is the command sent early). Outputs the shot never writes
get no lane unless `all_lanes` (one line names them). Block
spans are shaded and labelled in a strip at the top, findings are marked at
their sequence time by severity, and physics panels (trap depth and trap
frequencies along trap ramps, the falling cloud at each image) follow the
lanes where the shot has them.

`diff_figure(old, new)` overlays two versions and highlights the windows where
an output differs; `diff_windows` computes those windows from the two compiled
tables on the union of their change times.

Matplotlib is used without pyplot (no global state, no display needed): the
figures are plain `matplotlib.figure.Figure` objects rendered with Agg.
Saving is atomic (temporary file, then rename) and deterministic (no dates in
the metadata, fixed SVG ids); an existing file is replaced only with force.
"""

from __future__ import annotations

import fnmatch
import io
import math
import os
import tempfile
import textwrap
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..calibration import to_output, to_physical

# --- look -----------------------------------------------------------------------------------------------------------

# Our own palette: hues far apart in both hue and lightness, so neighbouring devices stay distinct for
# the common colour-vision deficiencies (checked by eye with a deuteranopia and a protanopia simulation).
DEVICE_COLOURS = ("#2160a8", "#c9731a", "#1d8a78", "#9c3c86", "#6b6b1e", "#5a5a5a", "#3f8fd2", "#a6521c")
SEVERITY_STYLE = {  # colour, marker: the marker shape carries the severity even without colour
    "error": ("#b3202c", "X"),
    "warning": ("#dd8a0f", "^"),
    "note": ("#53687e", "o"),
}
SEVERITY_ZORDER = {"error": 5, "warning": 4, "note": 3}
INTENDED_COLOUR = "#1a1a1a"
DIFF_COLOUR = "#f0b429"
OLD_COLOUR = "#8a8a8a"
BLOCK_TINTS = ("#e9edf3", "#f4efe4")
AXIS_STYLES = ("-", "--", ":")
AXIS_COLOURS = ("#2160a8", "#c9731a", "#1d8a78")

FIG_WIDTH_IN = 11.0
LANE_IN = {"analog": 0.5, "synth": 0.5, "digital": 0.3}
HEADER_IN = 0.24
GAP_IN = 0.05
LABEL_PT = 8.0
TICK_PT = 6.5
MAX_POINTS_PER_LANE = 1500  # display bins per lane: min/max within a bin is kept, so no spike is lost
FORMATS = ("png", "svg", "pdf")
FINDING_MARKER_PT = 6.5  # marker sizes (points) in the findings and physics-notes strips
NOTE_MARKER_PT = 4.0
CLOUD_PANEL_IN = 0.8  # height of the cloud panel; its texts take rows of CLOUD_TEXT_ROW_PT at the top
CLOUD_TEXT_ROW_PT = 11.0
G_N = 9.80665  # standard gravity, m/s^2 (exact, SI Brochure)


class PlotError(ValueError):
    """Bad plot request (unknown channel pattern, empty window, unknown format): report, never a traceback."""


class OutputExists(Exception):
    pass


# --- small helpers --------------------------------------------------------------------------------------------------


def parse_time(text: str) -> float:
    """'2.6 s', '150 ms', '20 us' -> seconds. A bare number is refused (give a unit)."""
    from ..resolve.units import UnitError, dims_of, parse_simple

    try:
        q = parse_simple(str(text).strip())
    except UnitError as exc:
        raise PlotError(f"'{text}': {exc}; write a time such as '2.6 s' or '150 ms'") from None
    if q is None:
        raise PlotError(f"'{text}' is not a time; write e.g. '2.6 s' or '150 ms'")
    if q.dims != dims_of("s"):
        if not any(q.dims):
            raise PlotError(f"'{text}' has no unit; write e.g. '{text} s' or '{text} ms'")
        raise PlotError(f"'{text}' is not a time; write e.g. '2.6 s' or '150 ms'")
    if not math.isfinite(q.value):
        raise PlotError(f"'{text}' is not a finite time")
    return float(q.value)


def select_outputs(rig, patterns) -> list[str]:
    """Outputs in rig order whose output, channel or device name matches any glob pattern."""
    names = list(rig.outputs)
    if not patterns:
        return names
    chosen = set()
    for pat in patterns:
        hit = [n for n in names if any(fnmatch.fnmatchcase(x, pat) for x in
                                       (n, rig.outputs[n].channel, rig.outputs[n].device))]
        if not hit:
            import difflib

            close = difflib.get_close_matches(pat, sorted(set(names) | set(rig.channels)), n=3, cutoff=0.5)
            raise PlotError(f"--channels: '{pat}' matches no channel of rig '{rig.name}'"
                            + (f"; did you mean {', '.join(close)}?" if close else
                               f"; channels are {', '.join(sorted(rig.channels))}"))
        chosen.update(hit)
    return [n for n in names if n in chosen]


def parse_channels(text: str | None) -> list[str]:
    if not text:
        return []
    return [p.strip() for p in text.split(",") if p.strip()]


def time_axis(t0: float, t1: float) -> tuple[float, str, float]:
    """(unit factor, unit name, offset) so tick labels stay short: s / ms / us, with an offset late in a shot."""
    span = t1 - t0
    if span >= 2.0:
        factor, unit = 1.0, "s"
    elif span >= 2e-3:
        factor, unit = 1e-3, "ms"
    else:
        factor, unit = 1e-6, "us"
    offset = 0.0
    if max(abs(t0), abs(t1)) / factor >= 1e5:  # labels would need 6+ digits: count from a round offset
        step = factor * 10 ** math.ceil(math.log10(max(span / factor, 1e-12)))
        offset = math.floor(t0 / step + 1e-9) * step
    return factor, unit, offset


def _fmt_seconds(t: float) -> str:
    from ..findings import _fmt_time

    return _fmt_time(t)


def _display_scale(max_abs: float, unit: str) -> tuple[float, str]:
    """SI prefix for a lane: 0.024 W -> (1e-3, 'mW'); units with '/', '^' or spaces keep factor 1."""
    if not unit or unit == "dimensionless":
        return 1.0, ""
    if any(c in unit for c in "/^ ") or unit in ("kg",) or not (max_abs > 0 and math.isfinite(max_abs)):
        return 1.0, unit
    for factor, prefix in ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n")):
        if max_abs >= factor * 0.95:  # 0.99998 V (a DAC code below 1 V) still reads in V
            return factor, prefix + unit
    return 1e-9, "n" + unit


def _decimate(t: np.ndarray, v: np.ndarray, t0: float, t1: float, nbins: int = MAX_POINTS_PER_LANE):
    """Keep the first, last, lowest and highest point of each display bin (vectorised)."""
    if len(t) <= 4 * nbins or t1 <= t0:
        return t, v
    b = np.clip(np.floor((t - t0) / (t1 - t0) * nbins), -1, nbins).astype(np.int64)
    firsts = np.r_[0, np.flatnonzero(np.diff(b)) + 1]
    lasts = np.r_[firsts[1:] - 1, len(b) - 1]
    order = np.lexsort((v, b))
    bs = b[order]
    gstart = np.r_[0, np.flatnonzero(np.diff(bs)) + 1]
    gend = np.r_[gstart[1:] - 1, len(bs) - 1]
    keep = np.unique(np.r_[firsts, lasts, order[gstart], order[gend]])
    return t[keep], v[keep]


def _columns(compiled) -> dict:
    out = {}
    if compiled is None:
        return out
    for table in compiled.tables:
        for j, c in enumerate(table.columns):
            out[c] = (table, j)
    return out


def hardware_series(table, j: int, out, t0: float, t1: float):
    """(times, physical values) the channel table makes output `out` take in [t0, t1] (rows as written)."""
    times = np.asarray(table.ticks, dtype=np.float64) * table.tick_s
    raw = np.asarray(table.values[:, j], dtype=float)
    phys = np.asarray(to_physical(out, raw), dtype=float) if out.calibration is not None else raw
    if not len(times):
        return times, phys
    i0 = max(int(np.searchsorted(times, t0, side="right")) - 1, 0)
    i1 = min(int(np.searchsorted(times, t1, side="left")) + 1, len(times))
    return times[i0:i1], phys[i0:i1]


def intended_series(shot, output: str, t0: float, t1: float, n: int = 1200):
    """(times, physical values) of the intended curve from the shot's segments, edges kept sharp."""
    from ..values import value_at  # the one evaluator of a shot's segments, shared with the checks

    segs = [s for s in shot.segments if s.output == output and s.t1 >= t0 and s.t0 <= t1]
    grid = [np.linspace(t0, t1, n)]
    span = max(t1 - t0, 1e-12)
    for s in segs:
        if s.kind == "set":
            grid.append(np.array([s.t0 - span * 1e-9, s.t0]))
        else:
            inner = np.linspace(max(s.t0, t0), min(s.t1, t1), 200)
            grid.append(np.r_[s.t0 - span * 1e-9, inner, s.t1])
    t = np.unique(np.clip(np.concatenate(grid), t0, t1))
    return t, value_at(shot, output, t)


# --- label placement ------------------------------------------------------------------------------------------------


def _text_pt(text: str, fontsize: float) -> float:
    """Generous width estimate of a label (DejaVu Sans averages about 0.55 em per character)."""
    return len(text) * fontsize * 0.6


LABEL_PAD_PT = 4.0  # free space kept after each label, so neighbours never touch


def _place(items, t0: float, t1: float, width_in: float, fontsize: float, max_rows: int = 4, *,
           marker_pt: float = 0.0, gap_pt: float = 3.0, inside: bool = True):
    """Rows for labels so that no label overlaps another label or another item's marker.

    `items` are (start, end, text) in time order. A label sits inside its bar when the bar is wide enough
    (and `inside`), else to the right of it, or to its left near the right edge of the window. Each item
    reserves, in its row, the span of its bar, its markers (`marker_pt` on either side of start and end)
    and its text, `gap_pt` away from the bar, exactly as `_label_x` draws it. Returns ([(row, mode)],
    rows used); mode is "inside", "right" or "left". Deterministic: first fit, in the items' order.
    """
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    m, g, pad = marker_pt * s_per_pt, gap_pt * s_per_pt, LABEL_PAD_PT * s_per_pt
    rows: list[list[tuple]] = []
    out = []
    for start, end, text in items:
        start = max(start, t0)
        end = min(max(end, start), t1)
        w = _text_pt(text, fontsize) * s_per_pt
        bar_end = max(end, start + 1.5 * s_per_pt)
        if inside and end - start >= w + 2 * g:
            mode, iv = "inside", (start - m, end + m + pad)
        elif bar_end + m + g + w + pad <= t1:
            mode, iv = "right", (start - m - pad, bar_end + m + g + w + pad)
        else:
            mode, iv = "left", (start - m - g - w - pad, bar_end + m + pad)
        for r, ivs in enumerate(rows):
            if all(iv[1] <= a or iv[0] >= b for a, b in ivs):
                ivs.append(iv)
                out.append((r, mode))
                break
        else:
            if len(rows) < max_rows:
                rows.append([iv])
                out.append((len(rows) - 1, mode))
            else:  # too crowded: the row whose labels overlap this one least
                cost = [sum(max(0.0, min(iv[1], b) - max(iv[0], a)) for a, b in ivs) for ivs in rows]
                r = int(np.argmin(cost))
                rows[r].append(iv)
                out.append((r, mode))
    return out, max(len(rows), 1)


def _label_x(start, end, mode, s_per_pt, t0, t1, marker_pt: float = 0.0, gap_pt: float = 3.0):
    """(x, horizontal alignment) of a label placed by `_place` with the same `marker_pt` and `gap_pt`."""
    start, end = max(start, t0), min(max(end, start), t1)
    if mode == "inside":
        return (start + end) / 2, "center"
    if mode == "right":
        return max(end, start + 1.5 * s_per_pt) + (marker_pt + gap_pt) * s_per_pt, "left"
    return start - (marker_pt + gap_pt) * s_per_pt, "right"


def _cluster_blocks(blocks, t0, t1, width_in, small_pt=12.0, near_pt=40.0):
    """Group runs of three or more short, close blocks under one label, so a 2 s view stays readable."""
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    visible = [b for b in blocks if b.end_s >= t0 and b.start_s <= t1]
    groups: list[list] = []
    for b in visible:
        small = (min(b.end_s, t1) - max(b.start_s, t0)) < small_pt * s_per_pt
        g = groups[-1] if groups else None
        if (small and g and g[-1][1] and b.start_s - max(x.end_s for x, _ in g) < near_pt * s_per_pt):
            g.append((b, small))
        else:
            groups.append([(b, small)])
    items = []
    for g in groups:
        members = [b for b, _ in g]
        if len(members) >= 3:
            text = f"{members[0].name} … {members[-1].name} ({len(members)} blocks)"
            items.append((members[0].start_s, max(b.end_s for b in members), text, members))
        else:
            items.extend((b.start_s, b.end_s, b.name, [b]) for b in members)
    return items


def detail_window(shot, width_in: float = 8.0):
    """A window around the busiest run of short blocks (those that share one label in the full view), or None
    when every block can be told apart at full scale. Used for the report's second, zoomed timeline."""
    t1 = shot.duration_s
    if t1 <= 0:
        return None
    crowded = [it for it in _cluster_blocks(shot.blocks, 0.0, t1, width_in) if len(it[3]) >= 3]
    if not crowded:
        return None
    start, end, _, _ = max(crowded, key=lambda it: len(it[3]))
    pad = max(0.08 * (end - start), 1e-6)
    a, b = max(0.0, start - pad), min(t1, end + pad)
    return (a, b) if b - a < 0.5 * t1 else None


# --- figure layout --------------------------------------------------------------------------------------------------


@dataclass
class _Row:
    kind: str  # "blocks", "findings", "header", "lane", "depth", "freq", "cloud", "notes", "diff"
    height: float
    payload: object = None


SUBTITLE_IN = 0.16  # height of one subtitle line under the title (e.g. which shot of a scan is drawn)
SUBTITLE_CHARS = 165  # a subtitle line wraps beyond this many characters (7.5 pt on an 11 in wide figure)


def _subtitle_lines(subtitle: str | None) -> list[str]:
    return [w for ln in (subtitle or "").splitlines() if ln.strip()
            for w in (textwrap.wrap(ln, SUBTITLE_CHARS, subsequent_indent="    ") or [ln])]


def _make_figure(rows: list[_Row], left_in: float, title: str, footer_lines: list[str], window,
                 subtitle: str | None = None):
    from matplotlib.figure import Figure

    sub = _subtitle_lines(subtitle)
    top_in, right_in = 1.05 + SUBTITLE_IN * len(sub), 0.75
    bottom_in = 0.55 + 0.135 * len(footer_lines)
    body = sum(r.height for r in rows) + GAP_IN * (len(rows) - 1)
    height = body + top_in + bottom_in
    fig = Figure(figsize=(FIG_WIDTH_IN, height), dpi=110)
    mean_h = body / len(rows) if rows else 1.0
    gs = fig.add_gridspec(len(rows), 1, height_ratios=[r.height for r in rows], left=left_in / FIG_WIDTH_IN,
                          right=1 - right_in / FIG_WIDTH_IN, top=1 - top_in / height, bottom=bottom_in / height,
                          hspace=GAP_IN / max(mean_h, 1e-6))
    axes = []
    for i, r in enumerate(rows):
        # every axes gets the same fixed limits instead of sharing x: with sixty shared axes each new artist
        # would re-autoscale all siblings; limits are set explicitly everywhere, so autoscaling is off
        ax = fig.add_subplot(gs[i, 0])
        ax.set_xlim(*window)
        ax.set_autoscale_on(False)
        axes.append(ax)
    fig.text(0.5 / FIG_WIDTH_IN, 1 - 0.18 / height, title, ha="left", va="top", fontsize=10, fontweight="bold")
    for k, line in enumerate(sub):  # under the title; the legend moves down by as many lines
        fig.text(0.5 / FIG_WIDTH_IN, 1 - (0.36 + SUBTITLE_IN * k) / height, line, ha="left", va="top", fontsize=7.5,
                 color="#33414f", gid=f"subtitle-{k}")
    fig.seqgen_title = {"title": title, "subtitle": sub}
    for k, line in enumerate(footer_lines):
        fig.text(0.5 / FIG_WIDTH_IN, (bottom_in - 0.5 - 0.135 * k) / height, line, ha="left", va="top",
                 fontsize=7, family="monospace")
    return fig, axes, (FIG_WIDTH_IN - left_in - right_in)


def _style_time_axis(axes, t0: float, t1: float, top_ax, bottom_ax):
    from matplotlib.ticker import FuncFormatter, MaxNLocator

    factor, unit, offset = time_axis(t0, t1)
    fmt = FuncFormatter(lambda x, _pos: f"{(x - offset) / factor:.10g}")
    for ax in axes:
        ax.set_xlim(t0, t1)
        ax.xaxis.set_major_locator(MaxNLocator(nbins=12, steps=[1, 2, 2.5, 5, 10]))
        ax.xaxis.set_major_formatter(fmt)
        ax.tick_params(axis="x", labelbottom=False, labeltop=False, bottom=False, top=False, labelsize=TICK_PT + 0.5)
        if ax.get_label() != "not-written":  # no grid over the line of outputs left out
            ax.grid(axis="x", color="#d9d9d9", linewidth=0.5)
        ax.set_axisbelow(True)
    label = f"time [{unit}]" if not offset else f"time - {_fmt_seconds(offset)} [{unit}]"
    bottom_ax.tick_params(axis="x", labelbottom=True, bottom=True)
    bottom_ax.set_xlabel(label, fontsize=LABEL_PT)
    top_ax.tick_params(axis="x", labeltop=True, top=True)
    return label


NOTE_PT = 6.0  # the small lane note under a lane label (e.g. a latency)


def _lane_label(ax, text: str, colour: str, bold: bool = False, note: str | None = None):
    ax.annotate(text, xy=(0, 0.5), xycoords="axes fraction", xytext=(-34, 3 if note else 0),
                textcoords="offset points", ha="right", va="center", fontsize=LABEL_PT, color=colour,
                fontweight="bold" if bold else "normal")
    if note:
        ax.annotate(note, xy=(0, 0.5), xycoords="axes fraction", xytext=(-34, -5), textcoords="offset points",
                    ha="right", va="center", fontsize=NOTE_PT, color="#555555", gid="lane-note")


def _blank(ax):
    ax.set_yticks([])
    for side in ("left", "right", "top", "bottom"):
        ax.spines[side].set_visible(False)
    ax.set_facecolor("none")


def _shade_blocks(ax, blocks, t0, t1):
    """Block spans as two collections per lane (one per tint): thousands of separate patches are slow."""
    from matplotlib.collections import LineCollection, PolyCollection

    trans = ax.get_xaxis_transform()  # x in data, y in axes fraction
    polys = ([], [])
    instants = []
    for i, b in enumerate(blocks):
        if b.end_s < t0 or b.start_s > t1:
            continue
        if b.end_s > b.start_s:
            polys[i % 2].append([(b.start_s, 0), (b.end_s, 0), (b.end_s, 1), (b.start_s, 1)])
        else:
            instants.append([(b.start_s, 0), (b.start_s, 1)])
    for tint, verts in zip(BLOCK_TINTS, polys):
        if verts:
            ax.add_collection(PolyCollection(verts, facecolors=tint, edgecolors="none", linewidths=0,
                                             transform=trans, zorder=0), autolim=False)
    if instants:
        ax.add_collection(LineCollection(instants, colors="#b8c2cf", linewidths=0.6, transform=trans, zorder=0),
                          autolim=False)


def _spans(ax, spans, colour, alpha, zorder=1):
    from matplotlib.collections import PolyCollection

    verts = [[(a, 0), (b, 0), (b, 1), (a, 1)] for a, b in spans]
    if verts:
        ax.add_collection(PolyCollection(verts, facecolors=colour, edgecolors="none", linewidths=0, alpha=alpha,
                                         transform=ax.get_xaxis_transform(), zorder=zorder), autolim=False)


def _blocks_layout(blocks, t0, t1, width_in):
    items = _cluster_blocks(blocks, t0, t1, width_in)
    placed, nrows = _place([(a, b, text) for a, b, text, _ in items], t0, t1, width_in, 7)
    return items, placed, nrows


def _draw_blocks(ax, blocks, t0, t1, width_in, layout):
    items, placed, nrows = layout
    index = {id(b): i for i, b in enumerate(blocks)}
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    for (start, end, text, members), (r, mode) in zip(items, placed):
        y = nrows - 1 - r
        for b in members:
            width = max(b.end_s - b.start_s, 1.5 * s_per_pt)
            ax.broken_barh([(b.start_s, width)], (y + 0.18, 0.64), facecolors=BLOCK_TINTS[index[id(b)] % 2],
                           edgecolors="#7d8a99", linewidth=0.6)
        x, ha = _label_x(start, end, mode, s_per_pt, t0, t1)
        box = dict(boxstyle="square,pad=0.1", facecolor="white", edgecolor="none", alpha=0.85) \
            if len(members) > 1 and mode == "inside" else None
        ax.text(x, y + 0.5, text, ha=ha, va="center", fontsize=7, color="#243447", clip_on=False, bbox=box)
    ax.set_ylim(0, nrows)
    _blank(ax)
    ax.set_label("blocks")
    _lane_label(ax, "blocks", "#243447", bold=True)


def _finding_items(findings, t0, t1):
    shown = [f for f in findings if f.time_s is not None and t0 <= f.time_s <= t1]
    shown.sort(key=lambda f: (f.time_s, f.severity, f.code))
    return shown


def _findings_layout(shown, t0, t1, width_in, near_pt=10.0, max_rows=4):
    """Label items for findings: runs of more than `max_rows` findings within `near_pt` share one label."""
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    groups: list[list] = []
    for f in shown:
        if groups and f.time_s - groups[-1][-1].time_s < near_pt * s_per_pt:
            groups[-1].append(f)
        else:
            groups.append([f])
    items = []
    for g in groups:
        if len(g) > max_rows:
            codes = sorted({f.code for f in g})
            text = f"{len(g)} findings: " + ", ".join(codes[:3]) + (" …" if len(codes) > 3 else "")
            items.append((g[0].time_s, g[-1].time_s, text, g))
        else:
            items.extend((f.time_s, f.time_s, f.code + (" (accepted)" if f.accepted else ""), [f]) for f in g)
    placed, nrows = _place([(a, b, text) for a, b, text, _ in items], t0, t1, width_in, 6.5, max_rows=max_rows,
                           marker_pt=FINDING_MARKER_PT / 2 + 1, gap_pt=4.0, inside=False)
    return items, placed, nrows


def _draw_findings(ax, t0, t1, width_in, layout, hidden: int):
    items, placed, nrows = layout
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    for (start, end, text, members), (r, mode) in zip(items, placed):
        y = nrows - 1 - r + 0.5
        for f in members:
            colour, marker = SEVERITY_STYLE.get(f.severity, SEVERITY_STYLE["note"])
            (mk,) = ax.plot([f.time_s], [y], linestyle="none", marker=marker, markersize=FINDING_MARKER_PT,
                            markerfacecolor="none" if f.accepted else colour, markeredgecolor=colour, clip_on=False,
                            zorder=SEVERITY_ZORDER.get(f.severity, 3))  # a shared spot shows the worst on top
            mk.set_gid(f"finding:{f.severity}:{f.code}")
        colour = SEVERITY_STYLE.get(members[0].severity, SEVERITY_STYLE["note"])[0]
        x, ha = _label_x(start, end, mode, s_per_pt, t0, t1, marker_pt=FINDING_MARKER_PT / 2 + 1, gap_pt=4.0)
        ax.text(x, y, text, ha=ha, va="center", fontsize=6.5, color=colour, clip_on=False)
    ax.set_ylim(0, nrows)
    _blank(ax)
    ax.set_label("findings")
    _lane_label(ax, "findings", "#243447", bold=True)
    if hidden:
        ax.annotate(f"{hidden} more outside this window or without a time", xy=(1, 1), xycoords="axes fraction",
                    xytext=(0, 1), textcoords="offset points", ha="right", va="bottom", fontsize=6, color="#555555")


def _finding_lines(ax, shown):
    from matplotlib.collections import LineCollection

    if not shown:
        return
    segs = [[(f.time_s, 0), (f.time_s, 1)] for f in shown]
    colours = [SEVERITY_STYLE.get(f.severity, SEVERITY_STYLE["note"])[0] for f in shown]
    many = len(shown) > 12  # a crowd of lines would hide the curves: draw them faint
    ax.add_collection(LineCollection(segs, colors=colours, linewidths=0.5 if many else 0.8, linestyles=[(0, (3, 2))],
                                     alpha=0.3 if many else 0.85, transform=ax.get_xaxis_transform(), zorder=4),
                      autolim=False)


def _draw_header(ax, device, colour):
    _blank(ax)
    ax.tick_params(axis="x", length=0)
    ax.set_label(f"device:{device.name}" if device is not None else "device:?")
    text = device.name if device is None else (f"{device.name}   timebase {_fmt_hz(device.timebase_hz)}, "
                                               f"{device.output_model} between rows")
    ax.annotate(text, xy=(0, 0), xycoords="axes fraction", xytext=(-34 - 90, 2), textcoords="offset points",
                ha="left", va="bottom", fontsize=LABEL_PT, fontweight="bold", color=colour)
    ax.axhline(0.0, color=colour, linewidth=1.0)
    ax.set_ylim(0, 1)


def _fmt_hz(hz: float) -> str:
    from ..resolve.units import format_value

    return format_value(hz, "Hz")


def _style_lane(ax, out, colour, scale_unit, ylim, flat=None):
    """Axes of one lane; `flat` is the value (display units) of a lane that never changes in the window:
    it gets one tick, so neighbouring lanes' labels cannot collide."""
    from matplotlib.ticker import FixedLocator, MaxNLocator

    from matplotlib.ticker import FuncFormatter

    factor, unit = scale_unit
    plain = FuncFormatter(lambda y, _pos: f"{y:.4g}")  # no offset text or 1e-5 multiplier above a lane
    ax.set_ylim(*ylim)
    ax.yaxis.set_major_formatter(plain)
    ax.tick_params(axis="y", labelsize=TICK_PT, length=2, pad=1.5)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.spines["left"].set_color(colour)
    ax.spines["bottom"].set_color("#b0b0b0")
    if out.kind == "digital":
        ax.yaxis.set_major_locator(FixedLocator([0, 1]))
        ax.set_yticklabels(["off", "on"])
    elif flat is not None:
        ax.yaxis.set_major_locator(FixedLocator([_round_tick(flat, ylim)]))
    else:
        ax.yaxis.set_major_locator(MaxNLocator(nbins=2, min_n_ticks=2))
    # the output unit on a secondary axis where a calibration maps the physical quantity to it
    if out.calibration is not None and out.kind != "digital":
        def fwd(y, out=out, factor=factor):
            return np.asarray(to_output(out, np.asarray(y, float) * factor), dtype=float)

        def inv(v, out=out, factor=factor):
            return np.asarray(to_physical(out, np.asarray(v, float)), dtype=float) / factor

        sec = ax.secondary_yaxis("right", functions=(fwd, inv))
        if flat is not None:
            sec.yaxis.set_major_locator(FixedLocator([_round_tick(float(fwd(flat)), tuple(fwd(np.asarray(ylim))))]))
        else:
            sec.yaxis.set_major_locator(MaxNLocator(nbins=2, min_n_ticks=2))
        sec.yaxis.set_major_formatter(plain)
        sec.tick_params(labelsize=TICK_PT - 0.5, length=2, pad=1.5, colors="#6b6b6b")
        sec.spines["right"].set_color("#b0b0b0")
        sec.set_ylabel(out.unit, rotation=0, fontsize=TICK_PT, color="#6b6b6b", labelpad=8, va="center")
        sec.set_label(f"output-unit:{out.name}")


def _ylim(arrays, kind, full=None, min_span: float = 0.0):
    """Y-limits of a lane from the values in the window; never narrower than 5 % of the range over the whole
    shot (`full`) nor than `min_span`, so a DAC-code offset near zero does not fill a zoomed lane."""
    if kind == "digital":
        return (-0.2, 1.3)
    vals = np.concatenate([np.asarray(a, float)[np.isfinite(a)] for a in arrays if len(a)] or [np.zeros(1)])
    lo, hi = float(np.min(vals)), float(np.max(vals))
    if hi - lo < min_span:
        mid = (hi + lo) / 2
        lo, hi = mid - min_span / 2, mid + min_span / 2
    if full is not None:
        fvals = np.concatenate([np.asarray(a, float)[np.isfinite(a)] for a in full if len(a)] or [vals])
        need = 0.05 * float(np.max(fvals) - np.min(fvals))
        if hi - lo < need:
            mid = (hi + lo) / 2
            lo, hi = max(mid - need / 2, float(np.min(fvals))), min(mid + need / 2, float(np.max(fvals)))
            if hi - lo < need:
                lo, hi = (lo, lo + need) if lo == float(np.min(fvals)) else (hi - need, hi)
    if hi - lo <= 1e-12 * max(abs(hi), abs(lo), 1e-300):
        pad = abs(hi) * 0.1 if hi else 1.0
        return lo - pad, hi + pad
    pad = 0.12 * (hi - lo)
    return lo - pad, hi + pad


def _round_tick(value: float, ylim) -> float:
    """The round number nearest `value` among the ticks a lane of limits `ylim` would get (0, 100, 0.25 ...):
    the one tick of a flat lane reads "0", not the DAC code's "0.0763"."""
    from matplotlib.ticker import MaxNLocator

    lo, hi = sorted(float(y) for y in ylim)
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return value
    ticks = [t for t in MaxNLocator(nbins=4, steps=[1, 2, 2.5, 5, 10]).tick_values(lo, hi) if lo <= t <= hi]
    if not ticks:
        return value
    best = min(ticks, key=lambda t: (abs(t - value), abs(t)))
    return 0.0 if abs(best) < 1e-12 * (hi - lo) else float(best)


def _nearly_flat(values, ylim, share: float = 0.02):
    """The middle value of a lane whose values in the window span at most `share` of its height (a flat lane,
    or one that moves by a few DAC codes only), else None."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    if not len(v):
        return None
    lo, hi = float(np.min(v)), float(np.max(v))
    height = abs(float(ylim[1]) - float(ylim[0]))
    if hi - lo <= share * height or hi - lo <= 1e-9 * max(abs(lo), abs(hi), 1e-30):
        return (lo + hi) / 2
    return None


def _flat(values):
    """The value of a lane that does not change (None when it changes or is empty)."""
    v = np.asarray(values, float)
    v = v[np.isfinite(v)]
    if not len(v):
        return None
    lo, hi = float(np.min(v)), float(np.max(v))
    return (lo + hi) / 2 if hi - lo <= 1e-9 * max(abs(lo), abs(hi), 1e-30) else None


def _code_span(out, arrays, codes: int = 64) -> float:
    """Physical span of `codes` DAC codes around the lane's values: the least height of an analog lane, so a
    half-code offset (0 W on a symmetric range) stays a flat line instead of filling the lane."""
    if out.kind == "digital" or not out.lsb:
        return 0.0
    vals = np.concatenate([np.asarray(a, float)[np.isfinite(a)] for a in arrays if len(a)] or [np.zeros(1)])
    mid = float(np.mean([vals.min(), vals.max()]))
    try:
        v = float(to_output(out, mid)) if out.calibration is not None else mid
        ends = np.array([v - codes / 2 * out.lsb, v + codes / 2 * out.lsb])
        phys = to_physical(out, ends) if out.calibration is not None else ends
        return float(abs(phys[1] - phys[0]))
    except (ValueError, TypeError):
        return 0.0


def _full_range(table_col, out):
    """Physical values of one channel-table column over the whole shot (for lane limits)."""
    if table_col is None:
        return []
    table, j = table_col
    raw = np.asarray(table.values[:, j], dtype=float)
    if not len(raw):
        return []
    ends = np.array([raw.min(), raw.max()])
    return [np.asarray(to_physical(out, ends), dtype=float) if out.calibration is not None else ends]


def _step(ax, t, v, model, t1, **kw):
    if not len(t):
        return None
    if model == "linear":
        (line,) = ax.plot(t, v, **kw)
    else:
        tt, vv = np.r_[t, max(t1, t[-1])], np.r_[v, v[-1]]
        (line,) = ax.plot(tt, vv, drawstyle="steps-post", **kw)
    return line


# --- physics panels -------------------------------------------------------------------------------------------------


def _physics(shot, t0, t1):
    """Data for the physics panels in [t0, t1]: trap curves, clouds at images, physics notes."""
    from scipy import constants as sc

    out = {"trap": [], "clouds": [], "notes": []}
    try:
        from ..predict import image_prediction, report_rows, trap_stage
    except ImportError:  # pragma: no cover - predictions absent in a partial checkout
        return out
    if shot.sample is None:
        return out
    seen = set()
    for act in shot.phys:
        if act.kind != "trap_ramp":
            continue
        a, b = max(act.t0, t0), min(act.t1, t1)
        if b <= a or (a, b) in seen:
            continue
        seen.add((a, b))
        try:
            times, omegas, depth_g = trap_stage(shot, a, b)
        except Exception:  # physics trouble is reported by the checks; the picture just omits the panel
            continue
        out["trap"].append({"block": act.block, "times": times, "freq_hz": omegas / (2 * math.pi),
                            "depth_uk": depth_g / sc.k * 1e6})
    for img in shot.phys:
        if img.kind != "image" or not (t0 <= img.t0 <= t1):
            continue
        try:
            pred = image_prediction(shot, img)
        except Exception:
            pred = None
        c = pred.cloud if pred else None
        if c:
            setup = shot.rig.imaging.get(img.args.get("setup"))
            # each internal-state component's height at the image, one per sign case of unknown forces
            comps = [(comp.state, comp.positions[:, 2]) for comp in pred.components
                     if np.any(np.abs(comp.positions[:, 2] + c.drop) > 1e-9)]
            out["clouds"].append({"t": img.t0, "release": img.t0 - c.tof, "cloud": c.as_dict(), "setup": setup,
                                  "name": img.args.get("setup", ""), "components": comps, "edge": pred.edge})
    try:
        rows = [r.as_dict() for r in report_rows(shot)]
    except Exception:
        rows = []
    seen_rows = set()
    for r in rows:
        key = (r.get("block"), r.get("kind"), r.get("time_s"), tuple(r.get("items", ())))
        if key in seen_rows or r.get("time_s") is None or not (t0 <= r["time_s"] <= t1):
            continue
        seen_rows.add(key)
        out["notes"].append(r)
    return out


def _draw_depth(ax, trap, colour):
    for k, tr in enumerate(trap):
        ax.plot(tr["times"], tr["depth_uk"], color=colour, marker=".", markersize=3, linewidth=1.2,
                label="depth with gravity" if k == 0 else None)
    ax.set_label("physics:trap-depth")
    vals = np.concatenate([tr["depth_uk"] for tr in trap])
    ax.set_ylim(0, max(float(np.max(vals)) * 1.12, 1e-6))
    _style_panel(ax, colour)
    _lane_label(ax, "trap depth / k_B [uK]", colour)


def _draw_freq(ax, trap):
    from matplotlib.ticker import MaxNLocator

    top = 0.0
    for k, tr in enumerate(trap):
        f = tr["freq_hz"]
        for axis in range(3):
            ax.plot(tr["times"], f[:, axis], color=AXIS_COLOURS[axis], linestyle=AXIS_STYLES[axis], linewidth=1.1,
                    label=f"axis {axis + 1}" if k == 0 else None)
        if np.any(np.isfinite(f)):
            top = max(top, float(np.nanmax(f)))
    ax.set_ylim(0, top * 1.12 if top > 0 else 1.0)
    ax.yaxis.set_major_locator(MaxNLocator(nbins=3, min_n_ticks=2))
    ax.set_label("physics:trap-frequencies")
    _style_panel(ax, "#2160a8")
    ax.legend(loc="upper right", fontsize=6, ncol=3, frameon=False, handlelength=2.2)
    _lane_label(ax, "trap frequencies [Hz]", "#243447")


def _draw_clouds(ax, clouds, t0, t1, width_in):
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    lo = hi = 0.0
    texts = []
    for c in clouds:
        cl = c["cloud"]
        tr = np.linspace(c["release"], c["t"], 60)
        ax.plot(tr, -0.5 * G_N * (tr - c["release"]) ** 2 * 1e3, color="#5a5a5a", linestyle=":", linewidth=1.0)
        edge = cl["size"] if cl["size_kind"].startswith("Thomas") else 2 * cl["size"]
        centre = -cl["drop"] * 1e3
        bar = ax.errorbar([c["t"]], [centre], yerr=[[edge * 1e3], [edge * 1e3]], fmt="o", color="#9c3c86",
                          markersize=4, capsize=3, linewidth=1.4)
        for artist in bar.lines[0:1] + tuple(bar.lines[1]) + tuple(bar.lines[2]):
            artist.set_clip_on(False)
        for k, (state, heights) in enumerate(c.get("components", ())):  # pushed / separated components
            for z in heights * 1e3:
                comp = ax.errorbar([c["t"]], [z], yerr=[[c["edge"] * 1e3], [c["edge"] * 1e3]], fmt="s",
                                   color=AXIS_COLOURS[k % len(AXIS_COLOURS)], markersize=3, capsize=2, linewidth=0.9,
                                   mfc="none")
                for artist in comp.lines[0:1] + tuple(comp.lines[1]) + tuple(comp.lines[2]):
                    artist.set_clip_on(False)
                lo, hi = min(lo, z - c["edge"] * 1e3), max(hi, z + c["edge"] * 1e3)
                if state is not None:  # on the side away from the cloud's text
                    right = c["t"] > t0 + 0.6 * (t1 - t0)
                    ax.text(c["t"] + (6 if right else -6) * s_per_pt, z,
                            f"|{state[0]},{state[1]:+d}>" if state[1] else f"|{state[0]},0>", ha="left" if right else "right",
                            va="center", fontsize=5.5, color=AXIS_COLOURS[k % len(AXIS_COLOURS)], clip_on=False)
        if c["setup"] is not None and c["setup"].field_of_view_m:
            half = c["setup"].field_of_view_m / 2 * 1e3
            mid = float(c["setup"].center_m[2]) * 1e3  # the camera's centre of view, height in the rig frame
            ax.axhspan(mid - half, mid + half, color="#dbe8d4", alpha=0.6, zorder=0, linewidth=0)
            ax.axhline(mid - half, color="#6f8f62", linewidth=0.6)
            lo = min(lo, mid - half)
        lo = min(lo, centre - edge * 1e3)
        hi = max(hi, centre + edge * 1e3)
        texts.append((c["t"], c["t"], f"{c['name']}: time of flight {_fmt_seconds(cl['tof'])}, centre "
                      f"{cl['drop'] * 1e3:.3g} mm below release, {cl['size_kind']} {cl['size'] * 1e6:.3g} um"))
    # the texts go in a band of their own above everything drawn (trajectory, markers, state labels), in rows
    # placed so that they overlap neither each other nor the image markers
    placed, nrows = _place(texts, t0, t1, width_in, 6.5, max_rows=3, marker_pt=6.0, gap_pt=4.0, inside=False)
    y_lo = lo * 1.25 if lo < 0 else -1.0
    y_data = max(abs(lo) * 0.6 + 0.1, hi * 1.15)
    band = min(CLOUD_TEXT_ROW_PT * nrows / (72.0 * CLOUD_PANEL_IN), 0.5)
    ax.set_ylim(y_lo, y_data + (y_data - y_lo) * band / (1 - band))
    trans = ax.get_xaxis_transform()
    for (start, end, txt), (r, mode) in zip(texts, placed):
        x, ha = _label_x(start, end, mode, s_per_pt, t0, t1, marker_pt=6.0, gap_pt=4.0)
        y = 1 - (r + 0.5) * CLOUD_TEXT_ROW_PT / (72.0 * CLOUD_PANEL_IN)
        ax.text(x, y, txt, ha=ha, va="center", fontsize=6.5, color="#5e2452", clip_on=True, transform=trans,
                gid="cloud-text")
    ax.set_label("physics:cloud")
    _style_panel(ax, "#9c3c86")
    _lane_label(ax, "cloud height [mm]", "#9c3c86")


def _notes_layout(notes, t0, t1, width_in, near_pt=14.0):
    """Numbered labels for the physics notes; three or more notes close together share one label."""
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    groups: list[list] = []
    for k, r in enumerate(notes):
        if groups and r["time_s"] - notes[groups[-1][-1]]["time_s"] < near_pt * s_per_pt:
            groups[-1].append(k)
        else:
            groups.append([k])
    items = []
    for g in groups:
        if len(g) >= 3:
            kinds = list(dict.fromkeys(notes[k]["kind"] for k in g))
            text = f"{g[0] + 1}-{g[-1] + 1} " + ", ".join(kinds[:3]) + (" …" if len(kinds) > 3 else "")
            items.append((notes[g[0]]["time_s"], notes[g[-1]]["time_s"], text, g))
        else:
            items.extend((notes[k]["time_s"], notes[k]["time_s"], f"{k + 1} {notes[k]['kind']}", [k]) for k in g)
    placed, nrows = _place([(a, b, text) for a, b, text, _ in items], t0, t1, width_in, 6.5, max_rows=4,
                           marker_pt=NOTE_MARKER_PT / 2 + 1, gap_pt=4.0, inside=False)
    return items, placed, nrows, notes


def _draw_notes(ax, t0, t1, width_in, layout):
    items, placed, nrows, notes = layout
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    for (start, end, text, members), (r, mode) in zip(items, placed):
        y = nrows - 1 - r + 0.5
        for k in members:
            (mk,) = ax.plot([notes[k]["time_s"]], [y], marker="D", markersize=NOTE_MARKER_PT, color="#1d8a78", linestyle="none",
                            clip_on=False)
            mk.set_gid(f"note:{k + 1}")
        x, ha = _label_x(start, end, mode, s_per_pt, t0, t1, marker_pt=NOTE_MARKER_PT / 2 + 1, gap_pt=4.0)
        ax.text(x, y, text, ha=ha, va="center", fontsize=6.5, color="#14584d", clip_on=False)
    ax.set_ylim(0, nrows)
    _blank(ax)
    ax.set_label("physics:notes")
    _lane_label(ax, "physics notes", "#14584d", bold=True)


def _style_panel(ax, colour):
    from matplotlib.ticker import MaxNLocator

    ax.tick_params(axis="y", labelsize=TICK_PT, length=2, pad=1.5)
    if not isinstance(ax.yaxis.get_major_locator(), MaxNLocator):
        ax.yaxis.set_major_locator(MaxNLocator(nbins=3, min_n_ticks=2))
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    ax.spines["left"].set_color(colour)


def _note_lines(notes) -> list[str]:
    lines = []
    for k, r in enumerate(notes):
        text = f"{k + 1}  t={_fmt_seconds(r['time_s'])} [{r.get('block', '')}] {r['kind']}: " + "; ".join(r.get("items", ()))
        wrapped = textwrap.wrap(text, width=150, subsequent_indent="     ")
        lines.extend(wrapped or [text])
    return lines


# --- the timeline -------------------------------------------------------------------------------------------------


def _window(shot, t_from, t_to):
    end = shot.duration_s if shot.duration_s > 0 else 1e-3
    t0 = 0.0 if t_from is None else float(t_from)
    t1 = end if t_to is None else float(t_to)
    if not t1 > t0:
        raise PlotError(f"empty window: --from {_fmt_seconds(t0)} is not before --to {_fmt_seconds(t1)}")
    return t0, t1


def _lanes_by_device(rig, names):
    groups: dict[str, list] = {}
    for n in names:
        groups.setdefault(rig.outputs[n].device, []).append(n)
    order = [d for d in rig.devices if d in groups] + [d for d in groups if d not in rig.devices]
    return [(d, groups[d]) for d in order]


def _left_margin(names, extra=()):
    """Room for the lane labels (name plus unit, bold when marked) and the y tick labels."""
    longest = max([len(n) + 10 for n in names] + [len(e) for e in extra] + [14])
    return min(0.55 + longest * LABEL_PT * 0.62 / 72, 3.4)


def written_outputs(shot) -> set:
    """Outputs the shot writes at least once (every other output holds its safe value all shot)."""
    return {seg.output for seg in shot.segments}


def _drop_unwritten(names, written, all_lanes):
    """(lanes to draw, outputs left out): outputs never written are left out unless `all_lanes` (or unless
    nothing would be left to draw)."""
    if all_lanes:
        return list(names), []
    kept = [n for n in names if n in written]
    if not kept:
        return list(names), []
    return kept, [n for n in names if n not in written]


def _unwritten_lines(names) -> list[str]:
    if not names:
        return []
    text = "not written (at the safe value all shot; --all-lanes draws them): " + ", ".join(names)
    return textwrap.wrap(text, 150, subsequent_indent="    ") or [text]


def _draw_unwritten(ax, lines):
    _blank(ax)
    ax.set_ylim(0, 1)
    ax.set_label("not-written")
    ax.tick_params(axis="x", length=0)
    for k, line in enumerate(lines):
        ax.annotate(line, xy=(0, 1), xycoords="axes fraction", xytext=(0, -2 - 9 * k), textcoords="offset points",
                    ha="left", va="top", fontsize=6.5, color="#555555")


DENSE_SHARE = 0.05  # "dense final part": more than half of the blocks start in the last 5 % of the window


def dense_hint(blocks, t0: float, t1: float):
    """((a, b), text) when more than half of the blocks in the window start in its last 5 %: a zoom window
    rounded outwards to a round step, and a hint naming the --from (and --to) that shows them; else None."""
    visible = [b for b in blocks if b.end_s >= t0 and b.start_s <= t1]
    span = t1 - t0
    if len(visible) < 4 or span <= 0:
        return None
    late = [b for b in visible if b.start_s >= t1 - DENSE_SHARE * span]
    if 2 * len(late) <= len(visible):
        return None
    a = min(b.start_s for b in late)
    e = min(max(b.end_s for b in late), t1)
    step = 10 ** math.floor(math.log10(max(e - a, span * 1e-6)))
    lo = max(t0, math.floor(a / step + 1e-9) * step)
    hi = math.ceil(e / step - 1e-9) * step
    cmd = f"--from '{_fmt_seconds(lo)}'" + (f" --to '{_fmt_seconds(hi)}'" if hi < t1 else "")
    text = (f"most blocks ({len(late)} of {len(visible)}) fall in {_fmt_seconds(lo)} to "
            f"{_fmt_seconds(min(hi, t1))}: use {cmd} to see them apart")
    return (lo, min(hi, t1)), text


def timeline_figure(shot, compiled, findings=(), *, t_from=None, t_to=None, channels=None, physics: bool = True,
                    intended: bool = True, title: str | None = None, subtitle: str | None = None,
                    all_lanes: bool = False, hints: bool = True):
    """The timeline of one shot as a matplotlib Figure (see the module docstring).

    `subtitle`: lines under the title, e.g. which shot of a scan this is and with which param values.
    Outputs the shot never writes get no lane (they are named in one line under the lanes) unless `all_lanes`.
    `hints`: a line under the title when most blocks crowd the end of the window (see `dense_hint`).

    Axes carry labels for tools and tests: "blocks", "findings", "device:<name>", "lane:<output>",
    "physics:trap-depth", "physics:trap-frequencies", "physics:cloud", "physics:notes".
    """
    from ..findings import summary

    t0, t1 = _window(shot, t_from, t_to)
    names, unwritten = _drop_unwritten(select_outputs(shot.rig, channels), written_outputs(shot), all_lanes)
    cols = _columns(compiled)
    shown = _finding_items(findings, t0, t1)
    hidden = len(list(findings)) - len(shown)
    groups = _lanes_by_device(shot.rig, names)
    phys = _physics(shot, t0, t1) if physics else {"trap": [], "clouds": [], "notes": []}

    width_guess = FIG_WIDTH_IN - _left_margin(names) - 0.75
    notes = {n: latency_note(shot.rig.outputs[n], t0, t1, width_guess) for n in names if n in cols}
    notes = {n: v for n, v in notes.items() if v}
    # a lane note is NOTE_PT / LABEL_PT as wide per character as a lane label
    extra = ["trap frequencies [Hz]", "trap depth / k_B [uK]"] + \
        ["x" * math.ceil(len(v) * NOTE_PT / LABEL_PT) for v in notes.values()]
    left = _left_margin(names, extra)
    width_in = FIG_WIDTH_IN - left - 0.75
    hint = dense_hint(shot.blocks, t0, t1) if hints else None
    if hint is not None:
        subtitle = (subtitle + "\n" if subtitle else "") + hint[1]
    unwritten_lines = _unwritten_lines(unwritten)
    blay = _blocks_layout(shot.blocks, t0, t1, width_in)
    rows = [_Row("blocks", 0.22 * blay[2] + 0.06)]
    flay = _findings_layout(shown, t0, t1, width_in)
    if shown or hidden:
        rows.append(_Row("findings", 0.2 * flay[2] + 0.1))
    for dev, outs in groups:
        rows.append(_Row("header", HEADER_IN, dev))
        rows.extend(_Row("lane", LANE_IN.get(shot.rig.outputs[n].kind, 0.5), n) for n in outs)
    if unwritten_lines:
        rows.append(_Row("unwritten", 0.04 + 0.125 * len(unwritten_lines), unwritten_lines))
    if phys["trap"] or phys["clouds"] or phys["notes"]:
        rows.append(_Row("header", HEADER_IN, None))
    if phys["trap"]:
        rows += [_Row("depth", 0.8), _Row("freq", 0.9)]
    if phys["clouds"]:
        rows.append(_Row("cloud", CLOUD_PANEL_IN))
    nlay = _notes_layout(phys["notes"], t0, t1, width_in)
    if phys["notes"]:
        rows.append(_Row("notes", 0.2 * nlay[2] + 0.08))
    s = summary(findings)
    ttl = title or (f"{shot.file}  ·  rig {shot.rig.name}  ·  duration {_fmt_seconds(shot.duration_s)}  ·  "
                    f"{s['error']} error(s), {s['warning']} warning(s), {s['note']} note(s)")
    fig, axes, width_in = _make_figure(rows, left, ttl, _note_lines(phys["notes"]), (t0, t1), subtitle)
    dev_colour = {d: DEVICE_COLOURS[i % len(DEVICE_COLOURS)] for i, d in enumerate(shot.rig.devices)}
    lanes_ax = []
    for ax, row in zip(axes, rows):
        if row.kind == "blocks":
            _draw_blocks(ax, shot.blocks, t0, t1, width_in, blay)
        elif row.kind == "findings":
            _draw_findings(ax, t0, t1, width_in, flay, hidden)
        elif row.kind == "header":
            if row.payload is None:
                _blank(ax)
                ax.set_label("device:physics")
                ax.annotate("physics (predicted from the rig's beams and the sample)", xy=(0, 0),
                            xycoords="axes fraction", xytext=(-124, 2), textcoords="offset points", ha="left",
                            va="bottom", fontsize=LABEL_PT, fontweight="bold", color="#14584d")
                ax.axhline(0.0, color="#14584d", linewidth=1.0)
                ax.set_ylim(0, 1)
            else:
                _draw_header(ax, shot.rig.devices.get(row.payload), dev_colour.get(row.payload, "#444444"))
        elif row.kind == "lane":
            out = shot.rig.outputs[row.payload]
            colour = dev_colour.get(out.device, "#444444")
            _shade_blocks(ax, shot.blocks, t0, t1)
            _draw_lane(ax, shot, out, cols.get(out.name), t0, t1, colour, intended, note=notes.get(out.name))
            _finding_lines(ax, shown)
            lanes_ax.append(ax)
        elif row.kind == "unwritten":
            _draw_unwritten(ax, row.payload)
        elif row.kind == "depth":
            _shade_blocks(ax, shot.blocks, t0, t1)
            _draw_depth(ax, phys["trap"], "#1d8a78")
        elif row.kind == "freq":
            _shade_blocks(ax, shot.blocks, t0, t1)
            _draw_freq(ax, phys["trap"])
        elif row.kind == "cloud":
            _shade_blocks(ax, shot.blocks, t0, t1)
            _draw_clouds(ax, phys["clouds"], t0, t1, width_in)
        elif row.kind == "notes":
            _draw_notes(ax, t0, t1, width_in, nlay)
    _style_time_axis(axes, t0, t1, axes[0], axes[-1])
    _legend(fig, shown, intended, diff=False, early=bool(notes))
    fig.seqgen_info = {"window": (t0, t1), "lanes": [r.payload for r in rows if r.kind == "lane"],
                       "findings_shown": len(shown), "not_written": list(unwritten), "latency_notes": dict(notes),
                       "hint": hint[1] if hint else None, "dense_window": hint[0] if hint else None}
    return fig


def latency_note(out, t0: float, t1: float, width_in: float) -> str | None:
    """The lane note of an output whose channel table is sent early by its latency, when the shift shows in the
    window (at least one point wide), e.g. "command 3.2 ms early on, 2.1 ms early off (latency)"."""
    rise, fall = float(out.latency_rise_s or 0.0), float(out.latency_fall_s or 0.0)
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    if max(rise, fall) < s_per_pt:
        return None
    if rise == fall:
        return f"command {_fmt_seconds(rise)} early (latency)"
    return f"command {_fmt_seconds(rise)} early on, {_fmt_seconds(fall)} early off (latency)"


def _draw_lane(ax, shot, out, col, t0, t1, colour, intended, note=None):
    arrays = []
    model = shot.rig.devices[out.device].output_model if out.device in shot.rig.devices else "hold"
    hw = (np.zeros(0), np.zeros(0))
    if col is not None:
        hw = hardware_series(col[0], col[1], out, t0, t1)
        arrays.append(hw[1])
    it = intended_series(shot, out.name, t0, t1) if intended else (np.zeros(0), np.zeros(0))
    arrays.append(it[1])
    full = _full_range(col, out) + [np.asarray([out.safe], float)]
    ylim = _ylim(arrays, out.kind, full, _code_span(out, arrays))
    peak = max(abs(ylim[0]), abs(ylim[1])) * 0.9  # the prefix fits what the lane shows, padding aside
    scale = _display_scale(peak, out.phys_unit if out.kind != "digital" else "")
    factor = scale[0]
    early = note is not None  # the table is the command, sent early: the dashed curve is when the output acts
    if len(hw[0]):
        t, v = _decimate(hw[0], hw[1] / factor, t0, t1)
        line = _step(ax, t, v, model, t1, color=colour, linewidth=1.1 if early else 1.3, zorder=3,
                     alpha=0.7 if early else 1.0)
        line.set_gid(f"table:{out.name}")
        if out.kind == "digital":
            ax.fill_between(np.r_[t, max(t1, t[-1])], np.r_[v, v[-1]], step="post", color=colour,
                            alpha=0.1 if early else 0.18, linewidth=0, zorder=2)
    if intended and len(it[0]):
        (line,) = ax.plot(it[0], it[1] / factor, color=INTENDED_COLOUR, linewidth=1.0 if early else 0.8,
                          linestyle=(0, (4, 2)), alpha=0.95 if early else 0.75, zorder=3.5)
        line.set_gid(f"intended:{out.name}")
    dlim = ylim if out.kind == "digital" else (ylim[0] / factor, ylim[1] / factor)
    _style_lane(ax, out, colour, scale, dlim, _nearly_flat(hw[1] / factor if len(hw[0]) else it[1] / factor, dlim))
    ax.set_label(f"lane:{out.name}")
    _lane_label(ax, out.name + (f" [{scale[1]}]" if scale[1] else ""), colour, note=note)


def _legend(fig, shown, intended, diff, early=False):
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch

    handles = []
    if diff:
        handles += [Line2D([], [], color=OLD_COLOUR, linewidth=1.3, linestyle=(0, (2, 1.5)), label="old"),
                    Line2D([], [], color=DEVICE_COLOURS[0], linewidth=1.3, label="new"),
                    Patch(color=DIFF_COLOUR, alpha=0.45, label="outputs differ")]
    else:
        label = "channel table (command; sent early where a lane notes a latency)" if early else \
            "channel table (as output)"
        handles.append(Line2D([], [], color=DEVICE_COLOURS[0], linewidth=1.3, label=label))
        if intended:
            handles.append(Line2D([], [], color=INTENDED_COLOUR, linewidth=0.8, linestyle=(0, (4, 2)),
                                  label="intended (sequence: when the output acts)" if early else
                                  "intended (sequence)"))
    handles.append(Patch(facecolor=BLOCK_TINTS[0], edgecolor="#7d8a99", label="block"))
    for sev in ("error", "warning", "note"):
        if any(f.severity == sev for f in shown):
            c, m = SEVERITY_STYLE[sev]
            handles.append(Line2D([], [], color=c, marker=m, linestyle="none", label=sev))
    h = fig.get_figheight()
    below = 0.36 + SUBTITLE_IN * len(getattr(fig, "seqgen_title", {}).get("subtitle", ()))
    fig.legend(handles=handles, loc="upper left", bbox_to_anchor=(0.42 / FIG_WIDTH_IN, 1 - below / h),
               ncol=len(handles), fontsize=7, frameon=False, handlelength=2.4, columnspacing=1.4)


# --- diff ---------------------------------------------------------------------------------------------------------


def _series_full(table, j, out):
    times = np.asarray(table.ticks, dtype=np.float64) * table.tick_s
    vals = np.asarray(table.values[:, j], dtype=float)
    return times, vals


def _eval(times, vals, at, model):
    if not len(times):
        return np.full(len(at), np.nan)
    if model == "linear" and len(times) > 1:
        return np.interp(at, times, vals)
    idx = np.clip(np.searchsorted(times, at, side="right") - 1, 0, len(times) - 1)
    return vals[idx]


def diff_windows(old_shot, old_compiled, new_shot, new_compiled) -> dict:
    """{output: [(t0, t1), ...]} where the two channel tables make an output take different values.

    Both tables are evaluated (held, or linear for `output_model: linear`) on the union of their change
    times; two values differ when they are more than half a DAC code apart (any change for outputs without
    bits). An output present in only one version differs over the whole of that version.
    """
    oc, nc = _columns(old_compiled), _columns(new_compiled)
    end = max(old_compiled.duration_s, new_compiled.duration_s)
    out: dict[str, list] = {}
    for name in list(new_shot.rig.outputs) + [n for n in old_shot.rig.outputs if n not in new_shot.rig.outputs]:
        if name not in oc or name not in nc:
            if name in oc or name in nc:
                out[name] = [(0.0, end)]
            continue
        o_new = new_shot.rig.outputs[name]
        o_old = old_shot.rig.outputs[name]
        to, vo = _series_full(*oc[name], o_old)
        tn, vn = _series_full(*nc[name], o_new)
        mo = old_shot.rig.devices[o_old.device].output_model
        mn = new_shot.rig.devices[o_new.device].output_model
        u = np.union1d(to, tn)
        a, b = _eval(to, vo, u, mo), _eval(tn, vn, u, mn)
        tol = 0.5 * min(x for x in (o_old.lsb, o_new.lsb)) if (o_old.lsb and o_new.lsb) else \
            1e-9 * max(abs(o_new.hi - o_new.lo), 1e-300)
        if o_new.kind == "digital":
            tol = 0.5
        bad = np.abs(a - b) > tol
        if "linear" in (mo, mn):  # an interval between two change times differs if either end does
            bad = bad | np.r_[bad[1:], False]
        if not np.any(bad):
            continue
        edges = np.r_[u, end if end > u[-1] else u[-1]]
        idx = np.flatnonzero(bad)
        runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1)
        spans = []
        for r in runs:
            s, e = float(u[r[0]]), float(edges[r[-1] + 1])
            if e <= s:  # a difference on the very last row (the end marker): give it a visible width
                e = s + max(end, 1e-6) * 1e-4
            spans.append((s, e))
        out[name] = spans
    return out


def diff_figure(old_shot, old_compiled, new_shot, new_compiled, *, old_label="old", new_label="new",
                t_from=None, t_to=None, channels=None, findings=(), title: str | None = None,
                subtitle: str | None = None, all_lanes: bool = False):
    """Overlay two versions of a sequence, one lane per output, with the windows where they differ.

    Outputs that neither version writes get no lane unless `all_lanes` (they are named under the lanes)."""
    end = max(old_shot.duration_s, new_shot.duration_s) or 1e-3
    t0 = 0.0 if t_from is None else float(t_from)
    t1 = end if t_to is None else float(t_to)
    if not t1 > t0:
        raise PlotError(f"empty window: --from {_fmt_seconds(t0)} is not before --to {_fmt_seconds(t1)}")
    names = select_outputs(new_shot.rig, channels) if channels else list(new_shot.rig.outputs)
    if channels:
        try:
            names += [n for n in select_outputs(old_shot.rig, channels) if n not in names]
        except PlotError:
            pass
    else:
        names += [n for n in old_shot.rig.outputs if n not in names]
    windows = diff_windows(old_shot, old_compiled, new_shot, new_compiled)
    names, unwritten = _drop_unwritten(names, written_outputs(old_shot) | written_outputs(new_shot) | set(windows),
                                       all_lanes)
    unwritten_lines = _unwritten_lines(unwritten)
    oc, nc = _columns(old_compiled), _columns(new_compiled)
    rig_of = {n: (new_shot.rig if n in new_shot.rig.outputs else old_shot.rig) for n in names}
    groups: dict[str, list] = {}
    for n in names:
        groups.setdefault(rig_of[n].outputs[n].device, []).append(n)
    left = _left_margin(names)
    width_in = FIG_WIDTH_IN - left - 0.75
    shown = _finding_items(findings, t0, t1)
    blay = _blocks_layout(new_shot.blocks, t0, t1, width_in)
    all_spans = sorted({s for spans in windows.values() for s in spans})
    rows = [_Row("blocks", 0.22 * blay[2] + 0.06), _Row("diff", 0.3)]
    flay = _findings_layout(shown, t0, t1, width_in)
    if shown:
        rows.append(_Row("findings", 0.2 * flay[2] + 0.1))
    for dev, outs in groups.items():
        rows.append(_Row("header", HEADER_IN, dev))
        rows.extend(_Row("lane", LANE_IN.get(rig_of[n].outputs[n].kind, 0.5), n) for n in outs)
    if unwritten_lines:
        rows.append(_Row("unwritten", 0.04 + 0.125 * len(unwritten_lines), unwritten_lines))
    changed = [n for n in names if n in windows]
    foot = [f"old: {old_label}", f"new: {new_label}",
            (f"{len(changed)} output(s) differ: " + ", ".join(changed)) if changed else "no output differs"]
    if abs(old_shot.duration_s - new_shot.duration_s) > 0:
        foot.append(f"duration {_fmt_seconds(old_shot.duration_s)} -> {_fmt_seconds(new_shot.duration_s)}")
    foot = [ln for text in foot for ln in (textwrap.wrap(text, 150, subsequent_indent="    ") or [text])]
    ttl = title or f"diff  ·  {old_label}  ->  {new_label}"
    fig, axes, width_in = _make_figure(rows, left, ttl, foot, (t0, t1), subtitle)
    dev_colour = {d: DEVICE_COLOURS[i % len(DEVICE_COLOURS)] for i, d in enumerate(
        list(new_shot.rig.devices) + [d for d in old_shot.rig.devices if d not in new_shot.rig.devices])}
    for ax, row in zip(axes, rows):
        if row.kind == "blocks":
            _draw_blocks(ax, new_shot.blocks, t0, t1, width_in, blay)
        elif row.kind == "diff":
            _spans(ax, all_spans, DIFF_COLOUR, 0.8)
            _blank(ax)
            ax.set_ylim(0, 1)
            ax.set_label("diff")
            _lane_label(ax, "differs", "#7a5a00", bold=True)
            if not all_spans:
                ax.text(0.5, 0.5, "no difference in any output", transform=ax.transAxes, ha="center", va="center",
                        fontsize=7, color="#555555")
        elif row.kind == "findings":
            _draw_findings(ax, t0, t1, width_in, flay, 0)
        elif row.kind == "header":
            rig = new_shot.rig if row.payload in new_shot.rig.devices else old_shot.rig
            _draw_header(ax, rig.devices.get(row.payload), dev_colour.get(row.payload, "#444444"))
        elif row.kind == "lane":
            n = row.payload
            out = rig_of[n].outputs[n]
            colour = dev_colour.get(out.device, "#444444")
            _shade_blocks(ax, new_shot.blocks, t0, t1)
            _spans(ax, windows.get(n, ()), DIFF_COLOUR, 0.45)
            arrays, series = [], []
            for shot, cols, style in ((old_shot, oc, "old"), (new_shot, nc, "new")):
                if n in cols and n in shot.rig.outputs:
                    o = shot.rig.outputs[n]
                    t, v = hardware_series(cols[n][0], cols[n][1], o, t0, t1)
                    model = shot.rig.devices[o.device].output_model
                    series.append((style, t, v, model))
                    arrays.append(v)
            full = [r for shot, cols in ((old_shot, oc), (new_shot, nc)) if n in shot.rig.outputs
                    for r in _full_range(cols.get(n), shot.rig.outputs[n])]
            ylim = _ylim(arrays, out.kind, full, _code_span(out, arrays))
            peak = max(abs(ylim[0]), abs(ylim[1])) * 0.9
            scale = _display_scale(peak, out.phys_unit if out.kind != "digital" else "")
            for style, t, v, model in series:
                td, vd = _decimate(t, v / scale[0], t0, t1)
                if style == "old":
                    line = _step(ax, td, vd, model, t1, color=OLD_COLOUR, linewidth=1.6, linestyle=(0, (2, 1.5)),
                                 zorder=3)
                else:
                    line = _step(ax, td, vd, model, t1, color=colour, linewidth=1.1, zorder=3.2)
                if line is not None:
                    line.set_gid(f"{style}:{n}")
            dlim = ylim if out.kind == "digital" else (ylim[0] / scale[0], ylim[1] / scale[0])
            flat = _nearly_flat(np.concatenate([a / scale[0] for a in arrays]), dlim) if arrays else None
            _style_lane(ax, out, colour, scale, dlim, flat)
            ax.set_label(f"lane:{n}")
            _lane_label(ax, n + (f" [{scale[1]}]" if scale[1] else "") + ("  *" if n in windows else ""),
                        colour, bold=n in windows)
            _finding_lines(ax, shown)
        elif row.kind == "unwritten":
            _draw_unwritten(ax, row.payload)
    _style_time_axis(axes, t0, t1, axes[0], axes[-1])
    _legend(fig, shown, False, diff=True)
    fig.seqgen_info = {"window": (t0, t1), "lanes": names, "differs": {k: v for k, v in windows.items()},
                       "not_written": list(unwritten)}
    return fig


# --- writing ------------------------------------------------------------------------------------------------------


def figure_bytes(fig, fmt: str, salt: str = "seqgen") -> bytes:
    """Render a figure; the bytes depend only on the figure (no dates, SVG ids fixed by `salt`)."""
    import matplotlib

    fmt = fmt.lower()
    if fmt not in FORMATS:
        raise PlotError(f"cannot write '.{fmt}' pictures; use one of " + ", ".join("." + f for f in FORMATS))
    meta = {"png": {"Software": None}, "svg": {"Date": None}, "pdf": {"CreationDate": None, "Producer": None}}[fmt]
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": salt, "svg.fonttype": "path", "pdf.fonttype": 42}):
        fig.savefig(buf, format=fmt, metadata=meta)
    return buf.getvalue()


def svg_text(fig, prefix: str = "") -> str:
    """The figure as an SVG element (no XML prolog), for inlining in HTML. With `prefix`, every id of the SVG
    and every reference to one (href="#id", url(#id)) is prefixed, so several figures on one page keep their
    ids unique."""
    import re

    text = figure_bytes(fig, "svg", prefix or "seqgen").decode("utf-8")
    start = text.find("<svg")
    text = text[start:] if start >= 0 else text
    if prefix:
        text = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{prefix}{m.group(1)}"', text)
        text = re.sub(r'(href)="#([^"]+)"', lambda m: f'{m.group(1)}="#{prefix}{m.group(2)}"', text)
        text = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{prefix}{m.group(1)})", text)
    return text


def write_atomic(path: str | Path, data: bytes, *, force: bool = False) -> Path:
    """Write bytes to a temporary file beside `path`, then rename it into place."""
    path = Path(path)
    if path.exists() and not force:
        raise OutputExists(f"{path} exists; use --force to replace it")
    if path.exists() and path.is_dir():
        raise OutputExists(f"{path} is a folder; give a file name")
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path


def format_of(path: str | Path) -> str:
    ext = Path(path).suffix.lower().lstrip(".")
    if ext not in FORMATS:
        raise PlotError(f"'{path}': give a file ending in " + ", ".join("." + f for f in FORMATS))
    return ext


def save_figure(fig, path: str | Path, *, force: bool = False) -> Path:
    return write_atomic(path, figure_bytes(fig, format_of(path)), force=force)
