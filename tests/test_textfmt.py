"""seqgen.textfmt: each formatter, with the arguments that reproduce one of the message helpers it replaces,
against strings written out by hand (Python's format-spec rules for 'g': significant digits, trailing zeros
dropped). The comment beside each group names the helper whose text it pins."""

import math

import pytest
from scipy import constants as sc

from seqgen import textfmt as tf


def test_constants_are_the_exact_si_values():
    assert tf.PLANCK_H == sc.h
    assert tf.BOLTZMANN_K == sc.k
    assert tf.TESLA_PER_GAUSS == 1e-4  # 1 G = 1e-4 T exactly (SI Brochure, 9th ed., table of non-SI units)


@pytest.mark.parametrize("t, text", [  # findings' time of a finding; plot axes; report
    (0.0, "0 s"), (2.5e-3, "2.5 ms"), (12.5e-3, "12.5 ms"), (1.72015, "1.72015 s"), (1.23456789e-3, "1.23457 ms"),
    (1.234567e-4, "123.5 us"), (5e-7, "0.5 us"), (-2e-3, "-2 ms"), (math.inf, "inf s"), (math.nan, "nan s"),
])
def test_fmt_when(t, text):
    assert tf.fmt_when(t) == text


@pytest.mark.parametrize("t, kw, text", [
    # physics_states._fmt_t: s / ms / us to 4 digits
    (2.5e-3, {}, "2.5 ms"), (1.23456, {}, "1.235 s"), (5e-7, {}, "0.5 us"), (0.0, {}, "0 us"),
    (1e-3, {}, "1 ms"), (0.99999, {}, "1000 ms"), (math.nan, {}, "nan us"),
    # physics_barrier._ms: always ms, 'never' for an infinite time
    (3e-3, {"unit": "ms", "nonfinite": "never"}, "3 ms"), (1.5, {"unit": "ms", "nonfinite": "never"}, "1500 ms"),
    (math.inf, {"unit": "ms", "nonfinite": "never"}, "never"),
    # further options
    (5e-7, {"floor": "ns"}, "500 ns"), (0.0, {"zero": "0 s"}, "0 s"), (1.23456, {"digits": 6}, "1.23456 s"),
])
def test_fmt_time(t, kw, text):
    assert tf.fmt_time(t, **kw) == text


@pytest.mark.parametrize("t, text", [  # diff.fmt.t
    (2.72306, "2723.06 ms"), (2.5e-5, "25 us"), (0.0, "0 ms"), (1e-3, "1 ms"), (1.23456789e-3, "1.2346 ms"),
    (-4e-6, "-4 us"),
])
def test_fmt_time_fixed(t, text):
    assert tf.fmt_time_fixed(t) == text


NA_CLOCK_HZ = 1771626128.8  # Na-23 ground hyperfine splitting (from memory); only its digits matter here


@pytest.mark.parametrize("f, args, kw, text", [
    # physics_states._fmt_hz: GHz / MHz / kHz / Hz to 4 digits
    (NA_CLOCK_HZ, (), {}, "1.772 GHz"), (2.5e3, (), {}, "2.5 kHz"), (-3e6, (), {}, "-3 MHz"), (12.0, (), {}, "12 Hz"),
    (0.0, (), {}, "0 Hz"),
    # physics_states._line_hz: 10 digits, enough for a synthesizer setting
    (NA_CLOCK_HZ, (10,), {}, "1.771626129 GHz"), (1234567.891, (10,), {}, "1.234567891 MHz"),
    # physics_barrier._hz_text: no GHz; MHz to 6 digits, kHz to 5, Hz to 4
    (NA_CLOCK_HZ, ({"MHz": 6, "kHz": 5, "Hz": 4},), {"top": "MHz"}, "1771.63 MHz"),
    (12345.6, ({"MHz": 6, "kHz": 5, "Hz": 4},), {"top": "MHz"}, "12.346 kHz"),
    (123.456, ({"MHz": 6, "kHz": 5, "Hz": 4},), {"top": "MHz"}, "123.5 Hz"),
    # a fixed unit
    (2.5e6, (), {"unit": "kHz"}, "2500 kHz"),
])
def test_fmt_freq(f, args, kw, text):
    assert tf.fmt_freq(f, *args, **kw) == text


