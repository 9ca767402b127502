"""Compiled channel tables, through the whole pipeline (YAML -> preflight -> tables).

Each test writes a tiny rig and sequence into tmp_path, runs
seqgen.pipeline.preflight and re-samples the compiled table at every tick the
way the device plays it (hold: each row's value until the next row, a forward
fill; linear: straight lines between rows, np.interp). References beside each check:
- ramp curves: the closed forms written out here with numpy (np.exp, np.cos,
  the minimum-jerk polynomial 10 s^3 - 15 s^4 + 6 s^5 of Phys. Rev. Lett. 104,
  063002 (2010)) and scipy's PchipInterpolator for shape tables and table
  calibrations (monotone piecewise cubic, SIAM J. Numer. Anal. 17, 238 (1980);
  scipy's slope rule, SIAM J. Sci. Stat. Comput. 5, 300 (1984));
- allowed deviation: the ramp's tolerance plus half a least significant bit, the
  largest error of rounding to the nearest DAC code (by construction of rounding);
- row counts: a held row stays within tol of a monotone curve only over a stretch
  where the curve changes by at most 2 tol, so the rows need at least total
  variation / (2 tol) (derived here); piecewise-linear interpolation has error
  h^2 max|y''| / 8, hence about integral sqrt(|y''| / (8 tol)) intervals (A
  Practical Guide to Splines, Springer (1978), chapter on broken-line
  interpolation (from memory));
- rounding of times and values: exact decimal arithmetic (Python's decimal
  module, ROUND_HALF_UP), against the rule the README states (nearest tick /
  code, an exact half going to the later tick / higher code).
"""

from decimal import ROUND_HALF_UP, Decimal
import math

import numpy as np
import pytest
from scipy import integrate
from scipy.interpolate import PchipInterpolator

from seqgen.pipeline import preflight

from . import reference_shapes as shapes_ref

TICK = 1e-6  # every device of the test rig runs at 1 MHz
BITS = 16
LO, HI = -10.0, 10.0
LSB = (HI - LO) / 2 ** BITS  # IEEE Std 1658-2011: the full-scale range is 2^N LSB
SLOPE, OFFSET = 2.0, 0.25  # linear calibration V = 2 V/W * P + 0.25 V
CAL_TABLE = ((0.0, 0.0), (0.5, 1.1), (1.0, 2.05), (2.0, 3.9), (3.0, 5.8), (4.5, 8.6))  # W -> V
SHAPE_TABLE = ((0.0, 0.0), (0.2, 0.5), (0.5, 0.6), (1.0, 1.0))
ROUND = 1e-9  # float round-off of t -> progress -> volts (relative 1e-15 of 10 V, with margin)

SHAPE_PCHIP = PchipInterpolator(*zip(*SHAPE_TABLE))
SHAPE_PCHIP_D1, SHAPE_PCHIP_D2 = SHAPE_PCHIP.derivative(1), SHAPE_PCHIP.derivative(2)
CAL_PCHIP = PchipInterpolator(*zip(*CAL_TABLE))
CAL_PCHIP_D1, CAL_PCHIP_D2 = CAL_PCHIP.derivative(1), CAL_PCHIP.derivative(2)

DEVICES = {"hold1": ("hold", 1), "hold2": ("hold", 2), "lin1": ("linear", 1), "lin2": ("linear", 2)}

RIG = """seqgen_rig: 1
name: fidelity
devices:
  hold1: {timebase: 1 MHz, min_interval: 1 us}
  hold2: {timebase: 1 MHz, min_interval: 2 us}
  lin1: {timebase: 1 MHz, min_interval: 1 us, output_model: linear}
  lin2: {timebase: 1 MHz, min_interval: 2 us, output_model: linear}
  fine: {timebase: 10 MHz, min_interval: 100 ns}
channels:
"""
for _dev in DEVICES:
    RIG += (f"  lin_{_dev}: {{device: {_dev}, kind: analog, output: {{unit: V, range: [-10 V, 10 V], bits: 16}}, "
            f"calibration: {{quantity: W, linear: {{slope: 2 V/W, offset: 0.25 V}}}}, safe: 0 W}}\n")
    RIG += (f"  tab_{_dev}: {{device: {_dev}, kind: analog, output: {{unit: V, range: [-10 V, 10 V], bits: 16}}, "
            "calibration: {quantity: W, table: [[0 W, 0 V], [0.5 W, 1.1 V], [1 W, 2.05 V], [2 W, 3.9 V], "
            "[3 W, 5.8 V], [4.5 W, 8.6 V]]}, safe: 0 W}\n")
