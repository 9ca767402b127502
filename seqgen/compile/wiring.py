"""The edges a rig's wiring needs, generated on the parents' lines (README "Wiring").

A device started by a trigger (`start: {on: LINE, latency: ...}`) gets one pulse on LINE, one trigger latency
before its first commanded row; its table keeps the shot's absolute ticks and `Compiled.starts` (the manifest's
`start_s`) says when it starts. A table-stepped or externally clocked device (`advance: {per_edge: LINE}`,
`clock: {line: LINE}`) gets one pulse per table row after its first (the initial row it is armed with), the shot's
end row excepted. Children are compiled before their parents, so the pulses come from the child's final rows.
"""

from __future__ import annotations

from ..model import Device, Output, Segment

DEFAULT_PULSE_S = 1e-6  # a trigger pulse when the line states no min_pulse (common practice, no source)


def wiring_lines(device: Device) -> tuple:
    """The lines that wire a device (start, step, clock), those it has."""
    return tuple(x for x in (device.start_on, device.step_on, device.clock_on) if x)


def compile_order(devices, outputs) -> list:
    """Device names, each wired child before the device whose line wires it, otherwise in rig order (resolve
    refuses wiring loops; a loop left in anyway ends the walk rather than recursing)."""
    children: dict = {}
    for d in devices.values():
        for line in wiring_lines(d):
            if line in outputs:
                children.setdefault(outputs[line].device, []).append(d.name)
    done: list = []
    seen: set = set()

    def visit(name):
        if name in seen:
            return
        seen.add(name)
        for child in children.get(name, ()):
            visit(child)
        done.append(name)

    for n in devices:
        visit(n)
    return done


def pulse_width(line: Output, parent: Device) -> float:
    """A generated pulse: the line's min_pulse (else 1 us), at least one row interval of the line's device."""
    return max(line.min_pulse_s or DEFAULT_PULSE_S, parent.min_interval_ticks * parent.tick_s)


def pulse(line: Output, t: float, width: float, device: Device) -> tuple:
    """One generated pulse on `line` (rise at t) as two sets marked action "wiring"."""
    pos = device.wiring_pos or device.pos
    return (Segment(line.name, "set", t, t, None, 1.0, "wiring", "wiring", pos),
            Segment(line.name, "set", t + width, t + width, None, 0.0, "wiring", "wiring", pos))


def row_edges(device: Device, table, end_tick: int) -> list:
    """Edge times (s) of a stepped or clocked device: one per row after the first, one step latency ahead of the
    row; the shot's end row only when it changes a value (else it is the end marker, which needs no edge)."""
    lat = device.start_latency_s if device.step_on else 0.0
    ticks = [int(k) for k in table.ticks]
    n = len(ticks)
    if n > 1 and ticks[-1] >= end_tick and (table.codes[-1] == table.codes[-2]).all():
        n -= 1
    return [k * table.tick_s - lat for k in ticks[1:n]]