@pytest.mark.parametrize("x, args, kw, text", [
    # physics_barrier._um: um below 1 cm, else mm, 4 digits
    (2.5e-5, (), {"mm_from": 1e-2}, "25 um"), (5e-3, (), {"mm_from": 1e-2}, "5000 um"),
    (2e-2, (), {"mm_from": 1e-2}, "20 mm"), (1.23456e-4, (), {"mm_from": 1e-2}, "123.5 um"),
    # physics_traps._length: um below 1 mm, else mm, 3 digits
    (1.2345e-4, (3,), {}, "123 um"), (5e-3, (3,), {}, "5 mm"), (-2.5e-3, (3,), {}, "-2.5 mm"),
    # a fixed unit
    (1.5, (), {"unit": "m"}, "1.5 m"), (1.5, (), {"unit": "mm"}, "1500 mm"),
])
def test_fmt_length(x, args, kw, text):
    assert tf.fmt_length(x, *args, **kw) == text


@pytest.mark.parametrize("x, text", [(0.125, "12.5 %"), (0.03333, "3.33 %"), (1.0, "100 %"), (0.0, "0 %"),
                                     (2e-5, "0.002 %")])
def test_fmt_pct(x, text):  # physics_states._pct and physics_barrier._pct
    assert tf.fmt_pct(x) == text


@pytest.mark.parametrize("f, mf, text", [(2, 1, "|F=2, mF=+1>"), (1, 0, "|F=1, mF=0>"), (1, -1, "|F=1, mF=-1>"),
                                         (2, -2, "|F=2, mF=-2>")])
def test_fmt_state(f, mf, text):  # physics_states.state_text and physics_magnetic._state_text, with (s[0], s[1])
    assert tf.fmt_state(f, mf) == text


def test_fmt_vec():
    # physics_states._vec_text and physics_traps._vec: 3 digits, -0 printed as 0
    assert tf.fmt_vec([0.0, -0.0, 1.0]) == "[0, 0, 1]"
    assert tf.fmt_vec((1.23456, -2e-3, 0.0)) == "[1.23, -0.002, 0]"
    # physics_traps._mm: metres shown in mm
    assert tf.fmt_vec([1e-3, -0.0, 2.5e-4], scale=1e3, unit="mm") == "[1, 0, 0.25] mm"


def test_magnetic_quantities():  # physics_magnetic._gauss, _g_cm, _g_cm2
    assert tf.fmt_gauss(1e-4) == "1 G"
    assert tf.fmt_gauss(2.5e-3) == "25 G"
    assert tf.fmt_gauss(1.23456e-5) == "0.1235 G"
    assert tf.fmt_gauss_per_cm(0.5) == "50 G/cm"  # 1 T/m = 100 G/cm
    assert tf.fmt_gauss_per_cm2(200.0) == "200 G/cm^2"  # 1 T/m^2 = 1 G/cm^2


def test_angle_in_pi():  # physics_states._pi
    assert tf.fmt_angle_pi(math.pi / 2) == "1.571 rad (0.5 pi)"
    assert tf.fmt_angle_pi(math.pi) == "3.142 rad (1 pi)"


def test_energy_as_frequency_and_temperature():  # physics_barrier._energy_text
    # k_B x 1 uK / h = 1.380649e-29 J / 6.62607015e-34 J s = 20836.6 Hz
    assert tf.fmt_energy(sc.k * 1e-6) == "h x 20.84 kHz (1 uK x k_B)"
    assert tf.fmt_energy(sc.k * 5e-7) == "h x 10.42 kHz (500 nK x k_B)"
    assert tf.fmt_temperature(2.5e-7) == "250 nK"
    assert tf.fmt_temperature(3e-6) == "3 uK"


@pytest.mark.parametrize("v, unit, text", [  # resolve.units.format_value (show, diff, plot); no prefix below p
    (0.0025, "s", "2.5 ms"), (0.024, "W", "24 mW"), (0.0, "V", "0 V"), (1.5, "kg", "1.5 kg"),
    (2.0, "T/m", "2 T/m"), (3.3, "", "3.3"), (NA_CLOCK_HZ, "Hz", "1.77163 GHz"), (0.99999999, "V", "1 V"),
    (-2e-12, "s", "-2 ps"), (-1e-13, "s", "-1e-13 s"), (math.inf, "Hz", "inf Hz"),
])
def test_fmt_si(v, unit, text):
    assert tf.fmt_si(v, unit) == text
