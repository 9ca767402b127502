"""Safety checks: end state of outputs, coil heating."""

from __future__ import annotations

import numpy as np

from ..findings import make
from ..textfmt import outward
from .rules import rule
from ..codes import COIL_CURRENT, COIL_HEATING, LEFT_ON


@rule(LEFT_ON)
def left_on(shot):
    power_channels = {b.power_channel for b in shot.rig.beams.values()}
    coil_channels = {c.current_channel for c in shot.rig.coils.values()}
    last = {}
    for s in shot.segments:
        if s.output not in last or s.t1 >= last[s.output].t1:
            last[s.output] = s
    for name, s in sorted(last.items()):
        out = shot.rig.outputs[name]
        if out.channel in shot.leave_on or name in shot.leave_on or (out.kind == "synth" and out.unit):
            # a synth's frequency or phase left set emits nothing; only its amplitude matters
            continue
        if abs(s.v1 - out.safe) > 1e-12 * max(1.0, abs(out.safe)):
            serious = out.channel in power_channels or out.channel in coil_channels
            unit = f" {out.phys_unit}" if out.phys_unit else ""
            yield make(LEFT_ON, f"'{name}' ends at {s.v1:.6g}{unit}, not its safe value {out.safe:g}{unit}",
                       s.pos, severity="error" if serious else "warning", block=s.block, time_s=s.t1,
                       hint=f"end with a set back to {out.safe:g}, or list it under end: leave_on")


def _current_squared_integral(shot, output: str, t_end: float, window: float | None = None):
    """Integral of I^2 dt over the sequence, and its largest value over any window of `window` seconds."""
    from ..values import value_at

    segs = [s for s in shot.segments if s.output == output]
    edges = sorted({0.0, t_end, *(s.t0 for s in segs), *(s.t1 for s in segs)})
    pts = []
    for a, b in zip(edges, edges[1:]):
        if b > a:
            pts.append(np.linspace(a, b, 33)[:-1])  # piecewise smooth: 32 points per piece are plenty
    t = np.concatenate(pts + [np.array([t_end])])
    i2 = value_at(shot, output, t) ** 2
    # values change at set times: evaluate each piece from its left end (right-continuous steps)
    cum = np.concatenate([[0.0], np.cumsum(0.5 * (i2[1:] + i2[:-1]) * np.diff(t))])
    total = float(cum[-1])
    peak = None
    if window:
        j = np.searchsorted(t, t + window)
        j = np.minimum(j, len(t) - 1)
        peak = float(np.max(cum[j] - cum))
    return total, peak



@rule(COIL_CURRENT)
def coil_current(shot):
    by_channel = {c.current_channel: c for c in shot.rig.coils.values() if c.max_current}
    if not by_channel:
        return
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        coil = by_channel.get(out.channel)
        if coil is None:
            continue
        peak = max(abs(v) for v in (s.v0, s.v1) if v is not None)
        if peak > coil.max_current * (1 + 1e-12):
            yield make(COIL_CURRENT, f"coil '{coil.name}' would carry {peak:.4g} A, above its max_current "
                       f"{coil.max_current:.4g} A (rig file)", s.pos, block=s.block, time_s=s.t0,
                       hint=f"lower the current to at most {outward(coil.max_current, up=False):.4g} A",
                       data={"current_a": peak, "max_current_a": coil.max_current})


@rule(COIL_HEATING)
def coil_heating(shot):
    period = max(shot.rig.repetition_period_s or shot.duration_s, shot.duration_s)
    for coil in shot.rig.coils.values():
        out = shot.rig.outputs.get(coil.current_channel)
        if out is None or not any(s.output == out.name for s in shot.segments):
            continue
        if not coil.continuous_current and not coil.i2t_limit:
            continue
        total, peak = _current_squared_integral(shot, out.name, shot.duration_s, coil.i2t_window)
        pos = next(s.pos for s in shot.segments if s.output == out.name)
        if coil.continuous_current:
            rms = (total / period) ** 0.5
            if rms > coil.continuous_current:
                yield make(COIL_HEATING, f"coil '{coil.name}' carries {rms:.3g} A RMS over the {period:.3g} s "
                           f"repetition period, above its continuous rating {coil.continuous_current:.3g} A", pos,
                           hint="shorten the high-current pulses or lengthen the repetition period")
        if coil.i2t_limit and peak is not None and peak > coil.i2t_limit:
            yield make(COIL_HEATING, f"coil '{coil.name}' reaches {peak:.3g} A^2 s within {coil.i2t_window:.3g} s, "
                       f"above its limit {coil.i2t_limit:.3g} A^2 s", pos, hint="spread the current pulses out")
