"""Ramp shapes, adaptive ramp sampling and tick / DAC-code quantization.

References beside each check:
- shape formulas: the closed forms written out here with numpy (np.exp, np.cos,
  the polynomial of Phys. Rev. Lett. 104, 063002 (2010)), and scipy's
  PchipInterpolator for tables (monotone piecewise cubic interpolation,
  SIAM J. Numer. Anal. 17, 238 (1980));
- row-count bounds: a held segment stays within tol of a monotone curve only
  where the curve changes by at most 2 tol, so at least total variation / (2 tol)
  segments (derived here); piecewise-linear interpolation error h^2 max|y''| / 8,
  hence about integral sqrt(|y''| / (8 tol)) intervals (A Practical Guide to
  Splines, Springer (1978), chapter on broken-line interpolation (from memory));
- the Beta-function integral int_0^{pi/2} cos^(1/2) x dx = B(1/2, 3/4) / 2
  (Handbook of Mathematical Functions, NBS Appl. Math. Ser. 55, eq. 6.2.1 (1964), equation number from memory);
- rounding: exact decimal / rational arithmetic from Python's decimal and
  fractions modules.
The reconstructed output is computed here from the rows with the two hardware
models (hold: value kept until the next row; linear: straight lines between rows).
"""

from decimal import ROUND_HALF_UP, Decimal
from fractions import Fraction
import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import integrate, special

from seqgen.compile.sampling import quantize_times, quantize_values, sample_ramp, sample_ramp_report
from seqgen.compile.shapes import SHAPES, shape_derivative_bounds, shape_fraction

from . import reference_shapes as shapes_ref

TABLE = ((0.0, 0.0), (0.2, 0.5), (0.5, 0.6), (1.0, 1.0))
TICK = 1e-6
# float round-off of the time -> progress conversion (relative 1e-15 of a few volts)
ROUND = 1e-12






def reconstruct(ticks, values, k, model):
    if model == "hold":
        return values[np.searchsorted(ticks, k, side="right") - 1]
    return np.interp(k, ticks, values)


def make_ramp(shape, k0, n, v0, v1, tau_ticks=None):
    T = n * TICK
    tau = None if tau_ticks is None else tau_ticks * TICK

    def value_at(t):
        s = np.clip((t - k0 * TICK) / T, 0.0, 1.0)
        return v0 + (v1 - v0) * shape_fraction(shape, s, duration_s=T, tau_s=tau, table=TABLE)

    return value_at


CASES = [("linear", None), ("exponential", 1 / 3), ("exponential", -1 / 3), ("exponential", 2.0),
         ("smooth", None), ("minimum_jerk", None), ("table", None)]


# ---------------------------------------------------------------- shapes

@pytest.mark.parametrize("shape,tau_frac", CASES)
def test_shape_matches_closed_form_and_ends_exactly(shape, tau_frac):
    T = 0.25
    s = np.linspace(0, 1, 1001)
    tau = None if tau_frac is None else tau_frac * T
    f = shape_fraction(shape, s, duration_s=T, tau_s=tau, table=TABLE)
    ref = shapes_ref.fraction(shape, s, None if tau is None else T / tau, table=TABLE)
    np.testing.assert_allclose(f, ref, rtol=1e-12, atol=1e-14)
    # the ramp must land on its end values to the last bit
    assert f[0] == 0.0 and f[-1] == 1.0


def test_exponential_large_rates_do_not_overflow():
    # |T/tau| = 2000: the normalisation exp(-2000) underflows; asymptotically
    # f = 1 - exp(-r s) for r > 0 and f = exp(q (s - 1)) for r = -q < 0
    s = np.array([0.0, 1e-3, 0.5, 0.999, 1.0])
    fp = shape_fraction("exponential", s, duration_s=1.0, tau_s=1 / 2000)
    fn = shape_fraction("exponential", s, duration_s=1.0, tau_s=-1 / 2000)
    assert np.all(np.isfinite(fp)) and np.all(np.isfinite(fn))
    np.testing.assert_allclose(fp[1], 1 - np.exp(-2.0), rtol=1e-12)
    np.testing.assert_allclose(fn[3], np.exp(-2.0), rtol=1e-12)
    assert fp[-1] == 1.0 and fn[-1] == 1.0 and fn[0] == 0.0


