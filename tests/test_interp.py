"""seqgen.interp, the numpy monotone cubic (PCHIP), against scipy's PchipInterpolator as the outside reference on
seeded random tables, and against values worked out by hand from the published construction (slopes: weighted
harmonic mean and three-point ends, F. N. Fritsch and J. Butland, SIAM J. Sci. Stat. Comput. 5, 300 (1984);
monotonicity: F. N. Fritsch and R. E. Carlson, SIAM J. Numer. Anal. 17, 238 (1980); from memory)."""

import numpy as np
import pytest
from scipy.interpolate import PchipInterpolator

from seqgen.interp import pchip, slopes

KINDS = ("rising", "falling", "wavy", "flat stretches", "steps")


def _table(rng, kind: str, n: int):
    """n points with uneven spacing (some nearly touching, some far apart) and values of a random scale."""
    gaps = rng.choice([1e-3, 1.0, 30.0], size=n - 1) * rng.uniform(0.2, 1.0, n - 1)
    x = rng.uniform(-50, 50) + np.concatenate([[0.0], np.cumsum(gaps)])
    if kind == "rising":
        y = np.cumsum(rng.exponential(1.0, n))
    elif kind == "falling":
        y = -np.cumsum(rng.exponential(1.0, n))
    elif kind == "wavy":
        y = rng.normal(size=n)
    elif kind == "flat stretches":
        y = np.cumsum(rng.exponential(1.0, n) * (rng.uniform(size=n) < 0.5))
    else:  # few levels, up and down, with repeats
        y = rng.integers(-2, 3, size=n).astype(float)
    return x, y * 10.0 ** rng.integers(-8, 9)


def _points(rng, x):
    """Breakpoints, midpoints, random points inside, one ulp inside each end, the ends' neighbours outside and
    points well outside."""
    mids = 0.5 * (x[1:] + x[:-1])
    inside = rng.uniform(x[0], x[-1], 64)
    edges = [np.nextafter(x[0], np.inf), np.nextafter(x[-1], -np.inf), np.nextafter(x[0], -np.inf),
             np.nextafter(x[-1], np.inf)]
    span = x[-1] - x[0]
    outside = [x[0] - span, x[-1] + span, x[0] - 1e-3 * span, x[-1] + 1e-3 * span]
    return np.concatenate([x, mids, inside, edges, outside])


