"""The timeline figure of one shot (see the package docstring)."""

from __future__ import annotations

import math

from ...textfmt import fmt_when
from .layout import (
    CLOUD_PANEL_IN, DEVICE_COLOURS, FIG_WIDTH_IN, HEADER_IN, LABEL_PT, LANE_IN, NOTE_PT, _Row, _blank,
    _blocks_layout, _draw_blocks, _draw_findings, _draw_unwritten, _drop_unwritten, _finding_items,
    _finding_lines, _findings_layout, _lanes_by_device, _left_margin, _legend, _make_figure,
    _shade_blocks, _style_time_axis, _unwritten_lines, _window, dense_hint, select_outputs, written_outputs,
)
from .lanes import _columns, _draw_header, _draw_lane, latency_note
from .panels import _draw_clouds, _draw_depth, _draw_freq, _draw_notes, _note_lines, _notes_layout, _physics


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
    from ...findings import summary

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
    ttl = title or (f"{shot.file}  ·  rig {shot.rig.name}  ·  duration {fmt_when(shot.duration_s)}  ·  "
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