RIG += """  coarse: {device: hold1, kind: analog, output: {unit: V, range: [0 V, 6.5536 V], bits: 16}, safe: 0 V}
  exact_hold1: {device: hold1, kind: analog, output: {unit: V, range: [-5 V, 5 V]}, safe: 0 V}
  exact_lin1: {device: lin1, kind: analog, output: {unit: V, range: [-5 V, 5 V]}, safe: 0 V}
  gate: {device: fine, kind: digital, safe: 0}
  slow_gate: {device: hold1, kind: digital, latency: 500 ns, safe: 0}
"""


def run(tmp_path, blocks: str, extra: str = ""):
    (tmp_path / "rig.yaml").write_text(RIG)
    seq = tmp_path / "seq.yaml"
    seq.write_text("seqgen: 1\nrig: rig.yaml\n" + extra + "blocks:\n" + blocks)
    res = preflight(seq)
    assert res.compiled is not None, [f"{f.code}: {f.message}" for f in res.findings]
    return res


def column(res, output):
    for t in res.compiled.tables:
        if output in t.columns:
            return t, np.asarray(t.ticks), np.asarray(t.values)[:, t.columns.index(output)]
    raise AssertionError(output)


def replay(ticks, col, k, model):
    """What the device outputs at ticks k: hold = forward fill, linear = straight lines."""
    if model == "linear":
        return np.interp(k, ticks, col)
    return col[np.searchsorted(ticks, k, side="right") - 1]






def calibrate(cal, p):
    if cal == "lin":
        return SLOPE * p + OFFSET
    return CAL_PCHIP(p)


SHAPES = [("linear", None), ("exponential", 12e-3), ("exponential", -15e-3), ("smooth", None),
          ("minimum_jerk", None), ("table", None)]


@pytest.mark.parametrize("dev", list(DEVICES))
@pytest.mark.parametrize("shape,tau", SHAPES, ids=[f"{s}{'' if t is None else ('+' if t > 0 else '-')}" for s, t in SHAPES])
@pytest.mark.parametrize("cal,p0,p1,tol", [("lin", 0.2, 3.1, 2e-3), ("lin", 1.5, 1.1, None), ("tab", 0.3, 4.2, 2e-3)],
                         ids=["lin-2mV", "lin-halfLSB", "table-2mV"])
