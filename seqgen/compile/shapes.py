"""Ramp shapes: progress s in [0, 1] -> fraction f in [0, 1] of the way from a
ramp's start value to its end value, with f(0) = 0 and f(1) = 1 exactly.

Shapes (all dimensionless; T = ramp duration in s, tau = time constant in s):

- ``linear``        f = s
- ``exponential``   f = (1 - exp(-s T/tau)) / (1 - exp(-T/tau)), a charging
                    exponential rescaled to land on the end value at s = 1;
                    tau < 0 curves the other way (slow start, fast finish)
- ``smooth``        f = (1 - cos(pi s)) / 2 (raised cosine: zero slope at both ends)
- ``minimum_jerk``  f = 10 s^3 - 15 s^4 + 6 s^5 (zero slope and curvature at
                    both ends; the polynomial of Phys. Rev. Lett. 104, 063002 (2010))
- ``table``         user points (s_i, f_i), s from 0 to 1, joined by monotone
                    piecewise-cubic interpolation, PCHIP (monotonicity
                    conditions: SIAM J. Numer. Anal. 17, 238 (1980); the
                    slope rule: SIAM J. Sci. Stat. Comput. 5, 300 (1984);
                    seqgen.interp, equal to scipy's PchipInterpolator),
                    which never overshoots the data.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from ..interp import Pchip, pchip

SHAPES = ("linear", "exponential", "smooth", "minimum_jerk", "table")

# |T/tau| below this is treated as the linear limit (1 - exp(-x) ~ x to 1e-12)
_LINEAR_LIMIT = 1e-12
# progress values this far outside [0, 1] are float noise and are clipped
_S_SLACK = 1e-9


def _rate(duration_s: float, tau_s: float | None) -> float:
    """r = T / tau for the exponential shape (0 means the linear limit)."""
    if tau_s is None:
        raise ValueError("the exponential shape needs a time constant tau_s")
    tau = float(tau_s)
    if np.isnan(tau):
        raise ValueError("tau_s must be a number, got NaN")
    if tau == 0.0:
        raise ValueError("tau_s must not be zero")
    if np.isinf(tau):
        return 0.0
    return duration_s / tau


def _check_duration(duration_s: float) -> float:
    d = float(duration_s)
    if not (np.isfinite(d) and d > 0):
        raise ValueError(f"duration_s must be a positive finite time in s, got {duration_s!r}")
    return d


@lru_cache(maxsize=256)
def _table_interpolator(table: tuple[tuple[float, float], ...]) -> Pchip:
    """Validated PCHIP interpolator for a shape table (cached: tables are tuples)."""
    try:
        pts = np.asarray(table, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"shape table must be a list of [s, f] pairs: {exc}") from None
    if pts.ndim != 2 or pts.shape[1] != 2 or pts.shape[0] < 2:
        raise ValueError("shape table must hold at least two [s, f] pairs")
    s, f = pts[:, 0], pts[:, 1]
    if not np.all(np.isfinite(pts)):
        raise ValueError("shape table entries must be finite numbers")
    if s[0] != 0.0:
        raise ValueError(f"shape table must start at s = 0 (progress), it starts at s = {s[0]:g}")
    if s[-1] != 1.0:
        raise ValueError(f"shape table must end at s = 1 (progress), it ends at s = {s[-1]:g}")
    steps = np.diff(s)
    if np.any(steps <= 0):
        i = int(np.argmax(steps <= 0))
        raise ValueError(f"shape table s values must be strictly increasing: entry {i + 1} (s = {s[i + 1]:g}) "
                         f"does not exceed entry {i} (s = {s[i]:g})")
    if f[0] != 0.0 or f[-1] != 1.0:
        raise ValueError(f"shape table must go from f = 0 at s = 0 to f = 1 at s = 1, "
                         f"it goes from {f[0]:g} to {f[-1]:g}")
    # PCHIP stays within the data's range, so f in [0, 1] keeps the ramp between
    # its endpoints and the range check on the endpoints stays valid
    if np.any(f < 0) or np.any(f > 1):
        raise ValueError("shape table f values must lie in [0, 1] (the ramp may not overshoot its endpoints)")
    return pchip(s, f, extrapolate=False)


def _progress(s) -> np.ndarray:
    s = np.asarray(s, dtype=float)
    if s.size and not np.all(np.isfinite(s)):
        raise ValueError("progress s must be finite")
    if s.size and (s.min() < -_S_SLACK or s.max() > 1 + _S_SLACK):
        raise ValueError(f"progress s must lie in [0, 1], got values in [{s.min():g}, {s.max():g}]")
    return np.clip(s, 0.0, 1.0)


def _exponential(s: np.ndarray, r: float) -> np.ndarray:
    if abs(r) < _LINEAR_LIMIT:
        return s.copy()
    if r > 0:
        return np.expm1(-r * s) / np.expm1(-r)
    # r < 0: rewrite with q = -r > 0 so nothing overflows for large |T/tau|:
    # (e^{qs} - 1)/(e^q - 1) = e^{q(s-1)} (1 - e^{-qs}) / (1 - e^{-q})
    q = -r
    return np.exp(q * (s - 1.0)) * (np.expm1(-q * s) / np.expm1(-q))


def shape_fraction(shape: str, s: np.ndarray, *, duration_s: float, tau_s: float | None = None,
                   table: tuple[tuple[float, float], ...] | None = None) -> np.ndarray:
    """Fraction f(s) of the way from start to end value at progress s (see the
    module docstring for the formulas). s is dimensionless, duration_s and tau_s
    in seconds (tau_s only for ``exponential``; ``table`` needs ``table``).
    Returns an array shaped like s, with f = 0 exactly at s = 0 and 1 at s = 1."""
    duration_s = _check_duration(duration_s)
    s = _progress(s)
    if shape == "linear":
        f = s.copy()
    elif shape == "exponential":
        f = _exponential(s, _rate(duration_s, tau_s))
    elif shape == "smooth":
        f = 0.5 * (1.0 - np.cos(np.pi * s))
    elif shape == "minimum_jerk":
        f = s ** 3 * (10.0 + s * (-15.0 + 6.0 * s))
    elif shape == "table":
        if table is None:
            raise ValueError("the table shape needs a table of [s, f] points")
        f = _table_interpolator(tuple(map(tuple, table)))(s)
    else:
        raise ValueError(f"unknown ramp shape {shape!r}; known shapes: {', '.join(SHAPES)}")
    # pin the ends exactly so a ramp lands on its end value to the last bit, and
    # keep round-off (e.g. the polynomial near s = 1) from stepping outside [0, 1]
    f = np.where(s == 0.0, 0.0, np.where(s == 1.0, 1.0, f))
    return np.clip(f, 0.0, 1.0)


def shape_derivative_bounds(shape: str, *, duration_s: float, tau_s: float | None = None,
                            table: tuple[tuple[float, float], ...] | None = None) -> tuple[float, float]:
    """(max |df/ds|, max |d^2f/ds^2|) over s in [0, 1], dimensionless (divide by
    T and T^2 for rates in 1/s and 1/s^2). Closed forms by differentiation:

    - linear: (1, 0)
    - smooth: (pi/2, pi^2/2)
    - minimum_jerk: f' = 30 s^2 (1-s)^2 peaks at s = 1/2 -> 15/8;
      f'' = 60 s (1-s)(1-2s) peaks at s = (3 -+ sqrt 3)/6 -> 10/sqrt(3)
    - exponential, r = T/tau: f' = r e^{-rs}/(1-e^{-r}) is largest at the fast
      end: |r|/(1-e^{-|r|}); likewise |f''| <= r^2/(1-e^{-|r|})
    - table: exact maxima of the PCHIP cubic pieces (f' quadratic, f'' linear
      on each piece).
    """
    duration_s = _check_duration(duration_s)
    if shape == "linear":
        return 1.0, 0.0
    if shape == "smooth":
        return np.pi / 2, np.pi ** 2 / 2
    if shape == "minimum_jerk":
        return 15.0 / 8.0, 10.0 / np.sqrt(3.0)
    if shape == "exponential":
        r = abs(_rate(duration_s, tau_s))
        if r < _LINEAR_LIMIT:
            return 1.0, r
        denom = -np.expm1(-r)
        return float(r / denom), float(r * r / denom)
    if shape == "table":
        if table is None:
            raise ValueError("the table shape needs a table of [s, f] points")
        pp = _table_interpolator(tuple(map(tuple, table)))
        c = pp.c  # piece i: c0 u^3 + c1 u^2 + c2 u + c3, u = s - s_i in [0, h_i]
        h = np.diff(pp.x)
        c0, c1, c2 = c[0], c[1], c[2]
        d1_ends = np.maximum(np.abs(c2), np.abs(3 * c0 * h ** 2 + 2 * c1 * h + c2))
        with np.errstate(divide="ignore", invalid="ignore"):
            u = np.where(c0 != 0, -c1 / (3 * c0), -1.0)
        inside = (u > 0) & (u < h)
        d1_vertex = np.where(inside, np.abs(3 * c0 * u ** 2 + 2 * c1 * u + c2), 0.0)
        d2 = np.maximum(np.abs(2 * c1), np.abs(6 * c0 * h + 2 * c1))
        return float(np.max(np.maximum(d1_ends, d1_vertex))), float(np.max(d2))
    raise ValueError(f"unknown ramp shape {shape!r}; known shapes: {', '.join(SHAPES)}")


PULSE_ENVELOPES = ("blackman", "gaussian")


def pulse_envelope(shape: str, s: np.ndarray) -> np.ndarray:
    """Pulse envelopes of peak 1 on progress s in [0, 1], 0 at both ends (what a shaped `pulse` writes).

    - "blackman": 0.42 - 0.5 cos(2 pi s) + 0.08 cos(4 pi s) (Blackman window, Proc. IEEE 66, 51 (1978));
    - "gaussian": truncated at +-3 sigma (sigma = duration / 6) and shifted down by its edge value so the
      output starts and ends at 0 (no step at the edges).
    """
    s = np.asarray(s, dtype=float)
    if shape == "blackman":
        return 0.42 - 0.5 * np.cos(2 * np.pi * s) + 0.08 * np.cos(4 * np.pi * s)
    if shape != "gaussian":
        raise ValueError(f"unknown pulse envelope {shape!r}; known: {', '.join(PULSE_ENVELOPES)}")
    g = np.exp(-0.5 * ((s - 0.5) * 6.0) ** 2)
    edge = np.exp(-0.5 * 9.0)
    return (g - edge) / (1 - edge)
