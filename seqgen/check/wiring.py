"""Rules on the rig's device wiring (README "Wiring"): the edges seqgen generates on the parents' lines for
triggered, table-stepped and externally clocked devices, read from the compiled shot (`Compiled.wiring`,
`Compiled.starts`). The rig's own wiring faults (unknown or analog lines, loops, shared lines) are refused when
the rig is resolved (seqgen/resolve/rig.py)."""

from __future__ import annotations

from ..codes import WIRING_BEFORE_START, WIRING_CLOCK, WIRING_EDGES_TOO_CLOSE, WIRING_LINE_WRITTEN
from ..compile.wiring import pulse_width, row_edges
from ..findings import make
from ..textfmt import fmt_when, outward
from .rules import rule


def _wired(shot):
    """(device, line, role) of each wiring whose line the rig has."""
    for d in shot.rig.devices.values():
        for line, role in ((d.start_on, "start trigger"), (d.step_on, "step edges"), (d.clock_on, "clock edges")):
            if line and line in shot.rig.outputs:
                yield d, line, role


def _writes(shot, device):
    """The sequence's writes of a device's outputs, by time."""
    names = {o.name for o in shot.rig.outputs.values() if o.device == device.name}
    return sorted((s for s in shot.segments if s.output in names), key=lambda s: s.t0)


def _write_at(shot, device, t):
    """The write that made a device's row at time t (the last one starting at or before it), else the first."""
    segs = _writes(shot, device)
    before = [s for s in segs if s.t0 <= t + 1e-12]
    return before[-1] if before else (segs[0] if segs else None)


@rule(WIRING_LINE_WRITTEN, stage="tables")
def line_written(shot, compiled):
    for d, line, role in _wired(shot):
        seg = next((s for s in shot.segments if s.output == line), None)
        if seg is not None:
            yield make(WIRING_LINE_WRITTEN, f"the sequence writes '{line}', the line of device '{d.name}'s {role}: seqgen "
                       "generates that line's edges, and this write would add one", seg.pos, block=seg.block,
                       time_s=seg.t0, hint=f"remove the writes of '{line}' from the sequence (the rig wires it to "
                       f"'{d.name}')", data={"device": d.name, "line": line})


@rule(WIRING_BEFORE_START, stage="tables")
def before_start(shot, compiled):
    starts = getattr(compiled, "starts", {}) or {}
    for d, line, role in _wired(shot):
        if role == "clock edges":
            continue
        lat = d.start_latency_s
        if role == "start trigger":
            first = starts.get(d.name)
        else:
            table = next((t for t in compiled.tables if t.device == d.name), None)
            first = int(table.ticks[1]) * table.tick_s if table is not None and len(table.ticks) > 1 else None
        if first is None or first - lat >= -1e-12:
            continue
        seg = _write_at(shot, d, first)
        late = outward(lat - first)
        yield make(WIRING_BEFORE_START, f"device '{d.name}'s first row at {fmt_when(first)} needs its {role} on '{line}' "
                   f"{fmt_when(lat)} (the trigger latency) ahead, before t = 0", seg.pos if seg else d.wiring_pos,
                   block=seg.block if seg else None, time_s=first,
                   hint=f"start the first write of '{d.name}' at least {fmt_when(late)} later",
                   data={"device": d.name, "latency_s": lat, "first_s": first})


def _row_times(compiled, d, end):
    """A stepped or clocked device's table and the times of the rows that get an edge (compile/wiring.py)."""
    table = next((t for t in compiled.tables if t.device == d.name), None)
    if table is None:
        return None, []
    lat = d.start_latency_s if d.step_on else 0.0
    return table, [t + lat for t in row_edges(d, table, round(end / table.tick_s))]


@rule(WIRING_EDGES_TOO_CLOSE, stage="tables")
def edges_too_close(shot, compiled):
    for d, line, role in _wired(shot):
        if role == "start trigger":
            continue
        out = shot.rig.outputs[line]
        width = pulse_width(out, shot.rig.devices[out.device])
        table, times = _row_times(compiled, d, compiled.duration_s)
        for a, b in zip(times, times[1:]):
            if b - a < 2 * width - 1e-12:
                seg = _write_at(shot, d, b)
                yield make(WIRING_EDGES_TOO_CLOSE, f"rows of '{d.name}' at {fmt_when(a)} and {fmt_when(b)} are "
                           f"{fmt_when(b - a)} apart: each needs its own edge on '{line}', a {fmt_when(width)} pulse "
                           f"and as long a gap ({fmt_when(2 * width)})", seg.pos if seg else d.wiring_pos,
                           block=seg.block if seg else None, time_s=b,
                           hint=f"space these writes at least {fmt_when(outward(2 * width))} apart",
                           data={"device": d.name, "line": line, "gap_s": b - a})
                break


@rule(WIRING_CLOCK, stage="tables")
def clock_grid(shot, compiled):
    for d, line, role in _wired(shot):
        if role != "clock edges":
            continue
        out = shot.rig.outputs[line]
        grid = shot.rig.devices[out.device].tick_s
        period = 1.0 / d.clock_max_hz
        table, times = _row_times(compiled, d, compiled.duration_s)
        for t in times:
            k = t / grid
            if abs(k - round(k)) > 1e-6:
                seg = _write_at(shot, d, t)
                yield make(WIRING_CLOCK, f"a row of '{d.name}' at {fmt_when(t)} is off the grid of its clock line "
                           f"'{line}' ({fmt_when(grid)} ticks of '{out.device}')", seg.pos if seg else d.wiring_pos,
                           block=seg.block if seg else None, time_s=t,
                           hint=f"put this write on a multiple of {fmt_when(grid)}",
                           data={"device": d.name, "line": line, "grid_s": grid})
                break
        for a, b in zip(times, times[1:]):
            if b - a < period * (1 - 1e-9):
                seg = _write_at(shot, d, b)
                yield make(WIRING_CLOCK, f"rows of '{d.name}' at {fmt_when(a)} and {fmt_when(b)} need a clock of "
                           f"{1 / (b - a):.6g} Hz, above its max_rate {d.clock_max_hz:.6g} Hz",
                           seg.pos if seg else d.wiring_pos, block=seg.block if seg else None, time_s=b,
                           hint=f"space these writes at least {fmt_when(outward(period))} apart",
                           data={"device": d.name, "line": line, "gap_s": b - a})
                break