def test_ramp_fidelity_and_row_count(tmp_path, dev, shape, tau, cal, p0, p1, tol):
    model, m = DEVICES[dev]
    ch = f"{cal}_{dev}"
    T, t0 = 40e-3, 1e-3
    spec = f"channel: {ch}, to: {p1} W, over: 40 ms, shape: {shape}"
    if tau is not None:
        spec += f", tau: {tau * 1e3:g} ms"
    if shape == "table":
        spec += ", table: " + str([list(p) for p in SHAPE_TABLE])
    if tol is not None:
        spec += f", tolerance: {tol * 1e3:g} mV"
    res = run(tmp_path, f"""  - name: r
    at: 1 ms
    actions:
      - set: {{channel: {ch}, value: {p0} W}}
      - ramp: {{{spec}}}
      - hold: {{duration: 2 ms}}
      - set: {{channel: {ch}, value: 0 W}}
""")
    assert res.ok, [f"{f.code}: {f.message}" for f in res.findings if f.severity == "error"]
    assert not [f for f in res.findings if f.code == "hardware.ramp-undersampled"]
    table, ticks, col = column(res, ch)
    k0, k1 = round(t0 / TICK), round((t0 + T) / TICK)
    k = np.arange(k0, k1 + 1000)  # the ramp and 1 ms of the hold after it
    s = np.clip((k - k0) / (k1 - k0), 0, 1)
    r = None if tau is None else T / tau
    want = calibrate(cal, p0 + (p1 - p0) * shapes_ref.fraction(shape, s, r, SHAPE_TABLE))
    tolerance = tol if tol is not None else LSB / 2  # the default: half an LSB (rig schema)
    dev_err = np.abs(replay(ticks, col, k, model) - want).max()
    # the ramp's tolerance plus half an LSB of DAC quantization (rounding to the nearest code)
    assert dev_err <= tolerance + LSB / 2 + ROUND
    # the device's spacing is kept: rows at least the minimum interval apart
    assert np.all(np.diff(ticks) >= m)
    # every value is a DAC code: lo + n * LSB for an integer n
    codes = (col - LO) / LSB
    np.testing.assert_allclose(codes, np.round(codes), atol=1e-6)
    # row count against the derivative bound; rows of this table inside the ramp
    rows = int(np.count_nonzero((ticks >= k0) & (ticks <= k1)))
    if model == "hold":
        # monotone curve: total variation |V1 - V0| needs >= ceil(TV / (2 tol)) rows (derived at the top of this file), + end row
        tv = abs(float(calibrate(cal, p1) - calibrate(cal, p0)))
        bound = math.ceil(tv / (2 * tolerance)) + 1
        if cal == "tab":  # tolerance over the cubic calibration's range: compute TV from the curve itself
            bound = math.ceil(np.abs(np.diff(want[: k1 - k0 + 1])).sum() / (2 * tolerance)) + 1
    else:
        # A Practical Guide to Splines, Springer (1978): about integral sqrt(|y''| / (8 tol)) dt intervals, + end row;
        # y(t) = V(P(t)): y'' = V'(P) P'' + V''(P) P'^2 with P' = dP/dt (second-derivative chain rule)
        def y2(ss):
            p = p0 + (p1 - p0) * shapes_ref.fraction(shape, np.array(ss), r, SHAPE_TABLE)
            if cal == "lin":
                v1, v2 = SLOPE, 0.0
            else:
                v1, v2 = CAL_PCHIP_D1(p), CAL_PCHIP_D2(p)
            d1 = (p1 - p0) * _fd1(shape, ss, r)
            d2 = (p1 - p0) * shapes_ref.second_derivative(shape, np.array(ss), r, SHAPE_TABLE)
            return (v1 * d2 + v2 * d1 ** 2) / (k1 - k0) ** 2  # per tick^2
        knots = sorted({x for x, _ in SHAPE_TABLE} | _cal_knots_in_s(cal, shape, p0, p1, r)) if shape == "table" or cal == "tab" else None
        integral, _ = integrate.quad(lambda ss: math.sqrt(abs(float(y2(ss))) / (8 * tolerance)) * (k1 - k0), 0, 1,
                                     points=knots, limit=400)
        bound = max(1, math.ceil(integral)) + 1
    assert rows <= 1.5 * bound + 2 * (m > 1), (rows, bound)  # + the two grid-alignment rows of a device with m > 1


def _fd1(shape, s, r):
    """df/ds of the closed forms, by hand."""
    s = np.asarray(s, float)
    if shape == "linear":
        return 1 + 0 * s
    if shape == "exponential":
        return r * np.exp(-r * s) / (1 - np.exp(-r))
    if shape == "smooth":
        return np.pi / 2 * np.sin(np.pi * s)
    if shape == "minimum_jerk":
        return 30 * s ** 2 - 60 * s ** 3 + 30 * s ** 4
    return SHAPE_PCHIP_D1(s)


def _cal_knots_in_s(cal, shape, p0, p1, r):
    """Progress values at which the ramp passes a calibration table point (kinks of y'')."""
    if cal != "tab":
        return set()
    ss = np.linspace(0, 1, 200001)
    p = p0 + (p1 - p0) * shapes_ref.fraction(shape, ss, r, SHAPE_TABLE)
    out = set()
    for x, _ in CAL_TABLE:
        hit = np.nonzero(np.diff(np.sign(p - x)))[0]
        out |= {float(ss[i]) for i in hit}
    return out