def test_exponential_long_time_constant_is_linear():
    # tau -> infinity: (1 - exp(-s x)) / (1 - exp(-x)) -> s (series expansion to first order in x)
    s = np.linspace(0, 1, 11)
    for tau in (1e9, -1e9, np.inf):
        np.testing.assert_allclose(shape_fraction("exponential", s, duration_s=1.0, tau_s=tau), s, atol=1e-8)


def test_minimum_jerk_has_zero_slope_and_curvature_at_both_ends():
    # Phys. Rev. Lett. 104, 063002 (2010): the polynomial is chosen so that
    # b'(0) = b'(1) = b''(0) = b''(1) = 0; check by finite differences
    h = 1e-4
    f = lambda s: shape_fraction("minimum_jerk", np.asarray(s), duration_s=1.0)
    for end in (0.0, 1.0):
        pts = np.clip(end + h * np.array([-1.0, 0.0, 1.0]), 0, 1)
        d1 = (f(pts[2]) - f(pts[0])) / (pts[2] - pts[0])
        assert abs(d1) < 1e-6
    # second difference one step inside: f'' ~ 60 s near s = 0 (expansion of the polynomial)
    d2 = (f(2 * h) - 2 * f(h) + f(0.0)) / h ** 2
    assert abs(d2) < 60 * 3 * h * 1.01


def test_table_is_monotone_and_shape_preserving():
    # SIAM J. Numer. Anal. 17, 238 (1980): monotone data give a monotone interpolant
    table = ((0, 0), (0.1, 0.0), (0.3, 0.9), (0.35, 0.9), (1, 1))
    s = np.linspace(0, 1, 20001)
    f = shape_fraction("table", s, duration_s=1.0, table=table)
    assert np.all(np.diff(f) >= 0)
    assert f.min() >= 0 and f.max() <= 1
    # the flat parts of the data stay flat
    assert np.all(f[(s >= 0) & (s <= 0.1)] == 0)
    np.testing.assert_allclose(f[(s >= 0.3) & (s <= 0.35)], 0.9, atol=1e-15)


@pytest.mark.parametrize("table,match", [
    (((0, 0), (0.5, 0.2), (0.5, 0.6), (1, 1)), "strictly increasing"),
    (((0, 0), (0.6, 0.2), (0.4, 0.6), (1, 1)), "strictly increasing"),
    (((0.1, 0), (0.5, 0.5), (1, 1)), "start at s = 0"),
    (((0, 0), (0.5, 0.5), (0.9, 1)), "end at s = 1"),
    (((0, 0.1), (1, 1)), "f = 0 at s = 0"),
    (((0, 0), (0.5, 1.2), (1, 1)), r"\[0, 1\]"),
    (((0, 0),), "at least two"),
])
def test_table_validation(table, match):
    with pytest.raises(ValueError, match=match):
        shape_fraction("table", np.array([0.5]), duration_s=1.0, table=table)


def test_shape_argument_errors():
    with pytest.raises(ValueError, match="tau"):
        shape_fraction("exponential", np.array([0.5]), duration_s=1.0)
    with pytest.raises(ValueError, match="unknown ramp shape"):
        shape_fraction("cubic", np.array([0.5]), duration_s=1.0)
    with pytest.raises(ValueError, match=r"\[0, 1\]"):
        shape_fraction("linear", np.array([1.5]), duration_s=1.0)
    with pytest.raises(ValueError, match="duration"):
        shape_fraction("linear", np.array([0.5]), duration_s=0.0)


