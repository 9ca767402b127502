"""Adaptive sampling of ramps into table rows, and tick / DAC-code quantization.

A device table holds one row per change. A ramp becomes as few rows as keep the
output the hardware reconstructs within a tolerance of the intended curve at
every tick:

- ``hold`` (step-and-hold, the output keeps each value until the next row).
  A hold segment whose curve covers the range [lo, hi] is best served by the
  midpoint (lo + hi)/2, with error (hi - lo)/2; this module uses that midpoint
  (not the curve value at the row's tick). Rows are placed where the
  cumulative variation sum |dy| crosses multiples of 2 * tolerance, so each
  segment covers a range below 2 * tolerance. Piecewise-constant approximation
  needs at least total variation / (2 * tolerance) segments for a monotone
  curve (textbook).
- ``linear`` (the hardware interpolates linearly between rows). Row values are
  the curve's values (interpolation); rows equidistribute the measure
  integral sqrt(|y''| / (8 tol)) dt, from the interpolation error bound
  |y - p| <= h^2 max|y''| / 8 (A Practical Guide to Splines,
  Springer (1978)), which also gives the asymptotic row count.

Both are vectorised: a dense evaluation, a cumulative measure capped at one
row per min interval, np.searchsorted to invert it, then vectorised
verification passes that split segments still over tolerance (evenly, with
one new row moved onto the largest jump (hold) or largest error (linear), so
kinks from calibration tables are caught at once). No Python loop runs per row.

The check runs on every tick for ramps up to ``_GRID_MAX`` ticks, otherwise on
an evenly spaced grid of about that many points. Rows then fall on grid points;
hold errors are bounded conservatively by including the next grid value, and
linear ones leave room for the chord error between grid points. This assumes
the curve is smooth on the scale of the grid (a jump between two grid points
is not seen), and when rows are needed every few grid steps it costs rows
(segment lengths are whole grid steps).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

_GRID_MAX = 1 << 21      # most grid intervals evaluated per ramp (peak memory about 250 MB)
_MAX_PASSES = 40         # verification / refinement passes (smooth ramps need one or two)
_LINEAR_SAFETY = 1.05    # denser than the asymptotic bound: y'' varies within an interval
_TIE_EPS = 1e-9          # |x - half integer| below this (in ticks / codes) counts as a tie
MODELS = ("hold", "linear")


@dataclass(frozen=True, eq=False)
class SampleReport:
    """Rows of one sampled ramp plus how well they do.

    ticks: absolute ticks (int64), first tick_start, last tick_end.
    values: output values (float64); the last is the curve's value at tick_end.
    max_error: largest |reconstructed - curve| found on the check grid (output units).
    min_rows_bound: rows a best sampler needs by the derivative bound
        (hold: ceil(total variation / (2 tol)) + 1, strict for a monotone
        curve moving well under 2 tol per tick; linear: ceil(integral
        sqrt(|y''| / (8 tol)) dt) + 1, asymptotic for interpolating rows),
        counting the end row and capped at the number of grid points.
    grid_step_ticks: spacing of the check grid (1 = every tick).
    min_interval_limited: the tolerance was not met because rows may not be
        closer than min_interval_ticks (or, for very long ramps, the grid spacing).
    max_rows_limited: the tolerance was not met because of max_rows.
    """

    ticks: np.ndarray
    values: np.ndarray
    max_error: float
    min_rows_bound: int
    tolerance: float
    model: str
    grid_step_ticks: int
    min_interval_limited: bool
    max_rows_limited: bool

    @property
    def rows(self) -> int:
        return int(len(self.ticks))

    @property
    def within_tolerance(self) -> bool:
        return self.max_error <= self.tolerance * (1 + 1e-9)


# ---------------------------------------------------------------- quantization

def _round_half_up(x: np.ndarray) -> np.ndarray:
    """Nearest integer, exact ties (and float near-ties within _TIE_EPS plus a
    few ulps of the largest |x|) going up. Deterministic: a time written as 2.5
    ticks rounds to 3 whether the division gave 2.4999999999999996 or 2.5."""
    if x.size == 0:
        return np.floor(x)
    eps = _TIE_EPS + 8 * np.spacing(max(abs(float(x.max())), abs(float(x.min()))))
    y = x + 0.5
    n = np.floor(y)
    np.subtract(y, n, out=y)  # fractional part of x + 1/2; just below 1 means a near-tie from below
    n += y >= 1.0 - eps
    return n


def quantize_times(times_s: np.ndarray, tick_s: float) -> np.ndarray:
    """Times (s) -> nearest tick (int64), ties toward the later tick.

    t / tick within 1e-9 of a tick (plus a few ulps) of a half tick counts as a
    tie, so float error in the division cannot flip a tie either way.
    Times that round below tick 0 (earlier than -tick/2) raise ValueError:
    nothing can be output before the sequence starts."""
    tick_s = float(tick_s)
    if not (np.isfinite(tick_s) and tick_s > 0):
        raise ValueError(f"tick_s must be a positive finite time in s, got {tick_s!r}")
    t = np.asarray(times_s, dtype=float)
    shape = t.shape
    t = t.reshape(-1)
    if t.size and not np.all(np.isfinite(t)):
        raise ValueError("times must be finite")
    k = _round_half_up(t / tick_s)
    if k.size and k.min() < 0:
        raise ValueError(f"time {t.min():.9g} s lies before the sequence start (t = 0); ticks cannot be negative")
    if k.size and k.max() >= 2.0 ** 53:
        raise ValueError("time too long for exact integer ticks")
    return k.astype(np.int64).reshape(shape)


def quantize_values(values: np.ndarray, lo: float, hi: float, bits: int, *, origin: float | None = None,
                    step: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Values -> (codes int64, values of those codes) for a DAC of 2^bits codes over [lo, hi]:
    LSB = (hi - lo) / 2^bits, code 0 = lo, code n = lo + n LSB, the top code 2^bits - 1 = hi - 1 LSB
    (IEEE Std 1658-2011, DAC terminology: the full-scale range is 2^N LSB and its top is not a code; a
    bipolar range then has an exact code at its middle). Nearest code, ties to the higher code; a value
    within half an LSB of hi, or at hi, plays the top code.
    `origin`, `step`: another code grid (code n = origin + n step, codes 0 .. 2^bits - 1), e.g. a synth's
    frequency word counting fclk / 2^bits from 0 Hz; [lo, hi] stays the range values must lie in.
    Values outside [lo, hi] (beyond float noise, 1e-12 of the scale) raise ValueError: they are not clipped
    silently."""
    lo, hi = float(lo), float(hi)
    if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
        raise ValueError(f"DAC range must satisfy lo < hi, got [{lo!r}, {hi!r}]")
    if int(bits) != bits or not 1 <= bits <= 52:
        raise ValueError(f"DAC bits must be an integer from 1 to 52, got {bits!r}")
    nmax = 2 ** int(bits) - 1
    origin = lo if origin is None else float(origin)
    step = (hi - lo) / 2 ** int(bits) if step is None else float(step)  # a power of two: exact
    if not (np.isfinite(origin) and np.isfinite(step) and step > 0):
        raise ValueError(f"code grid must have a finite origin and a positive step, got {origin!r}, {step!r}")
    v = np.asarray(values, dtype=float)
    shape = v.shape
    v = v.reshape(-1)
    slack = 1e-12 * max(hi - lo, abs(lo), abs(hi))
    if v.size:
        vmin, vmax = float(v.min()), float(v.max())
        # written so NaN fails too (every comparison with NaN is false)
        if not (vmin >= lo - slack and vmax <= hi + slack):
            if not (np.isfinite(vmin) and np.isfinite(vmax)):
                raise ValueError("values must be finite")
            raise ValueError(f"values span [{vmin:.9g}, {vmax:.9g}], outside the output range [{lo:.9g}, {hi:.9g}]")
    x = (v - origin) / step
    codes = np.clip(_round_half_up(x), 0, nmax, out=x).astype(np.int64)
    back = origin + codes * step  # code 0 gives the origin exactly
    return codes.reshape(shape), back.reshape(shape)


