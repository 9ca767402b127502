"""Two versions overlaid: the windows where an output differs (`diff_windows`) and the figure (`diff_figure`)."""

from __future__ import annotations

import textwrap

import numpy as np

from ...compile import compare
from ...textfmt import fmt_when
from .layout import (
    DEVICE_COLOURS, DIFF_COLOUR, FIG_WIDTH_IN, HEADER_IN, LANE_IN, OLD_COLOUR, PlotError, _Row, _blank,
    _blocks_layout, _draw_blocks, _draw_findings, _draw_unwritten, _drop_unwritten, _finding_items,
    _finding_lines, _findings_layout, _lane_label, _left_margin, _legend, _make_figure,
    _shade_blocks, _spans, _style_time_axis, _unwritten_lines, select_outputs, written_outputs,
)
from .lanes import (
    _code_span, _columns, decimate, _display_scale, _draw_header, _full_range, _nearly_flat, _step, _style_lane,
    _ylim, hardware_series,
)


def diff_windows(old_shot, old_compiled, new_shot, new_compiled) -> dict:
    """{output: [(t0, t1), ...]} where the two channel tables make an output take different values.

    The comparison is `compile.compare`, the same as `seqgen diff`'s: both tables evaluated (held, or linear
    for `output_model: linear`) on the union of their rows; one DAC code or more apart is a difference (half
    a level on a digital line). An output present in only one version differs over the whole of that version.
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
        (ta, ja), (tb, jb) = oc[name], nc[name]
        mo = old_shot.rig.devices[o_old.device].output_model
        mn = new_shot.rig.devices[o_new.device].output_model
        grid = compare.TableGrid(ta, tb, mo == "linear", mn == "linear")
        tol = compare.tolerance("digital" in (o_old.kind, o_new.kind), (o_old.lsb, o_new.lsb),
                                (o_old.hi - o_old.lo, o_new.hi - o_new.lo))
        _, _, bad = compare.differing(grid, ta.values[:, ja], tb.values[:, jb], tol)
        if "linear" in (mo, mn):  # an interval between two change times differs if either end does
            bad = bad | np.r_[bad[1:], False]
        if not np.any(bad):
            continue
        u = grid.times
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
        raise PlotError(f"empty window: --from {fmt_when(t0)} is not before --to {fmt_when(t1)}")
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
        foot.append(f"duration {fmt_when(old_shot.duration_s)} -> {fmt_when(new_shot.duration_s)}")
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
                td, vd = decimate(t, v / scale[0], t0, t1)
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