@pytest.mark.parametrize("shape,expected", [
    ("linear", (1.0, 0.0)),
    ("smooth", (np.pi / 2, np.pi ** 2 / 2)),        # d/ds (1 - cos pi s)/2, by hand
    ("minimum_jerk", (15 / 8, 10 / np.sqrt(3))),    # 30 s^2 (1-s)^2 at 1/2; 60 s(1-s)(1-2s) at (3-sqrt3)/6
])
def test_derivative_bounds_closed_forms(shape, expected):
    np.testing.assert_allclose(shape_derivative_bounds(shape, duration_s=1.0), expected, rtol=1e-12, atol=0)


@pytest.mark.parametrize("shape,tau", [("exponential", 0.3), ("exponential", -0.3), ("exponential", 0.05),
                                       ("table", None), ("smooth", None), ("minimum_jerk", None)])
def test_derivative_bounds_against_dense_numerical_derivatives(shape, tau):
    # numerical derivatives of the independent closed forms on a dense grid
    s = np.linspace(0, 1, 200001)
    r = None if tau is None else 1.0 / tau
    f = shapes_ref.fraction(shape, s, r, table=TABLE)
    d1 = np.gradient(f, s)
    d2 = np.abs(shapes_ref.second_derivative(shape, s, r, table=TABLE))
    b1, b2 = shape_derivative_bounds(shape, duration_s=1.0, tau_s=tau, table=TABLE)
    # grid step 5e-6: the dense maxima sit within one step of the true ones (PCHIP's f'' jumps at knots)
    np.testing.assert_allclose(b1, np.abs(d1).max(), rtol=1e-4)
    np.testing.assert_allclose(b2, d2.max(), rtol=1e-4)


# ---------------------------------------------------------------- sampling: accuracy and row counts

def _linear_bound_intervals(shape, amplitude, tol, r=None):
    """integral_0^1 sqrt(|y''(s)| / (8 tol)) ds (rows - 1 of an ideal linear sampler)."""
    if shape == "linear":
        return 0.0
    if shape == "smooth":
        # |y''| = A pi^2/2 |cos pi s|: pi sqrt(A / (16 tol)) (2/pi) int_0^{pi/2} sqrt(cos x) dx, and that
        # integral is B(1/2, 3/4) / 2 (NBS AMS 55, eq. 6.2.1)
        return math.pi * math.sqrt(amplitude / (16 * tol)) * (2 / math.pi) * special.beta(0.5, 0.75) / 2
    if shape == "exponential" and r > 0:
        # integral of sqrt(A r^2 e^{-rs} / (8 tol (1 - e^{-r}))) = that prefactor * (2/r)(1 - e^{-r/2})
        return math.sqrt(amplitude * r * r / (8 * tol * (1 - math.exp(-r)))) * 2 / r * (1 - math.exp(-r / 2))
    knots = [x for x, _ in TABLE] if shape == "table" else None
    val, _ = integrate.quad(lambda s: math.sqrt(abs(amplitude * shapes_ref.second_derivative(shape, np.array(s), r, table=TABLE))
                                                / (8 * tol)), 0, 1, points=knots, limit=200)
    return val


@pytest.mark.parametrize("model", ["hold", "linear"])
@pytest.mark.parametrize("shape,tau_frac", CASES)
def test_every_tick_within_tolerance_and_rows_near_bound(shape, tau_frac, model):
    k0, n, v0, v1 = 1000, 20000, 0.5, 4.5
    tol = 2e-3 if model == "hold" else 1e-4
    tau_ticks = None if tau_frac is None else tau_frac * n
    rep = sample_ramp_report(make_ramp(shape, k0, n, v0, v1, tau_ticks), k0, k0 + n, TICK,
                             tolerance=tol, model=model)
    k = np.arange(k0, k0 + n + 1)
    r = None if tau_frac is None else 1 / tau_frac
    ref = v0 + (v1 - v0) * shapes_ref.fraction(shape, (k - k0) / n, r, table=TABLE)
    out = reconstruct(rep.ticks, rep.values, k, model)
    err = np.abs(out - ref).max()
    assert err <= tol + ROUND
    assert rep.ticks[0] == k0 and rep.ticks[-1] == k0 + n
    assert np.all(np.diff(rep.ticks) >= 1)
    assert rep.ticks.dtype == np.int64 and rep.values.dtype == np.float64
    np.testing.assert_allclose(rep.max_error, err, atol=ROUND)
    assert rep.within_tolerance and not rep.min_interval_limited and not rep.max_rows_limited
    amp = abs(v1 - v0)
    if model == "hold":
        # monotone curve: total variation = |v1 - v0| -> at least ceil(TV / (2 tol)) segments (derived at the top of this file), + end row
        bound = math.ceil(amp / (2 * tol)) + 1
    else:
        # A Practical Guide to Splines, Springer (1978): about integral sqrt(|y''| / (8 tol)) intervals (at least one), + start row
        bound = max(1, math.ceil(_linear_bound_intervals(shape, amp, tol, r))) + 1
    assert rep.rows <= 1.5 * bound
    assert abs(rep.min_rows_bound - bound) <= max(2, 0.02 * bound)


