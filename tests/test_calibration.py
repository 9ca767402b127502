"""Calibration maps: the table cubic is scipy's monotone PCHIP (monotone piecewise cubic interpolation,
SIAM J. Numer. Anal. 17, 238 (1980)), its inverse returns the physical value, and beyond the table the map
stays monotonic."""

import numpy as np
import pytest
from scipy.interpolate import PchipInterpolator

from seqgen.calibration import to_output, to_physical
from seqgen.model import Calibration, Output
from seqgen.pipeline import preflight

from .conftest import SEQUENCES

TABLES = [
    ((0.0, 0.5, 1.0, 2.0, 3.0, 4.5), (0.0, 1.1, 2.05, 3.9, 5.8, 8.6)),  # rising, like the demo's cross_b
    ((0.0, 1.0, 2.0, 4.0), (5.0, 3.0, 1.0, 0.2)),  # falling output
    ((4.0, 2.0, 1.0, 0.0), (0.0, 0.5, 3.0, 4.0)),  # physical values written descending
]


def _out(tp, to):
    cal = Calibration("W", (0,) * 7, "table", table_phys=tp, table_out=to)
    return Output("o", "o", "d", "analog", "V", -10.0, 10.0, 16, 0.0, "W", (0,) * 7, calibration=cal)


@pytest.mark.parametrize("tp,to", TABLES)
def test_inside_the_table_the_map_is_scipy_pchip(tp, to):
    order = np.argsort(tp)
    ref = PchipInterpolator(np.asarray(tp)[order], np.asarray(to)[order])
    x = np.linspace(min(tp), max(tp), 1001)
    assert to_output(_out(tp, to), x) == pytest.approx(ref(x), rel=1e-14, abs=1e-14)


@pytest.mark.parametrize("tp,to", TABLES)
def test_table_cubic_has_the_published_properties(tp, to):
    # monotone piecewise cubic interpolation (SIAM J. Numer. Anal. 17, 238 (1980)): the interpolant passes through the data, is
    # monotone on every interval of monotone data, and its derivative at a point never exceeds three times the
    # smaller adjacent secant slope in magnitude (the paper's sufficient condition for monotonicity)
    out = _out(tp, to)
    order = np.argsort(tp)
    xs, ys = np.asarray(tp, float)[order], np.asarray(to, float)[order]
    assert to_output(out, xs) == pytest.approx(ys, abs=1e-14)
    x = np.linspace(xs[0], xs[-1], 20001)
    d = np.diff(to_output(out, x))
    assert np.all(d > 0) or np.all(d < 0)
    h = 1e-7 * (xs[-1] - xs[0])
    secants = np.diff(ys) / np.diff(xs)
    for k in range(1, len(xs) - 1):
        slope = (to_output(out, xs[k] + h) - to_output(out, xs[k] - h)) / (2 * h)
        assert abs(slope) <= 3 * min(abs(secants[k - 1]), abs(secants[k])) * (1 + 1e-6)


def _reference_map(tp, to, x):
    """The documented map, written out here: scipy's PCHIP inside the table (SIAM J. Numer. Anal. 17, 238
    (1980)), straight lines with the slopes of the end intervals beyond it (README, rig file)."""
    order = np.argsort(tp)
    xs, ys = np.asarray(tp, float)[order], np.asarray(to, float)[order]
    inside = PchipInterpolator(xs, ys)(np.clip(x, xs[0], xs[-1]))
    below = ys[0] + (x - xs[0]) * (ys[1] - ys[0]) / (xs[1] - xs[0])
    above = ys[-1] + (x - xs[-1]) * (ys[-1] - ys[-2]) / (xs[-1] - xs[-2])
    return np.where(x < xs[0], below, np.where(x > xs[-1], above, inside))


@pytest.mark.parametrize("tp,to", TABLES)
def test_to_physical_inverts_the_reference_map_inside_and_beyond(tp, to):
    # outputs from the map written out above, not from seqgen's to_output: to_physical must give back the
    # physical values they came from
    out = _out(tp, to)
    span = max(tp) - min(tp)
    x = np.linspace(min(tp) - 0.3 * span, max(tp) + 0.3 * span, 4001)
    y = _reference_map(tp, to, x)
    d = np.diff(y)
    assert np.all(d > 0) or np.all(d < 0)  # monotonic everywhere, so the inverse exists
    back = to_physical(out, y)
    # backward error at rounding level; the forward error is larger only where the cubic is flat (PCHIP may set
    # an end derivative to zero, where x is determined only to about sqrt(rounding))
    assert _reference_map(tp, to, back) == pytest.approx(y, abs=1e-13 * np.ptp(to))
    assert back == pytest.approx(x, abs=1e-7 * span)
    assert to_physical(out, np.asarray(to)) == pytest.approx(np.asarray(tp), abs=1e-7 * span)
    assert isinstance(to_physical(out, float(to[1])), float)


@pytest.mark.parametrize("tp,to", TABLES)
def test_to_output_is_the_reference_map_beyond_the_table(tp, to):
    out = _out(tp, to)
    span = max(tp) - min(tp)
    x = np.linspace(min(tp) - 0.3 * span, max(tp) + 0.3 * span, 4001)
    assert to_output(out, x) == pytest.approx(_reference_map(tp, to, x), rel=1e-14, abs=1e-14)


def test_beyond_the_table_the_end_intervals_continue_as_straight_lines():
    tp, to = TABLES[0]
    out = _out(tp, to)
    slope = (to[-1] - to[-2]) / (tp[-1] - tp[-2])
    assert float(to_output(out, 5.0)) == pytest.approx(to[-1] + 0.5 * slope, rel=1e-14)
    slope0 = (to[1] - to[0]) / (tp[1] - tp[0])
    assert float(to_output(out, -0.1)) == pytest.approx(-0.1 * slope0, rel=1e-14)


def test_a_value_beyond_the_table_is_a_warning_at_its_line():
    res = preflight(SEQUENCES / "faults" / "outside_calibration.yaml")
    hits = [f for f in res.findings if f.code == "hardware.outside-calibration"]
    assert [(f.severity, f.line) for f in hits] == [("warning", 8)]
    assert "4.8 W" in hits[0].message and "[0, 4.5] W" in hits[0].message