def _cases():
    rng = np.random.default_rng(20240517)
    for k in range(600):
        n = (2, 3, 4, 5, 9, 17)[k % 6]
        kind = KINDS[(k // 6) % len(KINDS)]
        x, y = _table(rng, kind, n)
        yield x, y, _points(rng, x)


def _agree(got, ref, y):
    """Equal to a few ulp of the values and of the table's scale; NaN exactly where scipy gives NaN."""
    np.testing.assert_array_equal(np.isnan(got), np.isnan(ref))
    scale = float(np.max(np.abs(y)))
    np.testing.assert_allclose(got, ref, rtol=1e-15, atol=4 * np.spacing(scale), equal_nan=True)


@pytest.mark.parametrize("extrapolate", [False, True])
def test_values_equal_scipy_on_random_tables(extrapolate):
    for x, y, t in _cases():
        ref = PchipInterpolator(x, y, extrapolate=extrapolate)
        got = pchip(x, y, extrapolate=extrapolate)
        _agree(got(t), ref(t), y)
        np.testing.assert_allclose(got.c, ref.c, rtol=1e-15, atol=0)  # the pieces shapes.py reads
        np.testing.assert_array_equal(got.x, ref.x)


def test_outside_the_table_is_nan_without_extrapolation():
    rng = np.random.default_rng(7)
    for x, y, _ in list(_cases())[:60]:
        span = x[-1] - x[0]
        t = np.array([np.nextafter(x[0], -np.inf), x[0] - span, np.nextafter(x[-1], np.inf), x[-1] + span, np.nan])
        assert np.all(np.isnan(pchip(x, y)(t)))
        assert np.isnan(pchip(x, y, extrapolate=True)(np.nan))
        assert not np.any(np.isnan(pchip(x, y)(rng.uniform(x[0], x[-1], 10))))


def test_shapes_follow_the_argument_as_scipy():
    x, y = np.array([0.0, 1.0, 2.5, 4.0]), np.array([0.0, 2.0, 2.5, 7.0])
    ref, got = PchipInterpolator(x, y, extrapolate=False), pchip(x, y)
    for t in (1.7, np.float64(0.3), np.array(2.0), np.linspace(0, 4, 12).reshape(3, 4), np.array([]),
              np.array([[5.0]])):
        r, g = ref(t), got(t)
        assert g.shape == r.shape and isinstance(g, np.ndarray)
        np.testing.assert_allclose(g, r, rtol=1e-15, equal_nan=True)


def test_the_slopes_of_scipy():
    for x, y, _ in _cases():
        # scipy's pieces start with the slope it chose (the linear coefficient); the last point's slope is the
        # derivative of the last piece at its right end
        ref = PchipInterpolator(x, y)
        got = slopes(x, y)
        np.testing.assert_allclose(got[:-1], ref.c[2], rtol=1e-15, atol=0)
        np.testing.assert_allclose(got[-1], ref.derivative()(x[-1]), rtol=1e-9, atol=1e-9 * np.max(np.abs(got)))


# ----------------------------------------------------------------------------- worked by hand


def test_a_straight_line_is_reproduced_exactly():
    # y = 2x + 1 on uneven points: every secant is 2, so the harmonic mean of the interior and the three-point
    # end rule ((2 h0 + h1) 2 - h0 2) / (h0 + h1) are 2; the cubic terms vanish and the line is exact (dyadic
    # numbers: no rounding)
    x = np.array([0.0, 1.0, 3.0, 4.0, 8.0])
    p = pchip(x, 2 * x + 1)
    np.testing.assert_array_equal(slopes(x, 2 * x + 1), [2.0] * 5)
    t = np.array([0.0, 0.5, 1.25, 3.0, 3.75, 6.5, 8.0])
    np.testing.assert_array_equal(p(t), 2 * t + 1)


def test_weighted_harmonic_mean_and_end_slopes_by_hand():
    # x = 0, 1, 3; y = 0, 1, 5: h = (1, 2), secants m = (1, 2).
    # interior: w1 = 2 h1 + h0 = 5, w2 = h1 + 2 h0 = 4; 1/d = (5/1 + 4/2) / 9 = 7/9 -> d = 9/7.
    # first end: ((2 h0 + h1) m0 - h0 m1) / (h0 + h1) = (4 - 2) / 3 = 2/3 (same sign as m0, no turn);
    # last end: ((2 h1 + h0) m1 - h1 m0) / (h1 + h0) = (10 - 2) / 3 = 8/3.
    x, y = np.array([0.0, 1.0, 3.0]), np.array([0.0, 1.0, 5.0])
    np.testing.assert_allclose(slopes(x, y), [2 / 3, 9 / 7, 8 / 3], rtol=1e-15)
    # the cubic Hermite value at the middle of the first interval: (y0 + y1) / 2 + h (d0 - d1) / 8
    np.testing.assert_allclose(pchip(x, y)(0.5), 0.5 + (2 / 3 - 9 / 7) / 8, rtol=1e-15)


def test_a_peak_has_zero_slope_and_no_overshoot():
    # x = 0, 1, 2; y = 0, 1, 0: the secants 1 and -1 differ in sign, so the slope at the peak is 0; the end
    # rule gives (3 * 1 - 1 * (-1)) / 2 = 2 (not above 3 |m0| = 3). Middle of [0, 1]: 1/2 + (2 - 0) / 8 = 3/4.
    x, y = np.array([0.0, 1.0, 2.0]), np.array([0.0, 1.0, 0.0])
    np.testing.assert_array_equal(slopes(x, y), [2.0, 0.0, -2.0])
    np.testing.assert_array_equal(pchip(x, y)([0.5, 1.5]), [0.75, 0.75])
    assert np.max(pchip(x, y)(np.linspace(0, 2, 2001))) == 1.0


def test_the_end_slope_corrections_by_hand():
    x = np.array([0.0, 1.0, 2.0])
    # secants 1 and 4: the three-point estimate (3 - 4) / 2 = -1/2 has the wrong sign -> 0
    assert slopes(x, np.array([0.0, 1.0, 5.0]))[0] == 0.0
    # secants 1 and -11: (3 + 11) / 2 = 7 > 3 |m0| where the data turn -> 3 m0 = 3
    assert slopes(x, np.array([0.0, 1.0, -10.0]))[0] == 3.0
    # two points: the straight line, slope = the secant at both ends
    np.testing.assert_array_equal(slopes(np.array([1.0, 3.0]), np.array([2.0, 3.0])), [0.5, 0.5])
    np.testing.assert_array_equal(pchip([1.0, 3.0], [2.0, 3.0])([1.0, 2.0, 3.0]), [2.0, 2.5, 3.0])


def test_monotone_data_give_a_monotone_cubic_within_each_interval():
    rng = np.random.default_rng(11)
    for kind in ("rising", "falling", "flat stretches"):
        for _ in range(40):
            x, y = _table(rng, kind, int(rng.integers(3, 12)))
            p = pchip(x, y)
            for i in range(len(x) - 1):
                v = p(np.linspace(x[i], x[i + 1], 200))
                lo, hi = min(y[i], y[i + 1]), max(y[i], y[i + 1])
                slack = 4 * np.spacing(max(abs(lo), abs(hi)))
                assert np.all(v >= lo - slack) and np.all(v <= hi + slack)  # no overshoot
                d = np.diff(v) * (1 if y[-1] >= y[0] else -1)
                assert np.all(d >= -slack)


def test_passes_through_the_data():
    for x, y, _ in list(_cases())[:120]:
        got = pchip(x, y)(x)
        np.testing.assert_array_equal(got[:-1], y[:-1])  # u = 0 on each left breakpoint: y_i itself
        np.testing.assert_allclose(got[-1], y[-1], rtol=1e-12, atol=1e-12 * np.max(np.abs(y)))


@pytest.mark.parametrize("x,y", [([0.0], [1.0]), ([0.0, 0.0, 1.0], [0.0, 1.0, 2.0]), ([1.0, 0.0], [0.0, 1.0]),
                                 ([0.0, np.nan], [0.0, 1.0]), ([0.0, 1.0], [0.0, np.inf]), ([0.0, 1.0], [0.0])])
def test_bad_tables_are_refused_as_scipy_refuses_them(x, y):
    with pytest.raises(ValueError):
        PchipInterpolator(x, y)
    with pytest.raises(ValueError):
        pchip(x, y)
