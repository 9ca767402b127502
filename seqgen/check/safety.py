"""Safety checks: end state of outputs, coil heating."""

from __future__ import annotations

from ..findings import make
from ..registry import check


@check("safety.left-on", "error", "common practice (no source): every output ends at its safe value")
def left_on(shot):
    """An output whose last value is not its safe value, so it stays on after
    the sequence ends: a coil left carrying current, a high-power beam left on.
    Coil currents and beam powers are errors; other outputs warnings. List
    outputs that must stay on under `end: {leave_on: [...]}`."""
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
            yield make("safety.left-on", f"'{name}' ends at {s.v1:.6g} {out.phys_unit}, not its safe value {out.safe:g}",
                       s.pos, severity="error" if serious else "warning", block=s.block, time_s=s.t1,
                       hint=f"end with a set back to {out.safe:g}, or list it under end: leave_on")
