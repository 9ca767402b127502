"""Text for numbers in messages, reports and plots: times, frequencies, lengths, fields, percentages,
hyperfine states and vectors.

One module for every writer (findings, diff, plot, report, show, the checks), so a quantity reads the same
everywhere. It imports nothing from seqgen: any stage may use it without an import cycle.

Most formatters pick a unit from a ladder (largest first: the first rung the magnitude reaches, else the
last rung) and print `digits` significant digits. `digits` is one number, or a {unit: digits} mapping where
the resolution should stay about the same across rungs (a line frequency to the hertz in MHz and in kHz).
The keyword arguments exist so each message keeps its exact text: finding messages are compared byte for
byte by tests and fault files.
"""

from __future__ import annotations

import math

# Exact SI defining constants (SI Brochure, 9th ed. (2019)); the same floats as scipy.constants.h and .k.
PLANCK_H = 6.62607015e-34  # J s
BOLTZMANN_K = 1.380649e-23  # J/K
TESLA_PER_GAUSS = 1e-4

TIME_UNITS = ((1.0, "s"), (1e-3, "ms"), (1e-6, "us"), (1e-9, "ns"))
FREQ_UNITS = ((1e9, "GHz"), (1e6, "MHz"), (1e3, "kHz"), (1.0, "Hz"))
LENGTH_UNITS = ((1.0, "m"), (1e-3, "mm"), (1e-6, "um"))
_SCALE = {u: s for ladder in (TIME_UNITS, FREQ_UNITS, LENGTH_UNITS) for s, u in ladder}
_SI_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"))


def _digits_for(digits, unit: str) -> int:
    return digits[unit] if isinstance(digits, dict) else digits


def scaled(value: float, ladder, digits=4) -> str:
    """`value` in the first rung of `ladder` ((scale, unit), largest first) that |value| reaches, else the last."""
    a = abs(value)
    for scale, unit in ladder[:-1]:
        if a >= scale:
            return _scaled_text(value, scale, unit, digits)
    scale, unit = ladder[-1]
    return _scaled_text(value, scale, unit, digits)


def _scaled_text(value: float, scale: float, unit: str, digits) -> str:
    # Scale by multiplying for small units and dividing for large ones: the float rounding every
    # existing message was written with (t * 1e3 for ms, f / 1e6 for MHz).
    if scale < 1.0:
        v = value * round(1 / scale)
    elif scale > 1.0:
        v = value / scale
    else:
        v = value
    return f"{v:.{_digits_for(digits, unit)}g} {unit}"


def _ladder(units, names) -> tuple:
    return tuple((s, u) for s, u in units if u in names)


def fmt_time(t: float, digits=4, *, unit: str | None = None, floor: str = "us", zero: str | None = None,
             nonfinite: str | None = None) -> str:
    """A time in s / ms / us (/ ns with floor="ns"): 2.5e-3 -> '2.5 ms'.

    `unit`: always this unit; `floor`: the smallest unit used; `zero`: the text for exactly 0; `nonfinite`:
    the text for inf / nan (e.g. 'never')."""
    if nonfinite is not None and not math.isfinite(t):
        return nonfinite
    if zero is not None and t == 0:
        return zero
    if unit is not None:
        return _scaled_text(t, _SCALE[unit], unit, digits)
    names = [u for _, u in TIME_UNITS]
    return scaled(t, _ladder(TIME_UNITS, names[: names.index(floor) + 1]), digits)


def fmt_when(t: float) -> str:
    """A moment on the timeline (findings, reports, plot axes): '0 s', us to 4 digits below 1 ms, ms and s
    to 6 digits (1.72015 s, 12.5 ms)."""
    if not math.isfinite(t):  # inf / nan in seconds, like any time too large for ms
        return f"{t:.6g} s"
    return fmt_time(t, {"s": 6, "ms": 6, "us": 4}, zero="0 s")


def fmt_time_fixed(t: float) -> str:
    """A time with fixed decimals, trailing zeros trimmed: us below 1 ms, else ms to 0.1 ns
    (2.72306 s -> '2723.06 ms'); below 0.5 ps: '0 ms'. The diff lines up times this way."""
    a = abs(t)
    if a < 0.5e-12:
        return "0 ms"
    if a < 1e-3:
        return _trim(f"{t * 1e6:.4f}") + " us"
    return _trim(f"{t * 1e3:.4f}") + " ms"


def _trim(text: str) -> str:
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text or "0"


def fmt_freq(f: float, digits=4, *, unit: str | None = None, top: str = "GHz") -> str:
    """A frequency in GHz / MHz / kHz / Hz: 1.7716e9 -> '1.772 GHz'. `top`: the largest unit used
    (top="MHz": 1.7716e9 -> '1771.6 MHz'); digits=10 keeps a synthesizer setting."""
    if unit is not None:
        return _scaled_text(f, _SCALE[unit], unit, digits)
    names = [u for _, u in FREQ_UNITS]
    return scaled(f, _ladder(FREQ_UNITS, names[names.index(top):]), digits)


