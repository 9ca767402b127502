"""Physics panels under the lanes: trap depth and frequencies along every trap ramp (a `trap_ramp` or a plain
ramp of a trap beam), the falling cloud at each
image, and the physics notes strip.

Every physics prediction the plot draws is fetched in `_physics`, the one place that calls into the checks' reports
(so it can be repointed to a prediction stage without touching the drawing)."""

from __future__ import annotations

import math
import textwrap

import numpy as np

from ...textfmt import fmt_length, fmt_when

from .layout import (
    AXIS_COLOURS, AXIS_STYLES, CLOUD_PANEL_IN, CLOUD_TEXT_ROW_PT, G_N, NOTE_MARKER_PT, TICK_PT, _blank,
    _label_x, _lane_label, _place,
)


def _physics(shot, t0, t1):
    """Data for the physics panels in [t0, t1]: trap curves, clouds at images, physics notes."""
    from scipy import constants as sc

    out = {"trap": [], "clouds": [], "notes": []}
    from ...predict import image_prediction, report_rows, trap_stage, trap_writes

    if shot.sample is None:
        return out
    seen = set()
    try:
        writes = trap_writes(shot)  # trap_ramps and plain ramps of trap beams alike: what is played
    except Exception:
        writes = ()
    for act in writes:
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
                                  "name": img.args.get("setup", ""), "components": comps,
                                  "edge": c.reach_along((0.0, 0.0, 1.0))})  # the panel's axis is height
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
        edge = c["edge"]  # the cloud's reach along the vertical, the panel's axis (a cigar lies flat)
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
        texts.append((c["t"], c["t"], f"{c['name']}: time of flight {fmt_when(cl['tof'])}, centre "
                      f"{fmt_length(cl['drop'], 3, unit='mm')} below release, {cl['size_kind']} "
                      f"{fmt_length(cl['size'], 3, unit='um')}"))
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
        text = f"{k + 1}  t={fmt_when(r['time_s'])} [{r.get('block', '')}] {r['kind']}: " + "; ".join(r.get("items", ()))
        wrapped = textwrap.wrap(text, width=150, subsequent_indent="     ")
        lines.extend(wrapped or [text])
    return lines