def test_end_value_exact_and_first_row_at_start():
    for model in ("hold", "linear"):
        for shape, tau in (("exponential", 0.3), ("smooth", None), ("table", None)):
            ticks, values = sample_ramp(make_ramp(shape, 0, 5000, -2.0, 7.25, None if tau is None else tau * 5000),
                                        0, 5000, TICK, tolerance=1e-3, model=model)
            assert ticks[0] == 0 and ticks[-1] == 5000
            assert values[-1] == 7.25  # exactly: f(1) = 1 and -2 + 9.25 * 1 is exact in binary


def test_hold_values_are_segment_midpoints():
    # the documented choice: the midpoint of the range a hold segment covers (optimal, error = half the range)
    n = 4000
    f = make_ramp("smooth", 0, n, 0.0, 1.0)
    ticks, values = sample_ramp(f, 0, n, TICK, tolerance=5e-3)
    y = 0.5 * (1 - np.cos(np.pi * np.arange(n + 1) / n))
    for a, b, v in zip(ticks[:-1], ticks[1:], values[:-1]):
        seg = y[a:b]
        assert v == pytest.approx(0.5 * (seg.min() + seg.max()), abs=1e-12)


@pytest.mark.parametrize("model", ["hold", "linear"])
def test_non_monotone_curve(model):
    # y = sin(2 pi 3 x): total variation 12 (4 amplitudes per period, 3 periods)
    n, tol = 30000, 1e-3
    value_at = lambda t: np.sin(2 * np.pi * 3 * t / (n * TICK))
    rep = sample_ramp_report(value_at, 0, n, TICK, tolerance=tol, model=model)
    k = np.arange(n + 1)
    ref = np.sin(2 * np.pi * 3 * k / n)
    assert np.abs(reconstruct(rep.ticks, rep.values, k, model) - ref).max() <= tol + ROUND
    if model == "hold":
        bound = math.ceil(12 / (2 * tol)) + 1
    else:
        # |y''| = (6 pi)^2 |sin|: integral sqrt((6 pi)^2 |sin 6 pi x| / (8 tol)) dx = 6 pi / sqrt(8 tol) * 2/pi * int_0^{pi/2} sqrt(sin)
        bound = math.ceil(6 * math.pi / math.sqrt(8 * tol) * (2 / math.pi) * special.beta(0.75, 0.5) / 2) + 1
    assert rep.rows <= 1.5 * bound


@pytest.mark.parametrize("model", ["hold", "linear"])
def test_long_ramp_checked_on_dense_grid_holds_at_every_tick(model):
    # 3e6 ticks: more than the sampler evaluates, so it checks on a grid; verify every tick here
    n, k0 = 3_000_000, 7
    tol = 1e-4 if model == "hold" else 1e-6
    rep = sample_ramp_report(make_ramp("minimum_jerk", k0, n, 0.0, 2.0), k0, k0 + n, TICK, tolerance=tol, model=model)
    assert rep.grid_step_ticks > 1
    k = np.arange(k0, k0 + n + 1)
    s = (k - k0) / n
    ref = 2.0 * (10 * s ** 3 - 15 * s ** 4 + 6 * s ** 5)
    err = np.abs(reconstruct(rep.ticks, rep.values, k, model) - ref).max()
    assert err <= tol + ROUND
    assert err <= rep.max_error + ROUND  # the report's error is an upper bound on a coarse grid
    # the last row holds the curve's value at tick_end (here 2 to float round-off of t -> s)
    f_end = make_ramp("minimum_jerk", k0, n, 0.0, 2.0)(np.array([(k0 + n) * TICK]))[0]
    assert rep.ticks[-1] == k0 + n and rep.values[-1] == f_end and abs(f_end - 2.0) < ROUND


