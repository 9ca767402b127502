"""Rules on the rig's device wiring (README "Wiring"): the edges seqgen generates on the parents' lines for
triggered, table-stepped and externally clocked devices, read from the compiled shot (`Compiled.wiring`,
`Compiled.starts`). The rig's own wiring faults (unknown or analog lines, loops, shared lines) are refused when
the rig is resolved (seqgen/resolve/rig.py)."""

from __future__ import annotations

import math

import numpy as np

from ..codes import (
    WIRING_BEFORE_START, WIRING_CLOCK, WIRING_EDGES_TOO_CLOSE, WIRING_LINE_WRITTEN, WIRING_TRIGGER_PERIOD,
    WIRING_TRIGGER_PULSE,
)
from ..compile.wiring import pulse_width, row_edges
from ..findings import make
from ..textfmt import fmt_time, fmt_when, outward
from .rules import rule
from .ticks import moment_text


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


def _at_fix(shot, seg, row_s: float, want_s: float, tick_s: float, why: str) -> str:
    """A fix that moves the write `seg` (whose row is at row_s) so that its row comes at want_s or later: the
    action's `at:` (from its block's start), the row rounded up to the device's tick."""
    block = shot.block(seg.block) if seg is not None else None
    if block is None:
        return f"move this write at least {fmt_when(outward(want_s - row_s))} later ({why})"
    new_row = math.ceil(want_s / tick_s - 1e-9) * tick_s
    at = outward(seg.t0 + (new_row - row_s) - block.start_s)
    # on a tick of the written channel's device too (not later than a tick beyond), so the write plays there
    text, _ = moment_text(shot, seg, at, block.start_s, "up", digits=6, unit="us", outputs=(seg.output,))
    return f"write 'at: {text}' in this action (from the start of block '{block.name}'), {why}"


@rule(WIRING_BEFORE_START, stage="tables")
def before_start(shot, compiled):
    starts = getattr(compiled, "starts", {}) or {}
    for d, line, role in _wired(shot):
        if role == "clock edges":
            continue
        table = next((t for t in compiled.tables if t.device == d.name), None)
        if table is None:
            continue
        if role == "start trigger":
            start = starts.get(d.name)
            if start is None:
                continue
            ticks = np.asarray(table.ticks[1:-1], dtype=np.int64)  # row 0 is what it is armed with: it holds
            # until the start; tick x tick_s as Python computes it (an int64 below 2^53 converts exactly)
            early = np.flatnonzero(ticks * table.tick_s < start - 1e-12)
            if not len(early):
                continue
            first = int(ticks[early[0]]) * table.tick_s
            seg = _write_at(shot, d, first)
            yield make(WIRING_BEFORE_START, f"device '{d.name}' starts at {fmt_when(start)} (its start edge on '{line}' "
                       f"at {fmt_when(start - d.start_latency_s)}, fixed near the start of the shot, plus "
                       f"{fmt_when(d.start_latency_s)} trigger latency): its row at {fmt_when(first)} comes before",
                       seg.pos if seg else d.wiring_pos, block=seg.block if seg else None, time_s=first,
                       hint=_at_fix(shot, seg, first, start, table.tick_s, f"at or after the device's start at "
                                    f"{fmt_when(start)}"),
                       data={"device": d.name, "latency_s": d.start_latency_s, "start_s": start, "first_s": first})
            continue
        lat = d.step_latency_s
        first = int(table.ticks[1]) * table.tick_s if len(table.ticks) > 1 else None
        if first is None or first - lat >= -1e-12:
            continue
        seg = _write_at(shot, d, first)
        yield make(WIRING_BEFORE_START, f"device '{d.name}'s first row at {fmt_when(first)} needs its {role} on '{line}' "
                   f"{fmt_when(lat)} (the step latency) ahead, before t = 0", seg.pos if seg else d.wiring_pos,
                   block=seg.block if seg else None, time_s=first,
                   hint=_at_fix(shot, seg, first, lat, table.tick_s, "at least the step latency after t = 0"),
                   data={"device": d.name, "latency_s": lat, "first_s": first})


