"""Property: no build ever drives a calibrated channel beyond its hard limits.

Random sequences on the demo rig (random set / ramp / pulse actions on every
calibrated channel that has a hard limit, with values drawn around and beyond
those limits, and a copy of the rig whose analog card interpolates linearly)
must either raise a `safety.hard-limit` error (and then the build is refused:
Result.ok is False), or compile to tables whose every value lies within the
rig's hard limits, also between rows as the device plays them (hold: the row
values; linear: straight lines between rows, checked at the midpoints between rows).

The comparison is made in output units: every calibration of the rig is monotonic,
so a physical value lies within [min, max] exactly when its output value lies
between the outputs of min and max. Those two outputs are computed here, not with
seqgen.calibration (the code that compile itself uses): a linear calibration by its
closed form out = slope * x + offset, a table by scipy's PchipInterpolator on the
table as written in the rig file (monotone piecewise cubic interpolation, SIAM J.
Numer. Anal. 17, 238 (1980); the README's "monotone cubic" for tables).
Allowance: half a least significant bit, LSB = span / 2^bits (IEEE Std 1658-2011,
DAC terminology: 2^N codes from the bottom of the range, the top code one LSB below
its top), the largest error of rounding to the nearest code, plus float round-off
(a value in the top half code plays the top code, up to one LSB below it).

The rig (sequences/rigs/na23_demo_rig.yaml) is read here with PyYAML and its
quantities converted with pint, independently of seqgen's rig resolver. No
`sample:` in these sequences: the physics checks stay quiet and fast.
"""

from pathlib import Path
import tempfile

import numpy as np
import pint
import yaml
from hypothesis import HealthCheck, given, settings, strategies as st
from scipy.interpolate import PchipInterpolator

from seqgen.pipeline import preflight

from .conftest import SEQUENCES

RIG_PATH = SEQUENCES / "rigs" / "na23_demo_rig.yaml"
RIG_TEXT = RIG_PATH.read_text(encoding="utf-8")
RIG_DOC = yaml.safe_load(RIG_TEXT)
UREG = pint.UnitRegistry()


def _qty(text, unit):
    return UREG.Quantity(text).to(unit).magnitude


def _output_map(cal, unit):
    """Physical value (in `unit`) -> output value (V), written out from the rig file's calibration."""
    if "linear" in cal:
        lin = cal["linear"]
        slope = _qty(lin["slope"], f"V/{unit}")
        offset = _qty(lin.get("offset", "0 V"), "V")
        return lambda x: slope * np.asarray(x, float) + offset
    xs = np.array([_qty(p, unit) for p, _ in cal["table"]])
    ys = np.array([_qty(v, "V") for _, v in cal["table"]])
    order = np.argsort(xs)
    pchip = PchipInterpolator(xs[order], ys[order])

    def to_volts(x):
        x = np.asarray(x, float)
        # the demo's limits sit inside their tables; beyond one, write its straight-line continuation here
        assert np.all((x >= xs.min()) & (x <= xs.max())), (x, xs)
        return pchip(x)

    return to_volts


def _limited_channels():
    """name -> (physical unit, hard min or None, hard max, output map, half an LSB in V),
    for calibrated channels with a hard limit."""
    out = {}
    for name, ch in RIG_DOC["channels"].items():
        cal, lim = ch.get("calibration"), ch.get("hard_limit")
        if not cal or not lim:
            continue
        unit = cal["quantity"]
        lo = _qty(lim["min"], unit) if "min" in lim else None
        lo_v, hi_v = (_qty(v, "V") for v in ch["output"]["range"])
        half_lsb = (hi_v - lo_v) / 2 ** ch["output"]["bits"] / 2
        out[name] = (unit, lo, _qty(lim["max"], unit), _output_map(cal, unit), half_lsb)
    return out


CHANNELS = _limited_channels()
NAMES = sorted(CHANNELS)
SHAPES = ["linear", "exponential", "smooth", "minimum_jerk", "table"]
# an overshooting-free monotone shape table (PCHIP stays within its data)
SHAPE_TABLE = "[[0, 0], [0.3, 0.6], [0.7, 0.65], [1, 1]]"
# the analog card of the demo rig, as written in the rig file; the copy makes it interpolate linearly
AO_LINE = "ao_main:    {timebase: 1 MHz, min_interval: 2 us,"
assert AO_LINE in RIG_TEXT


def test_the_demo_calibrations_rise_over_their_limits():
    # the output-unit comparison below rests on this: each map rises monotonically between its limits
    for name, (_, lo, hi, to_volts, _) in CHANNELS.items():
        x = np.linspace(0.0 if lo is None else lo, hi, 2001)
        assert np.all(np.diff(to_volts(x)) > 0), name