@pytest.mark.parametrize("dev", list(DEVICES))
def test_set_edges_are_steps(tmp_path, dev):
    # a set is a step at its tick on both output models (linear: a row one tick before holds the old value)
    model, m = DEVICES[dev]
    ch = f"lin_{dev}"
    res = run(tmp_path, f"""  - name: a
    at: 100 us
    actions:
      - set: {{channel: {ch}, value: 1 W}}
      - set: {{channel: {ch}, value: 2.5 W, at: 400 us}}
      - set: {{channel: {ch}, value: 0 W, at: 900 us}}
""")
    assert res.ok
    _, ticks, col = column(res, ch)
    k = np.arange(0, 1100)
    want = np.select([k >= 1000, k >= 500, k >= 100], [0.0, 2.5, 1.0], 0.0) * SLOPE + OFFSET
    got = replay(ticks, col, k, model)
    # a linear device can step no faster than over one minimum interval: the m - 1 ticks before an edge
    # lie between the old and the new value; every other tick is exact to half an LSB
    ramping = np.zeros(len(k), bool)
    if model == "linear":
        for edge in (100, 500, 1000):
            ramping[edge - m + 1:edge] = True
            lo, hi = sorted((want[edge - m], want[edge]))
            assert np.all((got[edge - m + 1:edge] >= lo - LSB / 2) & (got[edge - m + 1:edge] <= hi + LSB / 2))
    assert np.abs(got - want)[~ramping].max() <= LSB / 2 + ROUND
    assert np.all(np.diff(ticks) >= m)


def test_half_tick_lands_on_later_tick(tmp_path):
    # README: every time is rounded to the nearest tick, an exact half to the later tick
    res = run(tmp_path, """  - name: a
    at: 1000.5 us
    actions:
      - pulse: {channel: coarse, value: 1 V, duration: 10.5 us}
  - name: b
    at: 2000.4999 us
    actions:
      - pulse: {channel: coarse, value: 2 V, duration: 10 us}
  - name: c
    at: 3.0000015 ms
    actions:
      - pulse: {channel: gate, duration: 0.15 us}
""")
    assert res.ok
    _, ticks, col = column(res, "coarse")
    expected = {}
    for t_us, v in (("1000.5", 1.0), ("1011", 0.0), ("2000.4999", 2.0), ("2010.4999", 0.0)):
        tick = int((Decimal(t_us) / Decimal(1)).quantize(Decimal(1), rounding=ROUND_HALF_UP))  # 1 MHz: us = ticks
        expected[tick] = v
    assert sorted(expected) == [1001, 1011, 2000, 2010]
    for tick, v in expected.items():
        assert tick in ticks
        assert col[list(ticks).index(tick)] == pytest.approx(v, abs=LSB / 2)
    # 10 MHz: 3.0000015 ms = 30000.015 ticks -> 30000; the 0.15 us pulse ends at 30001.515 ticks -> 30002
    _, gt, gc = column(res, "gate")
    want = {int((Decimal("3.0000015e-3") * Decimal(10 ** 7)).quantize(Decimal(1), rounding=ROUND_HALF_UP)): 1.0,
            int((Decimal("3.0001515e-3") * Decimal(10 ** 7)).quantize(Decimal(1), rounding=ROUND_HALF_UP)): 0.0}
    assert want == {30000: 1.0, 30002: 0.0}
    assert dict(zip(gt.tolist(), gc.tolist())) == {0: 0.0, **want}
    # each shift is reported as a note
    assert {f.code for f in res.findings if f.severity == "note"} >= {"timing.sub-tick"}


def test_latency_shift_then_half_tick_rounds_later(tmp_path):
    # a 500 ns latency moves an edge at 10 us to 9.5 us: exactly half a tick -> tick 10 (README rules)
    res = run(tmp_path, """  - name: a
    at: 10 us
    actions:
      - pulse: {channel: slow_gate, duration: 20 us}
""")
    _, ticks, col = column(res, "slow_gate")
    assert dict(zip(ticks.tolist(), col.tolist()))[10] == 1.0
    assert dict(zip(ticks.tolist(), col.tolist()))[30] == 0.0


@pytest.mark.parametrize("volts", ["1.00005", "1.0000499", "0.00005", "6.55345", "6.5535", "0", "3.27675",
                                   "6.55355", "6.5536"])
