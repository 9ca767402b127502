"""`seqgen.predict.played`: the physical value each output plays, read back from the compiled tables.

Expected values are computed here from the definitions, with the rig's own numbers written below: a DAC of
2^bits codes over [lo, hi] plays the nearest code (ties up), LSB = (hi - lo) / 2^bits, codes 0 .. 2^bits - 1
(IEEE Std 1658-2011, DAC terminology: 2^N LSB span the full-scale range); a row written at tick k
with latency L appears at k x tick + L, the compiler writing it early by L (nearest tick) so that the output
changes at the intended time; a linear calibration out = slope x phys + offset is inverted as
phys = (out - offset) / slope; a hold device holds each row, a linear one interpolates between rows.
"""

import math

import numpy as np
import pytest

from seqgen.pipeline import preflight
from seqgen.predict import INTENDED, PLAYED, compiled_shot, played, played_source

TICK = 1e-6  # both analog devices: 1 MHz timebase
LO, HI, BITS = 0.0, 10.0, 12  # the analog outputs' range and bits
SLOPE, OFFSET = 2.0, 0.1  # power_a: out = 2 V/W x P + 0.1 V
LAT = 0.3e-6  # power_a's latency: not a whole tick
RISE, FALL = 3.2e-6, 1.1e-6  # the shutter's latencies
DTICK = 1e-7  # digital device: 10 MHz

RIG = f"""seqgen_rig: 1
name: played-test
devices:
  ao: {{timebase: 1 MHz, min_interval: 1 us}}
  lin: {{timebase: 1 MHz, min_interval: 10 us, output_model: linear}}
  dio: {{timebase: 10 MHz, min_interval: 100 ns}}
channels:
  power_a:
    device: ao
    kind: analog
    output: {{unit: V, range: [{LO} V, {HI} V], bits: {BITS}}}
    calibration: {{quantity: W, linear: {{slope: {SLOPE} V/W, offset: {OFFSET} V}}}}
    latency: 300 ns
  power_b:
    device: lin
    kind: analog
    output: {{unit: V, range: [{LO} V, {HI} V], bits: {BITS}}}
    calibration: {{quantity: W, linear: {{slope: 4 V/W}}}}
    safe: 0 W
  shutter:
    device: dio
    kind: digital
    latency: {{rise: 3.2 us, fall: 1.1 us}}
    safe: 0
"""


def lsb():
    return (HI - LO) / 2 ** BITS


def dac(volts):
    """The output value of the nearest code (an exact half goes up; the top code is hi - 1 LSB)."""
    return LO + min(math.floor((volts - LO) / lsb() + 0.5), 2 ** BITS - 1) * lsb()


def appears(t, latency, tick):
    """When a write intended for t appears: its row sits at the tick nearest t - latency, plus the latency."""
    return round((t - latency) / tick) * tick + latency


def shot_of(project, blocks):
    (project / "rig.yaml").write_text(RIG, encoding="utf-8")
    (project / "s.yaml").write_text(f"seqgen: 1\nrig: rig.yaml\nblocks:\n{blocks}", encoding="utf-8")
    res = preflight(project / "s.yaml")
    assert res.shot is not None, [(f.code, f.message) for f in res.findings]
    return res


def test_a_set_plays_its_dac_code_from_its_latency_shifted_tick(project):
    power = 1.2345  # W
    t = 1.00037e-3  # not on a tick
    res = shot_of(project, f"  - name: a\n    at: {t * 1e3!r} ms\n    actions:\n"
                           f"      - set: {{channel: power_a, value: {power} W}}\n"
                           "      - hold: {duration: 1 ms}\n      - set: {channel: power_a, value: 0 W}\n")
    shot = res.shot
    want = (dac(SLOPE * power + OFFSET) - OFFSET) / SLOPE
    safe = (dac(OFFSET) - OFFSET) / SLOPE  # 0 W is 0.1 V: the nearest code, read back
    edge = appears(t, LAT, TICK)
    got = played(shot, "power_a", [edge - 0.05e-6, edge + 0.05e-6, t + 0.5e-3])
    assert got == pytest.approx([safe, want, want], abs=1e-12)
    assert abs(want - power) <= lsb() / SLOPE / 2 + 1e-15 and want != power  # quantized: not the intended value
    assert played_source(shot, "power_a") == PLAYED