def fmt_length(x: float, digits=4, *, unit: str | None = None, mm_from: float = 1e-3) -> str:
    """A length in um below `mm_from` (metres), else mm: 2.5e-5 -> '25 um'. `unit`: always this unit
    ('m', 'mm' or 'um')."""
    if unit is not None:
        return _scaled_text(x, _SCALE[unit], unit, digits)
    return _scaled_text(x, 1e-6, "um", digits) if abs(x) < mm_from else _scaled_text(x, 1e-3, "mm", digits)


def fmt_pct(fraction: float, digits: int = 3) -> str:
    """A fraction as a percentage: 0.125 -> '12.5 %'."""
    return f"{fraction * 100:.{digits}g} %"


def fmt_state(f, mf) -> str:
    """A hyperfine state |F, mF> with the sign of mF: (2, 1) -> '|F=2, mF=+1>', (1, 0) -> '|F=1, mF=0>'."""
    return f"|F={f}, mF={mf:+d}>" if mf else f"|F={f}, mF=0>"


def fmt_vec(v, digits: int = 3, *, scale: float = 1.0, unit: str = "") -> str:
    """A vector '[x, y, z]' (times `scale`, then ' unit' if given); -0 prints as 0."""
    text = "[" + ", ".join(f"{x * scale + 0.0:.{digits}g}" for x in v) + "]"
    return f"{text} {unit}" if unit else text


def fmt_gauss(b_t: float, digits: int = 4) -> str:
    """A magnetic field (tesla) in gauss: 1e-4 -> '1 G'."""
    return f"{b_t / TESLA_PER_GAUSS:.{digits}g} G"


def fmt_gauss_per_cm(g_t_m: float, digits: int = 4) -> str:
    """A field gradient (T/m) in G/cm: 1 T/m -> '100 G/cm'."""
    return f"{g_t_m * 100:.{digits}g} G/cm"


def fmt_gauss_per_cm2(c_t_m2: float, digits: int = 4) -> str:
    """A field curvature (T/m^2) in G/cm^2; 1 G/cm^2 = 1e-4 T / 1e-4 m^2 = 1 T/m^2."""
    return f"{c_t_m2:.{digits}g} G/cm^2"


def fmt_angle_pi(x: float) -> str:
    """An angle in rad and in units of pi: pi/2 -> '1.571 rad (0.5 pi)'."""
    return f"{x:.4g} rad ({x / math.pi:.3g} pi)"


def fmt_temperature(t_k: float, digits: int = 4) -> str:
    """A temperature in nK below 1 uK, else uK: 2.5e-7 -> '250 nK'."""
    return f"{t_k * 1e9:.{digits}g} nK" if abs(t_k) < 1e-6 else f"{t_k * 1e6:.{digits}g} uK"


def fmt_energy(e_j: float) -> str:
    """An energy as h x frequency and as a temperature times k_B: 'h x 20.84 kHz (1 uK x k_B)'."""
    return f"h x {e_j / PLANCK_H / 1e3:.4g} kHz ({fmt_temperature(e_j / BOLTZMANN_K)} x k_B)"


def fmt_si(value: float, unit: str, digits: int = 6) -> str:
    """Engineering notation with an SI prefix: (0.0025, 's') -> '2.5 ms'. No prefix for kg, compound units
    (with '/', '^' or a space; m/s and T/m too), zero and non-finite values; no unit: a bare number."""
    if unit in ("", "dimensionless"):
        return f"{value:.{digits}g}"
    if not math.isfinite(value) or value == 0:
        return f"{value:g} {unit}"
    if unit in ("kg", "m/s", "W/m^2", "T/m", "rad/s") or " " in unit or "^" in unit:
        return f"{value:.{digits}g} {unit}"
    a = abs(value)
    for factor, prefix in _SI_PREFIXES:
        if a >= factor * 0.9999999:
            return f"{value / factor:.{digits}g} {prefix}{unit}"
    return f"{value:.{digits}g} {unit}"


def outward(x: float, digits: int = 4, *, up: bool = True, strict: bool = False) -> float:
    """`x` rounded to `digits` significant digits up (or down), so that a bound a fix names, printed to that
    many digits, still meets the check it comes from; `strict`: a value on the rounding grid moves one step
    further (for a check that still fires at equality). Float noise below 12 digits is dropped first, so
    2 x 50 us stays 100 us."""
    x = float(f"{x:.12g}")
    if x == 0 or not math.isfinite(x):
        return x
    q = 10.0 ** (math.floor(math.log10(abs(x))) - (digits - 1))
    n = round(x / q, 6)
    r = math.ceil(n) if up else math.floor(n)
    if strict and r == n:
        r += 1 if up else -1
    return float(f"{r * q:.{digits}g}")