# ---------------------------------------------------------------- sampling: spacing, limits, arguments

@pytest.mark.parametrize("model", ["hold", "linear"])
def test_min_interval_respected_when_tolerance_cannot_be_met(model):
    n, m = 3000, 9
    tol = 1e-4 if model == "hold" else 1e-7
    f = make_ramp("smooth", 0, n, 0.0, 5.0)
    rep = sample_ramp_report(f, 0, n, TICK, tolerance=tol, model=model, min_interval_ticks=m)
    assert np.diff(rep.ticks).min() >= m
    k = np.arange(n + 1)
    err = np.abs(reconstruct(rep.ticks, rep.values, k, model) - f(k * TICK)).max()
    # the tolerance is out of reach at this spacing, and the report says so with the true error
    assert err > tol and rep.min_interval_limited and not rep.within_tolerance
    np.testing.assert_allclose(rep.max_error, err, atol=ROUND)
    # and spacing m everywhere the curve is steep: close to n / m rows for hold
    if model == "hold":
        assert rep.rows >= 0.5 * n / m


@pytest.mark.parametrize("model", ["hold", "linear"])
def test_min_interval_respected_when_tolerance_is_met(model):
    n, m = 20000, 5
    f = make_ramp("minimum_jerk", 0, n, 0.0, 1.0)
    rep = sample_ramp_report(f, 0, n, TICK, tolerance=1e-3, model=model, min_interval_ticks=m)
    assert np.diff(rep.ticks).min() >= m
    k = np.arange(n + 1)
    assert np.abs(reconstruct(rep.ticks, rep.values, k, model) - f(k * TICK)).max() <= 1e-3 + ROUND
    assert not rep.min_interval_limited


def test_max_rows_cap():
    f = make_ramp("smooth", 0, 20000, 0.0, 5.0)
    for model in ("hold", "linear"):
        rep = sample_ramp_report(f, 0, 20000, TICK, tolerance=1e-4, model=model, max_rows=50)
        assert rep.rows <= 50 and rep.max_rows_limited and rep.ticks[-1] == 20000 and rep.values[-1] == 5.0


def test_zero_length_and_shorter_than_min_interval():
    f = make_ramp("linear", 10, 1, 0.0, 1.0)
    ticks, values = sample_ramp(lambda t: np.full_like(t, 3.0), 10, 10, TICK, tolerance=1e-3)
    assert ticks.tolist() == [10] and values.tolist() == [3.0]
    # a ramp shorter than the min interval still starts and ends where asked
    ticks, values = sample_ramp(f, 10, 11, TICK, tolerance=1e-3, min_interval_ticks=4)
    assert ticks.tolist() == [10, 11] and values[-1] == 1.0


def test_sampling_argument_errors():
    f = make_ramp("linear", 0, 100, 0.0, 1.0)
    for kwargs in ({"tolerance": 0.0}, {"tolerance": 1e-3, "model": "spline"},
                   {"tolerance": 1e-3, "min_interval_ticks": 0}, {"tolerance": 1e-3, "max_rows": 1}):
        with pytest.raises(ValueError):
            sample_ramp(f, 0, 100, TICK, **kwargs)
    with pytest.raises(ValueError, match="before"):
        sample_ramp(f, 100, 0, TICK, tolerance=1e-3)
    with pytest.raises(ValueError, match="non-finite"):
        sample_ramp(lambda t: t * np.nan, 0, 100, TICK, tolerance=1e-3)