def value_strategy(name):
    """Physical values around and beyond a channel's hard limits (and right on them)."""
    _, lo, hi, _, _ = CHANNELS[name]
    base = 0.0 if lo is None else lo
    span = hi - base
    # on the limits and within float noise of them
    edges = st.sampled_from([base, hi, hi * (1 + 1e-12), hi * (1 - 1e-12), base - 1e-12 * span])
    # 1e-6 to 30 % of the span inside or beyond a limit, log-uniform: half an LSB of these
    # 16-bit outputs is 1e-5 to 3e-5 of the span, so this covers sub-LSB to gross overshoots
    offset = st.tuples(st.sampled_from([-1.0, 1.0]), st.floats(-6, -0.5)).map(lambda p: p[0] * 10 ** p[1] * span)
    near_hi = offset.map(lambda d: hi + d)
    near_lo = offset.map(lambda d: base + d)
    anywhere = st.floats(base - 0.3 * span, hi + 0.3 * span, allow_nan=False)
    return st.one_of(edges, near_hi, near_lo, anywhere)


@st.composite
def actions(draw):
    name = draw(st.sampled_from(NAMES))
    kind = draw(st.sampled_from(["set", "ramp", "pulse"]))
    unit = CHANNELS[name][0]
    v = lambda: f"{draw(value_strategy(name))!r} {unit}"
    if kind == "set":
        return name, f"set: {{channel: {name}, value: {v()}}}", 0
    dur_us = draw(st.integers(4, 3000))
    if kind == "pulse":
        spec = f"pulse: {{channel: {name}, value: {v()}, duration: {dur_us} us"
        if draw(st.booleans()):
            spec += f", back_to: {v()}"
        return name, spec + "}", dur_us
    shape = draw(st.sampled_from(SHAPES))
    spec = f"ramp: {{channel: {name}, to: {v()}, over: {dur_us} us, shape: {shape}"
    if draw(st.booleans()):
        spec += f", from: {v()}"
    if shape == "exponential":
        spec += f", tau: {draw(st.sampled_from([-1, 1])) * draw(st.integers(2, 5000))} us"
    if shape == "table":
        spec += f", table: {SHAPE_TABLE}"
    return name, spec + "}", dur_us


@settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(steps=st.lists(st.tuples(actions(), st.integers(0, 2000)), min_size=1, max_size=6),
       linear=st.booleans())
def test_hard_limits_hold_in_every_build(steps, linear):
    with tempfile.TemporaryDirectory(prefix="seqgen-safety-") as tmp:
        tmp = Path(tmp)
        rig = RIG_TEXT.replace(AO_LINE, AO_LINE + " output_model: linear,") if linear else RIG_TEXT
        (tmp / "rig.yaml").write_text(rig, encoding="utf-8")
        lines = ["seqgen: 1", "rig: rig.yaml", "blocks:"]
        t_us = 100
        for i, ((_, spec, dur_us), gap_us) in enumerate(steps):
            lines += [f"  - name: b{i}", f"    at: {t_us} us", "    actions:", f"      - {spec}"]
            t_us += dur_us + gap_us + 5
        # every touched channel back to its safe value at the end (keeps safety.left-on out of the way)
        lines += ["  - name: end", f"    at: {t_us + 100} us", "    actions:"]
        lines += [f"      - set: {{channel: {n}, value: 0 {CHANNELS[n][0]}}}" for n in sorted({s[0][0] for s in steps})]
        (tmp / "seq.yaml").write_text("\n".join(lines) + "\n", encoding="utf-8")
        res = preflight(tmp / "seq.yaml")
    assert res.shot is not None, [f"{f.code}: {f.message}" for f in res.findings]
    assert not [f for f in res.findings if f.code == "schema.check-crashed"]
    if any(f.code == "safety.hard-limit" and f.severity == "error" for f in res.findings):
        assert not res.ok  # the build is refused
        return
    assert res.compiled is not None
    for table in res.compiled.tables:
        for j, name in enumerate(table.columns):
            if name not in CHANNELS:
                continue
            _, lo, hi, to_volts, half_lsb = CHANNELS[name]
            col = np.asarray(table.values)[:, j]
            played = col
            if linear and table.device == "ao_main" and len(col) > 1:
                mids = 0.5 * (table.ticks[1:] + table.ticks[:-1])
                played = np.concatenate((col, np.interp(mids, table.ticks, col)))
            # rising maps (checked above): min <= x <= max  <=>  out(min) <= out(x) <= out(max)
            allowance = half_lsb * (1 + 1e-6) + 1e-12 * max(1.0, np.abs(played).max())
            hi_v = float(to_volts(hi))
            assert played.max() <= hi_v + allowance, (name, played.max(), hi_v)
            if lo is not None:
                lo_v = float(to_volts(lo))
                assert played.min() >= lo_v - allowance, (name, played.min(), lo_v)
