"""The monotone piecewise cubic (PCHIP) of calibration tables and ramp shape tables, in numpy alone.

scipy's `PchipInterpolator` gives the same numbers, but importing `scipy.interpolate` costs more start-up
time than a whole `seqgen check`; this module repeats its arithmetic step by step (same operations in the
same order), so the values agree with scipy's to the last bit and the build tables do not change.

Slopes at the points (F. N. Fritsch and J. Butland, SIAM J. Sci. Stat. Comput. 5, 300 (1984); the
monotonicity conditions of F. N. Fritsch and R. E. Carlson, SIAM J. Numer. Anal. 17, 238 (1980); from
memory): with h_k = x_{k+1} - x_k and m_k = (y_{k+1} - y_k) / h_k, an interior slope is 0 where m_{k-1} and
m_k differ in sign or either is 0, else the weighted harmonic mean
    1 / d_k = (w1 / m_{k-1} + w2 / m_k) / (w1 + w2),  w1 = 2 h_k + h_{k-1},  w2 = h_k + 2 h_{k-1};
an end slope is the one-sided three-point estimate, set to 0 if its sign differs from the end interval's
slope and to 3 m_0 if it exceeds that where the data turn. Two points: the straight line.

Each piece is the cubic Hermite polynomial c0 u^3 + c1 u^2 + c2 u + c3 in u = x - x_i on [x_i, x_{i+1}),
the last piece closed at x_n.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, eq=False)
class Pchip:
    """A monotone piecewise cubic: breakpoints `x` (n,), coefficients `c` (4, n - 1), highest power first
    (the layout of scipy's PPoly); `extrapolate`: continue the end pieces beyond the table, else NaN there."""

    x: np.ndarray
    c: np.ndarray
    extrapolate: bool = False

    def __call__(self, t) -> np.ndarray:
        return evaluate(self, t)


def _end_slope(h0, h1, m0, m1):
    """One-sided three-point slope at an end, kept from overshooting (scipy's order of operations)."""
    d = ((2 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
    if np.sign(d) != np.sign(m0):
        return 0.0
    if np.sign(m0) != np.sign(m1) and abs(d) > 3.0 * abs(m0):
        return 3.0 * m0
    return d


def slopes(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """The slope dy/dx of the monotone cubic at each point (x strictly increasing, n >= 2)."""
    h = x[1:] - x[:-1]
    m = (y[1:] - y[:-1]) / h
    if len(x) == 2:
        return np.array([m[0], m[0]])
    sm = np.sign(m)
    zero = (sm[1:] != sm[:-1]) | (m[1:] == 0) | (m[:-1] == 0)
    w1 = 2 * h[1:] + h[:-1]
    w2 = h[1:] + 2 * h[:-1]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):  # the masked points are set to 0 below
        whmean = (w1 / m[:-1] + w2 / m[1:]) / (w1 + w2)
        inner = 1.0 / whmean
    d = np.zeros_like(y)
    d[1:-1] = np.where(zero, 0.0, inner)
    d[0] = _end_slope(h[0], h[1], m[0], m[1])
    d[-1] = _end_slope(h[-1], h[-2], m[-1], m[-2])
    return d


def pchip(x, y, *, extrapolate: bool = False) -> Pchip:
    """The monotone cubic through the points (x_i, y_i); x strictly increasing, at least two points, all
    finite (ValueError otherwise, as scipy's)."""
    x = np.array(x, dtype=float)
    y = np.array(y, dtype=float)
    if x.ndim != 1 or y.shape != x.shape:
        raise ValueError("pchip: x and y must be 1-D and of the same length")
    if len(x) < 2:
        raise ValueError("pchip: at least two points are needed")
    if not (np.all(np.isfinite(x)) and np.all(np.isfinite(y))):
        raise ValueError("pchip: x and y must be finite")
    h = np.diff(x)
    if np.any(h <= 0):
        raise ValueError("pchip: x must be strictly increasing")
    d = slopes(x, y)
    # the cubic Hermite coefficients in the order scipy's CubicHermiteSpline forms them
    slope = np.diff(y) / h
    t = (d[:-1] + d[1:] - 2 * slope) / h
    c = np.stack((t / h, (slope - d[:-1]) / h - t, d[:-1], y[:-1]))
    x.setflags(write=False)
    c.setflags(write=False)
    return Pchip(x, c, bool(extrapolate))


def evaluate(pp: Pchip, t) -> np.ndarray:
    """The cubic at t (any shape; the result has t's shape, NaN outside the table unless it extrapolates).

    As scipy's PPoly: the piece whose left breakpoint is at or below t (the last piece at the last
    breakpoint), u = t - x_i, and c3 + c2 u + c1 u^2 + c0 u^3 summed in that order with u^2 = u u and
    u^3 = u^2 u.
    """
    t = np.asarray(t, dtype=float)
    flat = t.ravel()
    xb, c = pp.x, pp.c
    i = np.clip(np.searchsorted(xb, flat, side="right") - 1, 0, len(xb) - 2)
    u = flat - xb[i]
    z = u * u
    res = 0.0 + c[3, i]  # 0.0 + as scipy's sum starts from 0.0 (turns a -0.0 into 0.0)
    res = res + c[2, i] * u
    res = res + c[1, i] * z
    z = z * u
    res = res + c[0, i] * z
    outside = ~((xb[0] <= flat) & (flat <= xb[-1]))
    if pp.extrapolate:
        outside = np.isnan(flat)
    if outside.any():
        res = np.where(outside, np.nan, res)
    return res.reshape(t.shape)