@settings(max_examples=60, deadline=None)
@given(shape=st.sampled_from(SHAPES), tau_frac=st.sampled_from([-3.0, -0.2, 0.1, 0.5, 4.0]),
       n=st.integers(1, 3000), log_tol=st.floats(-5.0, -0.5), model=st.sampled_from(["hold", "linear"]),
       m=st.integers(1, 6))
def test_sampling_contract_property(shape, tau_frac, n, log_tol, model, m):
    tol = 10.0 ** log_tol
    f = make_ramp(shape, 0, n, 1.0, -1.0, tau_frac * n)
    rep = sample_ramp_report(f, 0, n, TICK, tolerance=tol, model=model, min_interval_ticks=m)
    k = np.arange(n + 1)
    s = k / n
    ref = 1.0 - 2.0 * shapes_ref.fraction(shape, s, 1 / tau_frac, table=TABLE)
    err = np.abs(reconstruct(rep.ticks, rep.values, k, model) - ref).max()
    assert rep.ticks[0] == 0 and rep.ticks[-1] == n and rep.values[-1] == -1.0
    gaps = np.diff(rep.ticks)
    assert np.all(gaps >= m) or (n < m and rep.rows == 2)
    assert rep.max_error == pytest.approx(err, abs=ROUND)
    if m == 1 or not rep.min_interval_limited:
        # with rows allowed on every tick the tolerance is always reachable
        assert err <= tol + ROUND


# ---------------------------------------------------------------- quantization

def _decimal_ticks(t: str, tick: str) -> int:
    # nearest tick, ties toward the later tick: ROUND_HALF_UP on exact decimals (non-negative times)
    return int((Decimal(t) / Decimal(tick)).quantize(Decimal(1), rounding=ROUND_HALF_UP))


@pytest.mark.parametrize("t,tick", [("2.5e-6", "1e-6"), ("1.5e-6", "1e-6"), ("0.5e-6", "1e-6"),
                                    ("2.4999e-6", "1e-6"), ("2.5001e-6", "1e-6"), ("0.35e-6", "0.1e-6"),
                                    ("0.45e-6", "0.1e-6"), ("12.345e-3", "10e-9"), ("1.0000000005", "1e-9"),
                                    ("10", "1e-9"), ("0", "1e-6"), ("3e-9", "2e-9")])
def test_quantize_times_nearest_ties_later(t, tick):
    assert quantize_times(np.array([float(t)]), float(tick))[0] == _decimal_ticks(t, tick)


def test_quantize_times_random_decimal_times():
    rng = np.random.default_rng(1)
    ticks = ["1e-6", "1e-7", "2e-9", "12.5e-9", "4e-6"]
    for tick in ticks:
        k = rng.integers(0, 10 ** 7, size=300)
        frac = rng.choice(["0", "0.25", "0.5", "0.75", "0.4999", "0.5001"], size=300)
        strs = [str((Decimal(int(a)) + Decimal(b)) * Decimal(tick)) for a, b in zip(k, frac)]
        got = quantize_times(np.array([float(x) for x in strs]), float(tick))
        assert got.dtype == np.int64
        assert got.tolist() == [_decimal_ticks(x, tick) for x in strs]


def test_quantize_times_negative_not_allowed():
    # up to half a tick early rounds (tie: up) to tick 0; earlier is before the sequence start
    assert quantize_times(np.array([-0.5e-6, -0.2e-6]), 1e-6).tolist() == [0, 0]
    with pytest.raises(ValueError, match="before the sequence start"):
        quantize_times(np.array([0.0, -0.6e-6]), 1e-6)
    with pytest.raises(ValueError):
        quantize_times(np.array([np.nan]), 1e-6)
    with pytest.raises(ValueError):
        quantize_times(np.array([1.0]), 0.0)