# ---------------------------------------------------------------- sampling helpers

def sorted_unique(x: np.ndarray, presorted: bool = False) -> np.ndarray:
    """np.unique for int arrays that are (nearly) sorted; np.unique's hash path is slow here."""
    a = x if presorted else np.sort(x, kind="stable")
    if len(a) < 2:
        return a
    keep = np.empty(len(a), dtype=bool)
    keep[0] = True
    np.not_equal(a[1:], a[:-1], out=keep[1:])
    return a[keep]


def _evaluate(value_at, t: np.ndarray) -> np.ndarray:
    y = np.asarray(value_at(t), dtype=float)
    if y.shape != t.shape:
        y = np.broadcast_to(y, t.shape).copy()
    if not np.all(np.isfinite(y)):
        raise ValueError("the ramp's value function returned non-finite values")
    return y


def _enforce_spacing(starts: np.ndarray, g: np.ndarray, m: int, mg: int) -> np.ndarray:
    """Segment starts (grid indices, sorted, unique, starts[0] = 0, all < M) made
    at least mg grid steps apart, and the last at least m ticks before the end
    row at g[-1]. s'_j = max(s_j, s'_{j-1} + mg), solved in closed form as
    j mg + running max(s_j - j mg)."""
    M = len(g) - 1
    n = int(g[-1])
    if mg > 1 and len(starts) > 1:
        j = np.arange(len(starts), dtype=np.int64)
        starts = j * mg + np.maximum.accumulate(starts - j * mg)
        starts = starts[starts < M]
    if len(starts) > 1 and n - g[starts[-1]] < m:
        # spacing >= m means only this last start can sit within m ticks of the end
        latest = int(np.searchsorted(g, n - m, side="right")) - 1
        if latest >= starts[-2] + mg:
            starts = starts.copy()
            starts[-1] = latest
        else:
            starts = starts[:-1]
    return starts


