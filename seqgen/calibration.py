"""Calibration maps between physical units and output units (vectorised)."""

from __future__ import annotations

import numpy as np
from scipy.interpolate import PchipInterpolator

from .model import Calibration, Output


def _pchip(x, y):
    return PchipInterpolator(np.asarray(x, float), np.asarray(y, float), extrapolate=True)


def to_output(out: Output, phys) -> np.ndarray:
    """Physical value(s) -> output unit. Tables use a monotone cubic (PCHIP)."""
    x = np.asarray(phys, dtype=float)
    cal = out.calibration
    if cal is None:
        return x
    if cal.kind == "linear":
        return cal.slope * x + cal.offset
    xp, yp = cal.table_phys, cal.table_out
    if xp[0] > xp[-1]:
        xp, yp = xp[::-1], yp[::-1]
    return _pchip(xp, yp)(x)


def to_physical(out: Output, value) -> np.ndarray:
    y = np.asarray(value, dtype=float)
    cal = out.calibration
    if cal is None:
        return y
    if cal.kind == "linear":
        return (y - cal.offset) / cal.slope
    xp, yp = np.asarray(cal.table_phys), np.asarray(cal.table_out)
    if yp[0] > yp[-1]:
        xp, yp = xp[::-1], yp[::-1]
    return _pchip(yp, xp)(y)


def is_monotonic(values) -> bool:
    d = np.diff(np.asarray(values, float))
    return bool(np.all(d > 0) or np.all(d < 0))


def describe(cal: Calibration) -> str:
    if cal.kind == "linear":
        return f"linear: out = {cal.slope:g} * x + {cal.offset:g}"
    return f"table of {len(cal.table_phys)} points"
