"""Output level: where the compiled channel tables of two versions differ.

Both tables of a device are evaluated on the union of their ticks (hold model:
forward fill with `searchsorted`; a linear-output device interpolates), all in
numpy. A column differs where the two values are more than the channel's
resolution apart (`Output.lsb`, one output code: a one-code difference is
sampling, not a change; 0.5 on a digital line; a relative 1e-9 of the range
for an unquantized output or a build folder, whose manifest has no resolution). Windows of
consecutive differing rows are reported with their maximum deviation, in
output units and, through each version's calibration, in physical units.
"""

from __future__ import annotations

import numpy as np

from ..calibration import to_physical
from . import fmt
from .model import Change, Column, Version

MAX_WINDOWS = 200  # listed per output in the JSON report (all are counted)


def tolerance(ca: Column, cb: Column, va: np.ndarray, vb: np.ndarray) -> float:
    """Differences above this count: more than one output code (Output.lsb) of the coarser version, more than
    half a level on a digital line, and a relative 1e-9 of the range on an unquantized output."""
    if "digital" in (ca.kind, cb.kind):
        return 0.5
    lsbs = [c.output.lsb for c in (ca, cb) if c.output is not None]
    lsb = max(lsbs) if lsbs else 0.0
    if lsb > 0:
        return lsb * (1 + 1e-6)
    spans = [c.output.hi - c.output.lo for c in (ca, cb) if c.output is not None]
    span = max(spans) if spans else float(max(np.ptp(va) if len(va) else 0.0, np.ptp(vb) if len(vb) else 0.0, 1.0))
    return 1e-9 * span