def _first_crossings(phi: np.ndarray, top: float) -> np.ndarray:
    """Grid indices where the nondecreasing cumulative measure phi first reaches 1, 2, ..., floor(top)."""
    if top < 1:
        return np.zeros(0, dtype=np.int64)
    levels = np.arange(1, int(np.floor(top)) + 1, dtype=float)
    return np.searchsorted(phi, levels, side="left").astype(np.int64)


def _segment_argmax(vals: np.ndarray, starts: np.ndarray) -> np.ndarray:
    """Index of the first maximum of vals[starts[j]:starts[j+1]] for every segment j."""
    lengths = np.diff(np.append(starts, len(vals)))
    seg_max = np.maximum.reduceat(vals, starts)
    seg_id = np.repeat(np.arange(len(starts)), lengths)
    hit = np.nonzero(vals >= seg_max[seg_id])[0]
    first = np.ones(len(hit), dtype=bool)
    first[1:] = seg_id[hit[1:]] != seg_id[hit[:-1]]
    return hit[first]


def _split_points(starts, lengths, k, order, peaks, mg):
    """k[i] - 1 evenly spaced new starts inside segment i, for segments in order;
    where peaks[i] >= 0 the even point nearest to it moves onto it (a kink or a
    jump is then caught in one pass instead of by repeated halving)."""
    kk = k[order].astype(np.int64)
    reps = kk - 1
    total = int(reps.sum())
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    first = np.repeat(starts[order], reps)
    length = np.repeat(lengths[order], reps)
    kr = np.repeat(kk, reps)
    j = np.arange(total, dtype=np.int64) - np.repeat(np.cumsum(reps) - reps, reps) + 1
    # floor(j L / k) steps are >= floor(L / k) >= mg apart when k <= L // mg
    new = first + (j * length) // kr
    pk = peaks[order]
    lo, hi = starts[order] + mg, starts[order] + lengths[order] - mg
    ok = (pk >= 0) & (hi >= lo)
    if ok.any():
        pk = np.clip(pk, lo, hi)
        jstar = np.clip(np.rint(kk * (pk - starts[order]) / lengths[order]), 1, kk - 1).astype(np.int64)
        pos = (np.cumsum(reps) - reps) + jstar - 1
        new[pos[ok]] = pk[ok]
    return np.sort(new)


