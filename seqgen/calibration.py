"""Calibration maps between physical units and output units (vectorised)."""

from __future__ import annotations

import numpy as np

from .interp import pchip
from .model import Calibration, Output


def _pchip(x, y):
    return pchip(np.asarray(x, float), np.asarray(y, float), extrapolate=False)


def _table(cal: Calibration) -> tuple[np.ndarray, np.ndarray]:
    """The table's points with the physical values ascending."""
    xp, yp = np.asarray(cal.table_phys, float), np.asarray(cal.table_out, float)
    return (xp[::-1], yp[::-1]) if xp[0] > xp[-1] else (xp, yp)


def _extend(x, xp, yp, inside):
    """Straight-line continuation beyond a table with the slopes of its first and last intervals.

    A cubic extrapolated past the table can turn around (a calibration must stay
    monotonic); values outside the table are flagged by hardware.outside-calibration.
    """
    within = (x >= xp[0]) & (x <= xp[-1])
    if within.all():  # the usual case (a NaN is never within): nothing to continue
        return np.asarray(inside, dtype=float)
    lo_slope = (yp[1] - yp[0]) / (xp[1] - xp[0])
    hi_slope = (yp[-1] - yp[-2]) / (xp[-1] - xp[-2])
    out = np.where(x < xp[0], yp[0] + (x - xp[0]) * lo_slope, yp[-1] + (x - xp[-1]) * hi_slope)
    return np.where(within, inside, out)


def to_output(out: Output, phys) -> np.ndarray:
    """Physical value(s) -> output unit. Tables use a monotone cubic (PCHIP)
    within the table and straight lines beyond it."""
    x = np.asarray(phys, dtype=float)
    cal = out.calibration
    if cal is None:
        return x
    if cal.kind == "linear":
        return cal.slope * x + cal.offset
    xp, yp = _table(cal)
    inside = _pchip(xp, yp)(np.clip(x, xp[0], xp[-1]))
    return _extend(x, xp, yp, inside)


def to_physical(out: Output, value) -> np.ndarray:
    """Output unit -> physical value(s): the inverse of to_output.

    Within a table the monotone cubic is inverted by bisection on each value's
    table interval (to_physical(to_output(x)) returns x to about 1e-12 of the
    table's span); beyond it the straight-line continuation is inverted directly.
    """
    y = np.asarray(value, dtype=float)
    cal = out.calibration
    if cal is None:
        return y
    if cal.kind == "linear":
        return (y - cal.offset) / cal.slope
    xp, yp = _table(cal)
    forward = _pchip(xp, yp)
    # walk the table in the direction of rising output: ys ascending, xs the matching inputs
    ys, xs = (yp, xp) if yp[-1] > yp[0] else (yp[::-1], xp[::-1])
    flat = y.ravel()
    k = np.clip(np.searchsorted(ys, flat) - 1, 0, len(ys) - 2)
    a, b = xs[k], xs[k + 1]  # the output rises from a to b (a > b when the table falls)
    lo, hi = np.zeros_like(flat), np.ones_like(flat)
    target = np.clip(flat, ys[0], ys[-1])
    for _ in range(64):  # halves the bracket each time: 64 halvings exhaust a double
        mid = 0.5 * (lo + hi)
        below = forward(a + mid * (b - a)) < target
        lo, hi = np.where(below, mid, lo), np.where(below, hi, mid)
    inside = a + 0.5 * (lo + hi) * (b - a)
    x = _extend(flat, ys, xs, inside)  # the inverse of a straight line is a straight line
    return x.reshape(y.shape) if y.ndim else float(x[0])


def is_monotonic(values) -> bool:
    d = np.diff(np.asarray(values, float))
    return bool(np.all(d > 0) or np.all(d < 0))


def describe(cal: Calibration) -> str:
    if cal.kind == "linear":
        return f"linear: out = {cal.slope:g} * x + {cal.offset:g}"
    return f"table of {len(cal.table_phys)} points"