def _union(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Sorted union of two sorted arrays (concatenate, sort, drop repeats)."""
    c = np.concatenate([x, y])
    c.sort(kind="stable")
    if len(c) > 1:
        c = c[np.r_[True, c[1:] != c[:-1]]]
    return c


class DeviceGrid:
    """Both tables of one device on the union of their ticks (or times, when the timebases differ)."""

    def __init__(self, a, b, lin_a: bool, lin_b: bool):
        if a.tick_s == b.tick_s:
            xa, xb, scale = a.ticks, b.ticks, a.tick_s
        else:  # different timebases (a rig change): compare on times
            xa, xb, scale = a.ticks * a.tick_s, b.ticks * b.tick_s, 1.0
        self.xa, self.xb, self.lin_a, self.lin_b = xa, xb, lin_a, lin_b
        self.u = _union(xa, xb)
        self.times = self.u * scale
        # hold model: the row in force at each union point (the last row at or before it)
        self.ia = np.clip(np.searchsorted(xa, self.u, side="right") - 1, 0, max(len(xa) - 1, 0))
        self.ib = np.clip(np.searchsorted(xb, self.u, side="right") - 1, 0, max(len(xb) - 1, 0))

    def old(self, col: np.ndarray) -> np.ndarray:
        return np.interp(self.u, self.xa, col) if self.lin_a and len(col) > 1 else col[self.ia]

    def new(self, col: np.ndarray) -> np.ndarray:
        return np.interp(self.u, self.xb, col) if self.lin_b and len(col) > 1 else col[self.ib]


def compare_column(grid: DeviceGrid, ya: np.ndarray, yb: np.ndarray, tol: float):
    """Windows where a column differs: (starts, ends, peak, arg max, old and new values on the grid, |dy|) or None."""
    ua, ub = grid.old(ya), grid.new(yb)
    d = np.abs(ub - ua)
    bad = d > tol
    if not bad.any():
        return None
    edges = np.diff(np.r_[0, bad.astype(np.int8), 0])
    starts = np.nonzero(edges == 1)[0]
    ends = np.nonzero(edges == -1)[0]  # exclusive
    # peak of each window, vectorised: sort the differing rows by (window, -deviation), take each window's first
    pos = np.nonzero(bad)[0]
    wid = np.searchsorted(starts, pos, side="right") - 1
    order = np.lexsort((-d[pos], wid))
    first = np.unique(wid[order], return_index=True)[1]
    arg = pos[order][first]
    peak = d[arg]
    return starts, ends, peak, arg, ua, ub, bad


def output_changes(old: Version, new: Version) -> list:
    out = []
    ta = {t.device: t for t in old.tables}
    tb = {t.device: t for t in new.tables}
    if old.duration_s is not None and new.duration_s is not None and not fmt.close_t(old.duration_s, new.duration_s):
        out.append(Change("output", "duration-changed", "duration",
                          f"sequence duration {fmt.t(old.duration_s)} -> {fmt.t(new.duration_s)} "
                          f"({fmt.dt(new.duration_s - old.duration_s)})", fmt.t(old.duration_s), fmt.t(new.duration_s), 95,
                          {"old_s": old.duration_s, "new_s": new.duration_s}))
    for dev in sorted(set(ta) - set(tb)):
        out.append(Change("output", "device-removed", dev, f"device {dev} no longer has a table ({len(ta[dev].ticks)} rows)",
                          str(len(ta[dev].ticks)), None, 75))
    for dev in sorted(set(tb) - set(ta)):
        out.append(Change("output", "device-added", dev, f"device {dev} has a new table ({len(tb[dev].ticks)} rows)",
                          None, str(len(tb[dev].ticks)), 75))
    for dev in sorted(set(ta) & set(tb)):
        a, b = ta[dev], tb[dev]
        if len(a.ticks) != len(b.ticks):
            out.append(Change("output", "rows-changed", dev, f"device {dev}: {len(a.ticks)} -> {len(b.ticks)} rows "
                              f"({len(b.ticks) - len(a.ticks):+d})", str(len(a.ticks)), str(len(b.ticks)), 10,
                              {"old": int(len(a.ticks)), "new": int(len(b.ticks)),
                               "delta": int(len(b.ticks)) - int(len(a.ticks))}))
        cols_a = {c: j for j, c in enumerate(a.columns)}
        cols_b = {c: j for j, c in enumerate(b.columns)}
        for c in sorted(set(cols_a) - set(cols_b)):
            out.append(Change("output", "output-removed", c, f"output {c} ({dev}) is no longer in the table", c, None, 72,
                              {"device": dev}))
        for c in sorted(set(cols_b) - set(cols_a)):
            col = b.values[:, cols_b[c]]
            unit = b.units[cols_b[c]]
            out.append(Change("output", "output-added", c, f"output {c} ({dev}) is new in the table "
                              f"(values {fmt.q(float(col.min()), unit)} .. {fmt.q(float(col.max()), unit)})", None, c, 72,
                              {"device": dev}))
        lin_a = old.devices.get(dev, {}).get("output_model") == "linear"
        lin_b = new.devices.get(dev, {}).get("output_model") == "linear"
        common = sorted(set(cols_a) & set(cols_b))
        if not common:
            continue
        grid = DeviceGrid(a, b, lin_a, lin_b)
        for c in common:
            ch = _column_change(c, dev, a, b, cols_a[c], cols_b[c], old.columns.get(c), new.columns.get(c), grid)
            if ch is not None:
                out.append(ch)
    return out


def _column_change(name, dev, a, b, ja, jb, ca, cb, grid: DeviceGrid):
    ya, yb = a.values[:, ja], b.values[:, jb]
    ca = ca or Column(name, dev, a.kinds[ja], a.units[ja])
    cb = cb or Column(name, dev, b.kinds[jb], b.units[jb])
    tol = tolerance(ca, cb, ya, yb)
    res = compare_column(grid, ya, yb, tol)
    if res is None:
        return None
    starts, ends, peak, arg, ua, ub, bad = res
    times = grid.times
    end_time = float(times[-1])
    unit = b.units[jb]
    phys = ca.output is not None and cb.output is not None and (ca.output.calibration is not None
                                                                or cb.output.calibration is not None)
    if phys:
        pa = to_physical(ca.output, ua)
        pb = to_physical(cb.output, ub)
        dp = np.abs(pb - pa)
        punit = cb.output.phys_unit
    windows = []
    for k, (s, e, pk, i) in enumerate(zip(starts, ends, peak, arg)):
        if k >= MAX_WINDOWS:
            break
        w = {"start_s": float(times[s]), "end_s": float(times[e]) if e < len(times) else end_time,
             "max_deviation": float(pk), "at_s": float(times[i]), "old": float(ua[i]), "new": float(ub[i])}
        if phys:
            w["max_deviation_physical"] = float(dp[s:e].max())
            w["old_physical"], w["new_physical"] = float(pa[i]), float(pb[i])
        windows.append(w)
    k_max = int(np.argmax(peak))
    i = int(arg[k_max])
    worst = float(peak[k_max])
    span_out = (cb.output.hi - cb.output.lo) if cb.output is not None else max(float(np.ptp(np.r_[ya, yb])), 1e-300)
    first = windows[0]
    text = (f"output {name} ({dev}) differs in {len(starts)} window(s) from {fmt.t(first['start_s'])}"
            + (f" to {fmt.t(float(times[ends[-1]]) if ends[-1] < len(times) else end_time)}" if len(starts) > 1 else
               f" to {fmt.t(first['end_s'])}")
            + f"; max {fmt.q(worst, unit)} at {fmt.t(float(times[i]))}: "
            + " -> ".join(fmt.pair(float(ua[i]), float(ub[i]), unit, exact=False)))
    data = {"device": dev, "unit": unit, "tolerance": tol, "windows": windows, "window_count": int(len(starts)),
            "max_deviation": worst, "at_s": float(times[i])}
    if phys:
        worst_p = float(dp[bad].max())
        text += f" ({fmt.q(float(pa[i]), punit)} -> {fmt.q(float(pb[i]), punit)}; max physical deviation {fmt.q(worst_p, punit)})"
        data["physical_unit"] = punit
        data["max_deviation_physical"] = worst_p
    return Change("output", "output-differs", name, text, fmt.q(float(ua[i]), unit), fmt.q(float(ub[i]), unit),
                  60 + 20 * min(1.0, worst / span_out), data)