def test_quantize_values_16_bit_ends_and_code_boundaries():
    # IEEE Std 1658-2011 (DAC terminology): the full-scale range is 2^N LSB, code 0 at its bottom, the top
    # code 2^N - 1 one LSB below its top; a bipolar range has an exact code at its middle
    lo, hi, bits = -10.0, 10.0, 16
    lsb = Fraction(20, 2 ** 16)
    codes, back = quantize_values(np.array([lo, hi, 0.0, float(hi - lsb)]), lo, hi, bits)
    assert Fraction(10) / lsb == 32768  # 0 V: exactly code 0x8000
    assert codes.tolist() == [0x0000, 0xFFFF, 0x8000, 0xFFFF]  # a value at hi plays the top code
    assert back[0] == lo and back[2] == 0.0 and back[1] == back[3] == float(hi - lsb)
    # exact half-LSB boundaries go up; a hair below stays down
    c = np.arange(0, 65535, 997)
    half = np.array([float(lo + (Fraction(int(x)) + Fraction(1, 2)) * lsb) for x in c])
    assert np.array_equal(quantize_values(half, lo, hi, bits)[0], c + 1)
    below = half - float(lsb) * 1e-3
    assert np.array_equal(quantize_values(below, lo, hi, bits)[0], c)


def test_quantize_values_random_against_exact_rationals():
    rng = np.random.default_rng(7)
    for lo, hi, bits in ((-10.0, 10.0, 16), (0.0, 1.0, 12), (-5.0, 5.0, 18), (0.1, 0.3, 8)):
        v = rng.uniform(lo, hi, 2000)
        n = 2 ** bits
        expected = [min(n - 1, math.floor((Fraction(x) - Fraction(lo)) * n / (Fraction(hi) - Fraction(lo))
                                          + Fraction(1, 2))) for x in v]
        codes, back = quantize_values(v, lo, hi, bits)
        assert codes.tolist() == expected
        # the value written is within half an LSB of the request (one LSB in the top half-code)
        lsb = (hi - lo) / n
        inside = v <= hi - lsb
        assert np.all(np.abs(back - v)[inside] <= lsb / 2 * (1 + 1e-9))
        assert np.all(np.abs(back - v) <= lsb * (1 + 1e-9))


def test_quantize_values_round_trip_one_bit_and_another_grid():
    codes = np.arange(2 ** 16)
    back_all = -10.0 + codes * (20.0 / 65536)
    assert np.array_equal(quantize_values(back_all, -10.0, 10.0, 16)[0], codes)
    # one bit over [0, 1]: LSB 1/2, codes 0 (0) and 1 (0.5); 0.25 is a tie and goes up
    c1, b1 = quantize_values(np.array([0.0, 0.24, 0.25, 1.0]), 0.0, 1.0, 1)
    assert c1.tolist() == [0, 0, 1, 1] and b1.tolist() == [0.0, 0.0, 0.5, 0.5]
    # a frequency word: 32 bits of a 1 GHz clock count 1e9 / 2^32 Hz from 0 Hz (tuning word f 2^N / fclk)
    step = 1e9 / 2 ** 32
    c, b = quantize_values(np.array([100e6, 250e6]), 50e6, 300e6, 32, origin=0.0, step=step)
    assert c.tolist() == [round(Fraction(100_000_000 * 2 ** 32, 10 ** 9)), 2 ** 30]
    assert b[1] == 250e6


def test_quantize_values_out_of_range_raises():
    with pytest.raises(ValueError, match="outside the output range"):
        quantize_values(np.array([0.0, 10.001]), -10.0, 10.0, 16)
    with pytest.raises(ValueError, match="outside the output range"):
        quantize_values(np.array([-10.001]), -10.0, 10.0, 16)
    # float noise at the ends (1e-12 of the scale) is not an error
    assert quantize_values(np.array([10.0 + 1e-13]), -10.0, 10.0, 16)[0].tolist() == [65535]
    with pytest.raises(ValueError):
        quantize_values(np.array([np.nan]), -10.0, 10.0, 16)
    with pytest.raises(ValueError):
        quantize_values(np.array([0.0]), 1.0, 1.0, 16)
    with pytest.raises(ValueError):
        quantize_values(np.array([0.0]), -1.0, 1.0, 0)