def _row_times(compiled, d, end):
    """A stepped or clocked device's table and the times of the rows that get an edge (compile/wiring.py)."""
    table = next((t for t in compiled.tables if t.device == d.name), None)
    if table is None:
        return None, []
    lat = d.step_latency_s if d.step_on else 0.0
    return table, [t + lat for t in row_edges(d, table, round(end / table.tick_s))]


def _edge_need(shot, d, line):
    """(code, gap needed, why) per limit on the edges of a stepped or clocked device: the line's own pulse and
    gap, the child's min_trigger_pulse and gap, its min_trigger_period + 2 x jitter."""
    out = shot.rig.outputs[line]
    parent = shot.rig.devices[out.device]
    own = pulse_width(out, parent)
    need = [(WIRING_EDGES_TOO_CLOSE, 2 * own, f"a {fmt_when(own)} pulse and as long a gap")]
    if d.min_trigger_pulse_s > own:
        need.append((WIRING_TRIGGER_PULSE, 2 * d.min_trigger_pulse_s, f"a pulse of at least "
                     f"{fmt_when(d.min_trigger_pulse_s)} ('{d.name}'s min_trigger_pulse) and as long a gap"))
    if d.min_trigger_period_s:
        jit = f" plus twice its {fmt_time(d.trigger_jitter_s, floor='ns')} trigger_jitter" if d.trigger_jitter_s else ""
        need.append((WIRING_TRIGGER_PERIOD, d.min_trigger_period_s + 2 * d.trigger_jitter_s,
                     f"edges at least {fmt_when(d.min_trigger_period_s)} apart ('{d.name}'s "
                     f"min_trigger_period){jit}"))
    return need


def _rig_pos(d, code):
    """The rig entry a limit comes from (the device's min_trigger_* key, else its wiring key)."""
    key = {WIRING_TRIGGER_PULSE: "min_trigger_pulse", WIRING_TRIGGER_PERIOD: "min_trigger_period"}.get(code)
    return (d.trigger_key_pos(key) if key else None) or d.wiring_pos


def _close_edges(shot, compiled, want):
    """Findings `want` on the first two rows of each stepped or clocked device that are closer than the limit
    of that code allows (a pair is reported once, under the limit needing the widest gap, so its fix meets
    all of them)."""
    for d, line, role in _wired(shot):
        if role == "start trigger":
            continue
        table, times = _row_times(compiled, d, compiled.duration_s)
        limits = _edge_need(shot, d, line)
        for a, b in zip(times, times[1:]):
            broken = sorted((x for x in limits if b - a < x[1] - 1e-12), key=lambda x: -x[1])
            if not broken or broken[0][0] != want:
                continue
            code, need, why = broken[0]
            seg = _write_at(shot, d, b)
            rig = _rig_pos(d, code)
            where = f"; rig: {rig.file}:{rig.line}" if rig and code != WIRING_EDGES_TOO_CLOSE else ""
            yield make(code, f"rows of '{d.name}' at {fmt_when(a)} and {fmt_when(b)} are {fmt_when(b - a)} apart: "
                       f"each needs its own edge on '{line}', {why} ({fmt_when(need)}){where}",
                       seg.pos if seg else d.wiring_pos, block=seg.block if seg else None, time_s=b,
                       hint=_at_fix(shot, seg, b, a + need, table.tick_s,
                                    f"so its row comes at least {fmt_when(outward(need))} after the one before"),
                       data={"device": d.name, "line": line, "gap_s": b - a, "need_s": need,
                             "rig_file": rig.file if rig else None, "rig_line": rig.line if rig else None})
            break


@rule(WIRING_EDGES_TOO_CLOSE, stage="tables")
def edges_too_close(shot, compiled):
    yield from _close_edges(shot, compiled, WIRING_EDGES_TOO_CLOSE)


@rule(WIRING_TRIGGER_PULSE, stage="tables")
def trigger_pulse(shot, compiled):
    yield from _close_edges(shot, compiled, WIRING_TRIGGER_PULSE)


@rule(WIRING_TRIGGER_PERIOD, stage="tables")
def trigger_period(shot, compiled):
    yield from _close_edges(shot, compiled, WIRING_TRIGGER_PERIOD)


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

