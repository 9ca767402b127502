"""One lane per output: the series drawn (hardware from the channel table, intended from the segments),
their display scale and y range, and the device header above a group of lanes."""

from __future__ import annotations

import math

import numpy as np

from ...calibration import to_output, to_physical
from ...textfmt import fmt_si, fmt_when
from .layout import INTENDED_COLOUR, LABEL_PT, MAX_POINTS_PER_LANE, TICK_PT, _blank, _lane_label


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


def decimate(t: np.ndarray, v: np.ndarray, t0: float, t1: float, nbins: int = MAX_POINTS_PER_LANE):
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
    from ...values import value_at  # the one evaluator of a shot's segments, shared with the checks

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


def _draw_header(ax, device, colour):
    _blank(ax)
    ax.tick_params(axis="x", length=0)
    ax.set_label(f"device:{device.name}" if device is not None else "device:?")
    text = device.name if device is None else (f"{device.name}   timebase {fmt_si(device.timebase_hz, 'Hz')}, "
                                               f"{device.output_model} between rows")
    ax.annotate(text, xy=(0, 0), xycoords="axes fraction", xytext=(-34 - 90, 2), textcoords="offset points",
                ha="left", va="bottom", fontsize=LABEL_PT, fontweight="bold", color=colour)
    ax.axhline(0.0, color=colour, linewidth=1.0)
    ax.set_ylim(0, 1)


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


def latency_note(out, t0: float, t1: float, width_in: float) -> str | None:
    """The lane note of an output whose channel table is sent early by its latency, when the shift shows in the
    window (at least one point wide), e.g. "command 3.2 ms early on, 2.1 ms early off (latency)"."""
    rise, fall = float(out.latency_rise_s or 0.0), float(out.latency_fall_s or 0.0)
    s_per_pt = (t1 - t0) / (width_in * 72.0)
    if max(rise, fall) < s_per_pt:
        return None
    if rise == fall:
        return f"command {fmt_when(rise)} early (latency)"
    return f"command {fmt_when(rise)} early on, {fmt_when(fall)} early off (latency)"


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
        t, v = decimate(hw[0], hw[1] / factor, t0, t1)
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
    # a line of the rig's wiring carries the edges seqgen generates (README "Wiring")
    wired = any(out.name in (d.start_on, d.step_on, d.clock_on) for d in shot.rig.devices.values())
    _lane_label(ax, out.name + (f" [{scale[1]}]" if scale[1] else "") + (" (wiring)" if wired else ""), colour,
                note=note)