def test_a_ramp_on_a_linear_device_is_interpolated_between_its_rows(project):
    res = shot_of(project, "  - name: a\n    at: 1 ms\n    actions:\n"
                           "      - ramp: {channel: power_b, from: 0 W, to: 2 W, over: 1 ms}\n"
                           "      - set: {channel: power_b, value: 0 W, at: 2 ms}\n")
    shot = res.shot
    table = next(tb for tb in compiled_shot(shot)[0].tables if tb.device == "lin")
    col = table.columns.index("power_b")
    ticks, volts = table.ticks * TICK, table.values[:, col]
    # between two rows of the table the device interpolates straight: read back through 4 V/W
    i = int(np.searchsorted(ticks, 1.5e-3))
    t = 0.5 * (ticks[i - 1] + ticks[i])
    want = 0.5 * (volts[i - 1] + volts[i]) / 4.0
    assert played(shot, "power_b", t)[0] == pytest.approx(want, rel=1e-12)
    # a linear ramp on a linear device: the rows hold the DAC codes of the line, so the played value is the
    # intended one to half an LSB
    assert played(shot, "power_b", 1.5e-3)[0] == pytest.approx(1.0, abs=lsb() / 4.0 / 2 + 1e-12)
    # a linear device makes the step at 3 ms a ramp over one minimum interval (10 us) ending at the step:
    # 2 W (8 V) until 10 us before it, half way down 5 us before it, 0 W after it
    step = 3e-3
    got = played(shot, "power_b", [step - 11e-6, step - 5e-6, step + 1e-6])
    assert got == pytest.approx([dac(8.0) / 4.0, dac(8.0) / 4.0 / 2, 0.0], abs=1e-9)


def test_a_digital_line_rises_and_falls_at_the_intended_times(project):
    t_on, t_off = 1.00012e-3, 2.00037e-3
    res = shot_of(project, f"  - name: a\n    at: {t_on * 1e3!r} ms\n    actions:\n"
                           "      - set: {channel: shutter, value: 1}\n"
                           f"  - name: b\n    at: {t_off * 1e3!r} ms\n    actions:\n"
                           "      - set: {channel: shutter, value: 0}\n")
    shot = res.shot
    on, off = appears(t_on, RISE, DTICK), appears(t_off, FALL, DTICK)
    eps = 1e-9
    got = played(shot, "shutter", [on - eps, on + eps, off - eps, off + eps])
    assert got.tolist() == [0.0, 1.0, 1.0, 0.0]


def test_an_output_that_cannot_be_compiled_falls_back_to_the_intended_values(project):
    # the shutter must be commanded 3.2 us before t = 0: the compiler clamps it, so its table is not what
    # the sequence asks for; the intended values stand in and say so
    res = shot_of(project, "  - name: a\n    actions:\n      - set: {channel: shutter, value: 1}\n"
                           "      - set: {channel: power_a, value: 1 W, at: 1 ms}\n")
    shot = res.shot
    assert "timing.before-start" in [f.code for f in res.findings]
    assert played_source(shot, "shutter") == INTENDED
    assert played(shot, "shutter", [0.0, 1e-6]).tolist() == [1.0, 1.0]
    assert played_source(shot, "power_a") == PLAYED


def test_preflight_compiles_once_and_keeps_the_tables_the_predictions_read(project, monkeypatch):
    import sys

    played_module = sys.modules["seqgen.predict.played"]  # the package's `played` is the function of that name

    calls = []
    real = played_module.compile_shot
    monkeypatch.setattr(played_module, "compile_shot", lambda shot: calls.append(1) or real(shot))
    res = shot_of(project, "  - name: a\n    at: 1 ms\n    actions:\n"
                           "      - set: {channel: power_a, value: 1 W}\n")
    played(res.shot, "power_a", 2e-3)
    assert len(calls) == 1
    assert compiled_shot(res.shot)[0] is res.compiled
