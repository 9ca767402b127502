"""Output level: where the compiled channel tables of two versions differ.

The comparison itself (grid and tolerance) is `compile.compare`, shared with the plot's diff windows: both
tables of a device on the union of their ticks, and a column differs where the two values are one output
code (`Output.lsb`) or more apart. Windows of consecutive differing rows are reported with their maximum
deviation, in output units and, through each version's calibration, in physical units.
"""

from __future__ import annotations

import numpy as np

from ..calibration import to_physical
from ..compile import compare
from . import fmt
from .model import Change, Column, Version

MAX_WINDOWS = 200  # listed per output in the JSON report (all are counted)


def tolerance(ca: Column, cb: Column, va: np.ndarray, vb: np.ndarray) -> float:
    """The comparison's tolerance (compile.compare.tolerance: one output code or more is a difference) for
    two columns; a build folder's column has no Output, so its range comes from the values."""
    outs = [c.output for c in (ca, cb) if c.output is not None]
    spans = [o.hi - o.lo for o in outs] or [float(max(np.ptp(va) if len(va) else 0.0,
                                                       np.ptp(vb) if len(vb) else 0.0, 1.0))]
    return compare.tolerance("digital" in (ca.kind, cb.kind), [o.lsb for o in outs], spans)


def compare_column(grid: compare.TableGrid, ya: np.ndarray, yb: np.ndarray, tol: float):
    """Windows where a column differs: (starts, ends, peak, arg max, old and new values on the grid, differs)
    or None."""
    ua, ub, bad = compare.differing(grid, ya, yb, tol)
    if not bad.any():
        return None
    d = np.abs(ub - ua)
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
        grid = compare.TableGrid(a, b, lin_a, lin_b)
        for c in common:
            ch = _column_change(c, dev, a, b, cols_a[c], cols_b[c], old.columns.get(c), new.columns.get(c), grid)
            if ch is not None:
                out.append(ch)
    return out


def _column_change(name, dev, a, b, ja, jb, ca, cb, grid: compare.TableGrid):
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
