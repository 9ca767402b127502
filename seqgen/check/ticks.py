"""Times a fix proposes, put on the ticks the hardware plays.

A duration or time a finding proposes is written into the file and then played by the devices of the channels
the action writes: each edge lands on a tick of its device (compile rounds it there, and timing.sub-tick notes
it). So a proposed value is a whole number of ticks of every such device (the least common multiple of their
ticks), at least their minimum interval, and is printed with the digits that land on that tick."""

from __future__ import annotations

import math
from fractions import Fraction

from ..textfmt import fmt_time

_SCALE = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "ns": 1e-9}


def action_outputs(shot, act) -> tuple:
    """The outputs the action `act` (a PhysAction or a Segment) writes: its segments of the same block and place."""
    return tuple(sorted({s.output for s in shot.segments if s.block == act.block and s.pos == act.pos}))


def _devices(shot, outputs):
    names = {shot.rig.outputs[o].device for o in outputs if o in shot.rig.outputs}
    return [shot.rig.devices[n] for n in sorted(names) if n in shot.rig.devices]


def grid(shot, outputs) -> float:
    """The coarsest common tick (s) of the devices of `outputs`: the least common multiple of their ticks
    (1 / gcd of the timebases); 0.0 without a device."""
    rates = [Fraction(d.timebase_hz).limit_denominator(10 ** 6) for d in _devices(shot, outputs) if d.timebase_hz > 0]
    if not rates:
        return 0.0
    num, den = rates[0].numerator, rates[0].denominator
    for r in rates[1:]:
        num, den = math.gcd(num, r.numerator), den * r.denominator // math.gcd(den, r.denominator)
    return float(Fraction(den, num))


def min_interval(shot, outputs) -> float:
    """The longest minimum interval (s) of the devices of `outputs` between two rows; 0.0 without one."""
    return max((d.min_interval_ticks / d.timebase_hz for d in _devices(shot, outputs) if d.timebase_hz > 0),
               default=0.0)


def on_grid(t0: float, d: float, g: float, mode: str = "nearest", at_least: float = 0.0) -> float:
    """A duration from t0 close to `d` whose end lands on the grid `g` (s): the nearest ("nearest"), the next
    at or above d ("up") or at or below it ("down"); as played (from t0 on its tick) at least one tick and at
    least `at_least`. `d` as it is without a grid."""
    if not g > 0 or not math.isfinite(d):
        return d
    s0 = round(t0 / g) * g  # where the start plays
    n = (t0 + d - s0) / g
    k = {"nearest": math.floor(n + 0.5), "up": math.ceil(n - 1e-6), "down": math.floor(n + 1e-6)}[mode]
    k = max(k, 1, math.ceil(at_least / g - 1e-6))
    return s0 + k * g - t0


def overlap(t0: float, t1: float, g: float) -> float:
    """How long the pulse written from t0 to t1 plays inside [t0, t1], its edges on the grid `g`: the part of it an
    analysis that integrates what is played over the written interval sees (t1 - t0 without a grid)."""
    if not g > 0:
        return t1 - t0
    return max(0.0, min(t1, on_tick(t1, g)) - max(t0, on_tick(t0, g)))


def on_tick(t: float, g: float, mode: str = "nearest") -> float:
    """A moment `t` (s) on the grid `g`: the nearest tick, or the next at or after ("up") / at or before ("down")."""
    if not g > 0 or not math.isfinite(t):
        return t
    n = t / g
    return {"nearest": math.floor(n + 0.5), "up": math.ceil(n - 1e-6), "down": math.floor(n + 1e-6)}[mode] * g


def fmt_tick(d: float, g: float, digits: int = 4, *, unit: str | None = None, lead: float = 0.0) -> str:
    """`d` (s) as fmt_time writes it, with as many more digits as it takes for the text, read back, to lie within
    a millionth of a tick of d (a time on the grid stays on it once written); `lead` is a time the text is added
    to in the file (a block's start), whose float noise does not count."""
    text = fmt_time(d, digits, unit=unit)
    if not g > 0:
        return text
    for n in range(digits, 16):
        text = fmt_time(d, n, unit=unit)
        number, _, u = text.partition(" ")
        if abs(float(number) * _SCALE.get(u, 1.0) - d) <= 1e-6 * g + 1e-15 * abs(lead):
            break
    return text


def duration_text(shot, act, d: float, mode: str = "nearest", *, digits: int = 4, unit: str | None = None,
                  outputs: tuple | None = None) -> str:
    """A duration of the action `act` (PhysAction or Segment) near `d`, as its devices play it (`on_grid`, at
    least their minimum interval), in words; `outputs`: the channels whose ticks count (default: the action's)."""
    outs = action_outputs(shot, act) if outputs is None else outputs
    g = grid(shot, outs)
    if not g > 0 or not math.isfinite(d):
        return fmt_time(d, digits, unit=unit)
    return fmt_tick(on_grid(act.t0, d, g, mode, at_least=min_interval(shot, outs)), g, digits, unit=unit, lead=act.t0)


def moment_text(shot, act, t: float, base: float, mode: str, *, digits: int = 4, unit: str | None = None,
                outputs: tuple | None = None) -> tuple[str, float]:
    """A time `t` counted from `base` (s) at which the action `act` starts on a tick of its devices (the nearest,
    or the next after / before it), in words, and its value (s)."""
    outs = action_outputs(shot, act) if outputs is None else outputs
    g = grid(shot, outs)
    if not g > 0 or not math.isfinite(t):
        return fmt_time(t, digits, unit=unit), t
    x = on_tick(base + t, g, mode) - base
    return fmt_tick(x, g, digits, unit=unit, lead=base), x


def freq_text(shot, output: str | None, f: float, digits: int = 10) -> str:
    """A frequency (Hz) a fix proposes for the synth frequency `output`, on its word (the nearest code: code_zero +
    code x lsb), with the digits that land on it; `digits` significant digits without a word."""
    out = shot.rig.outputs.get(output) if output else None
    lsb = out.lsb if out is not None else 0.0
    if not lsb > 0 or not math.isfinite(f):
        return f"{f:.{digits}g} Hz"
    f = out.code_zero + round((f - out.code_zero) / lsb) * lsb
    for n in range(digits, 18):
        if abs(float(f"{f:.{n}g}") - f) <= 1e-3 * lsb:
            break
    return f"{f:.{n}g} Hz"