def _refine(starts, err, limit, g, m, mg, max_rows, pieces_for, peaks):
    """One refinement pass: split segments whose error exceeds limit (segments
    shorter than 2 min intervals cannot be split). Returns (new starts, or None
    when nothing could be split; whether max_rows stopped a split)."""
    M = len(g) - 1
    bad = err > limit
    lengths = np.diff(np.append(starts, M))
    k = np.minimum(pieces_for(err / limit), lengths // mg)
    split = bad & (k >= 2)
    if not split.any():
        return None, False
    order = np.nonzero(split)[0]
    rows_limited = False
    if max_rows is not None:
        budget = max_rows - (len(starts) + 1)
        order = order[np.argsort(-err[order], kind="stable")]
        keep = np.cumsum(k[order] - 1) <= budget
        rows_limited = not bool(keep.all())
        order = np.sort(order[keep])
        if len(order) == 0:
            return None, True
    new = _split_points(starts, lengths, k, order, peaks, mg)
    starts = sorted_unique(np.concatenate([starts, new]))
    return _enforce_spacing(starts, g, m, mg), rows_limited


def _scale_to_budget(rho: np.ndarray, top_index: int, max_rows: int | None, fixed_rows: int) -> np.ndarray:
    """Thin the density so the rows placed from it fit max_rows."""
    if max_rows is None:
        return rho
    allowed = max_rows - fixed_rows
    total = float(rho[:top_index].sum())
    if allowed <= 0:
        return np.zeros_like(rho)
    if total > allowed:
        return rho * (allowed / total) * (1 - 1e-12)
    return rho


def _hold_values(y: np.ndarray, starts: np.ndarray, step: int):
    """Midpoint values and their errors for hold segments starting at grid indices starts."""
    if step == 1:
        src_hi = src_lo = y[:-1]
    else:
        # between grid points the curve moves toward the next grid value: include it
        src_hi = np.maximum(y[:-1], y[1:])
        src_lo = np.minimum(y[:-1], y[1:])
    hi = np.maximum.reduceat(src_hi, starts)
    lo = np.minimum.reduceat(src_lo, starts)
    return 0.5 * (hi + lo), 0.5 * (hi - lo)


def _sample_hold(y, g, step, tol, m, mg, max_rows):
    M = len(g) - 1
    dy = np.abs(np.diff(y))
    tv = float(dy.sum())
    bound = min(max(1, int(np.ceil(tv / (2.0 * tol) - 1e-9))), M) + 1
    w = 2.0 * tol * (1 - 1e-9)  # a hair under 2 tol: float ties must not reach the tolerance
    if step > 1:
        # the conservative check adds the grid interval after each segment: leave room for it
        w = max(tol, w - float(dy.max()))
    # at most one crossing per mg grid steps keeps rows min_interval apart
    rho = np.minimum(dy / w, 1.0 / mg * (1 - 1e-12))
    rho = _scale_to_budget(rho, M - 1, max_rows, 2)
    phi = np.concatenate(([0.0], np.cumsum(rho)))
    starts = sorted_unique(np.concatenate(([0], _first_crossings(phi, phi[M - 1]))), presorted=True)
    starts = _enforce_spacing(starts[starts < M], g, m, mg)
    rows_limited = False
    jump = np.concatenate(([0.0], dy))  # jump[i]: change from grid point i - 1 to i
    for _ in range(_MAX_PASSES):
        vals, err = _hold_values(y, starts, step)
        if not np.any(err > tol):
            break
        # a jump bigger than the tolerance inside a segment gets a row of its own
        inner = jump[:M].copy()
        inner[starts] = 0.0
        peaks = _segment_argmax(inner, starts)
        peaks = np.where(inner[peaks] > tol, peaks, -1)
        # a hold segment's range grows about linearly with its length
        new, capped = _refine(starts, err, tol, g, m, mg, max_rows, lambda r: np.ceil(r * 1.02), peaks)
        rows_limited |= capped
        if new is None:
            break
        starts = new
    vals, err = _hold_values(y, starts, step)
    return starts, vals, float(err.max()), bound, rows_limited


def _sample_linear(y, g, step, tol, m, mg, max_rows):
    M = len(g) - 1
    h = np.diff(g).astype(float)
    slopes = np.diff(y) / h
    if M >= 2:
        curv = np.abs(2.0 * np.diff(slopes) / (h[:-1] + h[1:]))  # |y''| per tick^2 at interior points
        # per interval: mean of its two end points' curvature (ends copy their neighbour)
        c_pts = np.concatenate(([curv[0]], curv, [curv[-1]]))
        c_int = 0.5 * (c_pts[:-1] + c_pts[1:])
    else:
        curv = c_int = np.zeros(M)
    density = np.sqrt(c_int / (8.0 * tol)) * h  # rows per interval (asymptotic count)
    bound = min(max(1, int(np.ceil(float(density.sum()) - 1e-9))), M) + 1
    # on a coarse grid leave room for the chord error between grid points (h^2 |y''| / 8)
    limit = tol
    if step > 1 and len(curv):
        limit = max(0.5 * tol, tol - float(curv.max()) * step ** 2 / 8.0)
    rho = np.minimum(density * _LINEAR_SAFETY * np.sqrt(tol / limit), 1.0 / mg * (1 - 1e-12))
    rho = _scale_to_budget(rho, M, max_rows, 2)
    phi = np.concatenate(([0.0], np.cumsum(rho)))
    starts = sorted_unique(np.concatenate(([0], _first_crossings(phi, phi[M]))), presorted=True)
    starts = _enforce_spacing(starts[starts < M], g, m, mg)
    idx = np.arange(M + 1, dtype=float)

    def errors(starts):
        pts = np.append(starts, M)
        recon = np.interp(idx, pts, y[pts])
        e = np.abs(recon - y)[:-1]
        return np.maximum.reduceat(e, starts), e

    rows_limited = False
    for _ in range(_MAX_PASSES):
        err, e_pts = errors(starts)
        if not np.any(err > limit):
            break
        # interpolation error grows as the square of the interval; one new row goes
        # where the error peaks (a kink from a calibration table is then caught at once)
        new, capped = _refine(starts, err, limit, g, m, mg, max_rows, lambda r: np.ceil(np.sqrt(r) * 1.02),
                              _segment_argmax(e_pts, starts))
        rows_limited |= capped
        if new is None:
            break
        starts = new
    err, _ = errors(starts)
    max_err = float(err.max())
    if step > 1 and len(curv):
        max_err += float(curv.max()) * step ** 2 / 8.0  # chord error between grid points, a bound
    return starts, y[starts], max_err, bound, rows_limited


def _as_int(x, name: str) -> int:
    if int(x) != x:
        raise ValueError(f"{name} must be an integer number of ticks, got {x!r}")
    return int(x)


# ---------------------------------------------------------------- public

def sample_ramp_report(value_at: Callable[[np.ndarray], np.ndarray], tick_start: int, tick_end: int, tick_s: float,
                       *, tolerance: float, model: str = "hold", min_interval_ticks: int = 1,
                       max_rows: int | None = None) -> SampleReport:
    """Sample a ramp into table rows; see the module docstring.

    value_at: absolute time (s, array) -> output value (output units, array).
    tick_start, tick_end: first and last tick of the ramp (ints, tick_end >= tick_start).
    tick_s: tick length (s). tolerance: allowed |reconstructed - curve| (output units).
    model: "hold" or "linear". min_interval_ticks: least spacing between rows.
    max_rows: optional cap on the rows (the tolerance then may not be met).
    Rows: first at tick_start, last at tick_end holding value_at(tick_end)."""
    k0, k1 = _as_int(tick_start, "tick_start"), _as_int(tick_end, "tick_end")
    if k1 < k0:
        raise ValueError(f"tick_end ({k1}) is before tick_start ({k0})")
    tick_s = float(tick_s)
    if not (np.isfinite(tick_s) and tick_s > 0):
        raise ValueError(f"tick_s must be a positive finite time in s, got {tick_s!r}")
    tol = float(tolerance)
    if not (np.isfinite(tol) and tol > 0):
        raise ValueError(f"tolerance must be positive and finite, got {tolerance!r}")
    if model not in MODELS:
        raise ValueError(f"unknown output model {model!r}; known: {', '.join(MODELS)}")
    m = _as_int(min_interval_ticks, "min_interval_ticks")
    if m < 1:
        raise ValueError("min_interval_ticks must be at least 1")
    if max_rows is not None and (_as_int(max_rows, "max_rows") < 2):
        raise ValueError("max_rows must be at least 2 (the start and end rows)")
    n = k1 - k0
    if n == 0:
        y = _evaluate(value_at, np.array([k0 * tick_s]))
        return SampleReport(np.array([k0], dtype=np.int64), y, 0.0, 1, tol, model, 1, False, False)
    step = max(1, -(-n // _GRID_MAX))
    g = np.append(np.arange(0, n, step, dtype=np.int64), np.int64(n))
    y = _evaluate(value_at, (k0 + g) * tick_s)
    mg = max(1, -(-m // step))  # min interval in grid steps
    sampler = _sample_hold if model == "hold" else _sample_linear
    starts, vals, max_err, bound, rows_limited = sampler(y, g, step, tol, m, mg, max_rows)
    ticks = np.append(k0 + g[starts], np.int64(k1)).astype(np.int64)
    values = np.append(vals, y[-1])
    within = max_err <= tol * (1 + 1e-9)
    rows_limited = rows_limited and not within
    # any other shortfall comes from the row spacing (min interval, or the grid of a very long ramp)
    spacing_limited = not within and not rows_limited
    return SampleReport(ticks, values, max_err, bound, tol, model, step, bool(spacing_limited), bool(rows_limited))


def sample_ramp(value_at: Callable[[np.ndarray], np.ndarray], tick_start: int, tick_end: int, tick_s: float,
                *, tolerance: float, model: str = "hold", min_interval_ticks: int = 1,
                max_rows: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """(ticks int64, values float64) of sample_ramp_report (same arguments)."""
    r = sample_ramp_report(value_at, tick_start, tick_end, tick_s, tolerance=tolerance, model=model,
                           min_interval_ticks=min_interval_ticks, max_rows=max_rows)
    return r.ticks, r.values
