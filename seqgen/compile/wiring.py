"""The edges a rig's wiring needs, generated on the parents' lines (README "Wiring").

A device started by a trigger (`start: {on: LINE, latency: ...}`) gets one pulse on LINE at a fixed time near the
start of the shot, as a lab's master starts the others once: the parent's first row after its armed row 0, moved
later until the device starts (pulse + trigger latency) on a tick of its own timebase. The start so does not depend
on what the sequence writes (a scan's shots share the parent's table); its table keeps the shot's absolute ticks and
`Compiled.starts` (the manifest's `start_s`) says when it starts; rows before it are check.wiring's. A table-stepped or externally clocked device (`advance: {per_edge: LINE}`,
`clock: {line: LINE}`) gets one pulse per table row after its first (the initial row it is armed with), the shot's
end row excepted. Children are compiled before their parents, so the pulses come from the child's final rows.
"""

from __future__ import annotations

import numpy as np

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


def pulse_width(line: Output, parent: Device, child: Device | None = None) -> float:
    """A generated pulse: the line's min_pulse (else 1 us), at least one row interval of the line's device and the
    child's min_trigger_pulse."""
    child_min = child.min_trigger_pulse_s if child is not None else 0.0
    return max(line.min_pulse_s or DEFAULT_PULSE_S, parent.min_interval_ticks * parent.tick_s, child_min)


def start_edge(device: Device, parent: Device) -> tuple:
    """(pulse time, start time) (s) of a triggered device: the pulse at the parent's first row after row 0 or
    later, on the parent's grid, such that pulse + trigger latency falls on a tick of the device (the first such
    within 10 000 of its ticks; else the first, off the parent's grid by less than one of the parent's ticks)."""
    lat, ct, pt = device.start_latency_s, device.tick_s, parent.tick_s
    first = parent.min_interval_ticks * pt
    k0 = max(1, int(np.ceil((first + lat) / ct - 1e-9)))
    for k in range(k0, k0 + 10_000):
        t = k * ct - lat
        if abs(t / pt - round(t / pt)) < 1e-6:
            return round(t / pt) * pt, k * ct
    return k0 * ct - lat, k0 * ct


def pulse(line: Output, t: float, width: float, device: Device) -> tuple:
    """One generated pulse on `line` (rise at t) as two sets marked action "wiring"."""
    pos = device.wiring_pos or device.pos
    return (Segment(line.name, "set", t, t, None, 1.0, "wiring", "wiring", pos),
            Segment(line.name, "set", t + width, t + width, None, 0.0, "wiring", "wiring", pos))


def row_edges(device: Device, table, end_tick: int) -> list:
    """Edge times (s) of a stepped or clocked device: one per row after the first, one step latency ahead of the
    row; the shot's end row only when it changes a value (else it is the end marker, which needs no edge)."""
    lat = device.step_latency_s if device.step_on else 0.0
    ticks = [int(k) for k in table.ticks]
    n = len(ticks)
    if n > 1 and ticks[-1] >= end_tick and (table.codes[-1] == table.codes[-2]).all():
        n -= 1
    return [k * table.tick_s - lat for k in ticks[1:n]]