def test_values_round_to_nearest_code_ties_up(tmp_path, volts):
    # range [0 V, 6.5536 V] at 16 bits: LSB = 6.5536 V / 2^16 = 0.1 mV (IEEE Std 1658-2011: 2^N LSB span the
    # range), so code = value / 0.1 mV, an exact half going up; the top code 65535 is 6.5535 V, and a value
    # at or above 6.55355 V (the top of the range included) plays it
    res = run(tmp_path, f"""  - name: a
    at: 1 ms
    actions:
      - pulse: {{channel: coarse, value: {volts} V, duration: 1 ms}}
""")
    assert res.ok
    _, ticks, col = column(res, "coarse")
    code = min(65535, int((Decimal(volts) / Decimal("0.0001")).quantize(Decimal(1), rounding=ROUND_HALF_UP)))
    got = col[np.searchsorted(ticks, 1000, side="right") - 1]
    lsb = 0.0001
    assert round(got / lsb) == code
    assert got == pytest.approx(code * lsb, abs=1e-12)
    if volts in ("6.5535", "6.55355", "6.5536"):
        assert got == pytest.approx(6.5535, abs=1e-12)  # the top code: one LSB below the top of the range


@pytest.mark.parametrize("dev", ["hold1", "lin1"])
def test_ramp_lands_exactly_on_its_end_value(tmp_path, dev):
    # no DAC rounding on these outputs: the end row must be the end value to the last bit
    # (-2.2 + (1.00005 - -2.2) * 1 is 1.0000499999999999 in binary64; -2.2 * 0 + 1.00005 * 1 is exact)
    ch = f"exact_{dev}"
    res = run(tmp_path, f"""  - name: a
    at: 1 ms
    actions:
      - set: {{channel: {ch}, value: -2.2 V}}
      - ramp: {{channel: {ch}, to: 1.00005 V, over: 3 ms, shape: smooth}}
      - hold: {{duration: 1 ms}}
      - set: {{channel: {ch}, value: 0 V}}
""")
    assert res.ok
    _, ticks, col = column(res, ch)
    assert col[np.searchsorted(ticks, 4000, side="right") - 1] == 1.00005
    assert col[np.searchsorted(ticks, 4999, side="right") - 1] == 1.00005


def test_undersampled_ramp_is_reported_with_its_miss(tmp_path):
    # 5 V in 100 us on a hold device with a 2 us minimum interval: at most 51 rows, so steps of
    # about 0.1 V (and up to pi/2 times that where the smooth ramp is steepest); a hold row is
    # off by at least half the curve's change while it holds
    res = run(tmp_path, """  - name: a
    at: 1 ms
    actions:
      - ramp: {channel: lin_hold2, to: 2.5 W, over: 100 us, shape: smooth}
      - hold: {duration: 1 ms}
      - set: {channel: lin_hold2, value: 0 W}
""")
    hits = [f for f in res.findings if f.code == "hardware.ramp-undersampled"]
    assert len(hits) == 1 and hits[0].severity == "warning" and res.ok  # a warning: the build is still written
    data = dict(hits[0].data)
    # steepest slope: 5 V * pi/2 / 100 us (derivative of the raised cosine); a row held for the 2 ticks
    # of the minimum interval covers 1 us of it, and its best value (the midpoint) is off by half that
    steepest = 5.0 * math.pi / 2 / 100e-6
    assert data["max_error"] == pytest.approx(steepest * 1e-6 / 2, rel=0.02)
    assert data["tolerance"] == pytest.approx(LSB / 2)
    assert hits[0].line == 7 and "times its tolerance" in hits[0].message  # line of the ramp action
    _, ticks, col = column(res, "lin_hold2")
    k = np.arange(1000, 1101)
    want = 2.5 * (1 - np.cos(np.pi * (k - 1000) / 100)) / 2 * SLOPE + OFFSET
    assert np.abs(replay(ticks, col, k, "hold") - want).max() <= data["max_error"] + LSB / 2 + ROUND


def test_rows_column_of_show_counts_table_rows(tmp_path):
    from seqgen.show import timeline_rows

    res = run(tmp_path, """  - name: a
    at: 1 ms
    actions:
      - ramp: {channel: lin_hold1, to: 1 W, over: 10 ms, tolerance: 10 mV}
      - set: {channel: lin_hold1, value: 0 W}
""")
    rows = {r["action"]: r["rows"] for r in timeline_rows(res.shot, res.compiled)}
    _, ticks, _ = column(res, "lin_hold1")
    # 2 V with a hold tolerance of 10 mV: ceil(2 / 0.02) = 100 rows at least (the TV / (2 tol) bound), + end row
    in_ramp = int(np.count_nonzero((ticks >= 1000) & (ticks <= 11000)))
    assert rows["ramp"] == in_ramp and 100 <= in_ramp <= 150
