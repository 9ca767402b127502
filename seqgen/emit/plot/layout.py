"""Shared pieces of the plots: the look (colours, sizes), argument parsing, label placement, the figure's
rows and the strips every figure has (blocks, findings, unwritten outputs, legend)."""

from __future__ import annotations

import fnmatch
import math
import textwrap
from dataclasses import dataclass

import numpy as np

from ...textfmt import fmt_when


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


FINDING_MARKER_PT = 6.5  # marker sizes (points) in the findings and physics-notes strips


NOTE_MARKER_PT = 4.0


CLOUD_PANEL_IN = 0.8  # height of the cloud panel; its texts take rows of CLOUD_TEXT_ROW_PT at the top


CLOUD_TEXT_ROW_PT = 11.0


G_N = 9.80665  # standard gravity, m/s^2 (exact, SI Brochure)


class PlotError(ValueError):
    """Bad plot request (unknown channel pattern, empty window, unknown format): report, never a traceback."""


def parse_time(text: str) -> float:
    """'2.6 s', '150 ms', '20 us' -> seconds. A bare number is refused (give a unit)."""
    from ...resolve.units import UnitError, dims_of, parse_simple

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
    label = f"time [{unit}]" if not offset else f"time - {fmt_when(offset)} [{unit}]"
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


def _window(shot, t_from, t_to):
    end = shot.duration_s if shot.duration_s > 0 else 1e-3
    t0 = 0.0 if t_from is None else float(t_from)
    t1 = end if t_to is None else float(t_to)
    if not t1 > t0:
        raise PlotError(f"empty window: --from {fmt_when(t0)} is not before --to {fmt_when(t1)}")
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
    """Outputs the shot writes at least once, and the rig's wiring lines, which carry generated edges (every
    other output holds its safe value all shot)."""
    wiring = {line for d in shot.rig.devices.values() for line in (d.start_on, d.step_on, d.clock_on)
              if line in shot.rig.outputs}
    return {seg.output for seg in shot.segments} | wiring


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
    cmd = f"--from '{fmt_when(lo)}'" + (f" --to '{fmt_when(hi)}'" if hi < t1 else "")
    text = (f"most blocks ({len(late)} of {len(visible)}) fall in {fmt_when(lo)} to "
            f"{fmt_when(min(hi, t1))}: use {cmd} to see them apart")
    return (lo, min(hi, t1)), text


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

