"""Hardware checks: output ranges, pulse widths, slew, table size, row spacing."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..calibration import to_output, to_physical
from ..codes import (
    HARD_LIMIT, MEMORY_DEPTH, MIN_INTERVAL, OUTSIDE_CALIBRATION, OUT_OF_RANGE, PULSE_TOO_SHORT, RESOLUTION, SLEW,
    SYNTH_SETTLING,
)
from ..compile.sampling import quantize_times
from ..findings import make
from ..textfmt import fmt_si, fmt_time, outward
from .rules import rule
from .ticks import duration_text, fmt_tick, grid, on_grid, on_tick


def _extremes(seg):
    """Physical values a segment reaches (endpoints, plus the envelope peak)."""
    if seg.kind == "set":
        return (seg.v1,)
    return (seg.v0, seg.v1)


def _inward(x: float, up: bool, digits: int = 6) -> float:
    """x rounded to `digits` significant digits toward the inside of a range (up: the range lies above),
    so the text a fix names stays inside the range it names; float noise of the inverse is dropped first."""
    x = float(f"{x:.12g}")
    if x == 0 or not math.isfinite(x):
        return x
    q = 10.0 ** (math.floor(math.log10(abs(x))) - (digits - 1))
    n = math.ceil(x / q) if up else math.floor(x / q)
    return float(f"{n * q:.{digits}g}")


def _range_fix(out, v: float, y: float) -> tuple[str, float]:
    """The fix for a value v (output value y) outside an output's range: the direction in the channel's
    physical unit (a falling calibration turns an output above the range into a value to raise) and the
    limit it must reach, kept inside the hard limits too, so that applying it raises no other error."""
    edge = out.hi if y > out.hi else out.lo
    limit = float(to_physical(out, edge))
    up = v < limit
    if up and out.hard_min is not None:
        limit = max(limit, out.hard_min)
    if not up and out.hard_max is not None:
        limit = min(limit, out.hard_max)
    limit = _inward(limit, up)
    text = fmt_si(limit, out.phys_unit) if out.phys_unit else f"{limit:.6g}"
    return (f"raise the value to at least {text}" if up else f"lower the value to at most {text}"), limit


@rule(OUT_OF_RANGE)
def output_range(shot):
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        for v in _extremes(s):
            y = float(to_output(out, v))
            if not (out.lo - 1e-12 * max(1, abs(out.lo)) <= y <= out.hi + 1e-12 * max(1, abs(out.hi))):
                phys = f" ({v:.6g} {out.phys_unit})" if out.calibration else ""
                fix, limit = _range_fix(out, v, y)
                yield make(OUT_OF_RANGE, f"'{out.name}' would output {y:.6g} {out.unit}{phys}, outside "
                           f"[{out.lo:g}, {out.hi:g}] {out.unit}", s.pos, block=s.block, time_s=s.t0,
                           hint=f"{fix}, or check the channel's calibration and range in the rig",
                           data={"value": v, "limit": limit})
                break


@rule(OUTSIDE_CALIBRATION)
def outside_calibration(shot):
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        cal = out.calibration
        if cal is None or cal.kind != "table":
            continue
        lo, hi = min(cal.table_phys), max(cal.table_phys)
        slack = 1e-12 * max(1.0, abs(lo), abs(hi))
        for v in _extremes(s):
            if v < lo - slack or v > hi + slack:
                yield make(OUTSIDE_CALIBRATION, f"'{out.name}' is set to {v:.6g} {out.phys_unit}, outside its "
                           f"calibration table [{lo:.6g}, {hi:.6g}] {out.phys_unit}: the output value is extrapolated",
                           s.pos, block=s.block, time_s=s.t0,
                           hint="extend the calibration table in the rig file to cover this value, or stay inside it")
                break


@rule(HARD_LIMIT)
def hard_limits(shot):
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        for v in _extremes(s):
            if out.hard_max is not None and v > out.hard_max or out.hard_min is not None and v < out.hard_min:
                lo = fmt_si(out.hard_min, out.phys_unit) if out.hard_min is not None else "none"
                hi = fmt_si(out.hard_max, out.phys_unit) if out.hard_max is not None else "none"
                yield make(HARD_LIMIT, f"'{out.name}' would reach {fmt_si(v, out.phys_unit)}, beyond its hard limits "
                           f"(min {lo}, max {hi})", s.pos, block=s.block,
                           time_s=s.t0, hint=(f"{'raise' if out.hard_min is not None and v < out.hard_min else 'reduce'} "
                                              f"the value to within [{lo}, {hi}]; hard limits are not to be changed "
                                              "without the lab's safety review"))
                break


@rule(PULSE_TOO_SHORT)
def pulse_width(shot):
    import bisect

    set_times: dict = {}  # (output, block) -> sorted start times of its sets (one pass, not one scan per pulse)
    for x in shot.segments:
        if x.kind == "set":
            set_times.setdefault((x.output, x.block), []).append(x.t0)
    for times in set_times.values():
        times.sort()
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        if out.kind != "digital" or not out.min_pulse_s or not s.action.endswith(":end"):
            continue
        # the matching start is the last set on this output (in this block) before this end
        times = set_times.get((s.output, s.block), [])
        k = bisect.bisect_left(times, s.t0)
        if k:
            width = s.t0 - times[k - 1]
            if width < out.min_pulse_s - 1e-12:  # float noise of a difference of times up to ~1000 s
                yield make(PULSE_TOO_SHORT, f"pulse on '{out.name}' lasts {fmt_time(width, unit='us')}, shorter than its "
                           f"minimum {fmt_time(out.min_pulse_s, unit='us')}", s.pos, block=s.block, time_s=s.t0,
                           hint=f"make it at least {_min_width(shot, out, times[k - 1])}",
                           data={"width_s": width, "min_width_s": out.min_pulse_s})


def _min_width(shot, out, start: float) -> str:
    """The shortest pulse width, from its start, at or above the output's minimum that its device plays (a whole
    number of its ticks)."""
    g = grid(shot, (out.name,))
    w = outward(out.min_pulse_s)
    return fmt_tick(on_grid(start, w, g, "up"), g, unit="us", lead=start) if g > 0 else fmt_time(w, unit="us")


@rule(SLEW)
def slew_rate(shot):
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        if not out.max_slew:
            continue
        if s.kind == "ramp":
            from ..compile.shapes import shape_derivative_bounds

            try:
                dmax, _ = shape_derivative_bounds(s.shape, duration_s=s.t1 - s.t0, tau_s=s.tau_s, table=s.table)
            except Exception:
                dmax = 1.0
            rate = abs(s.v1 - s.v0) * dmax / (s.t1 - s.t0)
            if rate > out.max_slew * (1 + 1e-9):
                yield make(SLEW, f"ramp on '{out.name}' changes at up to {rate:.4g} {out.phys_unit}/s, "
                           f"{rate / out.max_slew:.3g} times its max slew {out.max_slew:.4g} {out.phys_unit}/s", s.pos,
                           block=s.block, time_s=s.t0,
                           hint=f"make the ramp at least {duration_text(shot, s, outward((s.t1 - s.t0) * rate / out.max_slew), 'up', unit='ms', outputs=(s.output,))} long",
                           data={"rate": rate, "max_slew": out.max_slew})


def _pulse_end(shot, rise):
    """End time of the clock pulse whose amplitude rises with segment `rise`, or None (not a clock pulse)."""
    for act in shot.actions("clock_pulse"):
        if act.block == rise.block and abs(act.t0 - rise.t0) <= 1e-12 * max(1.0, abs(act.t0)):
            return act.t1
    return None


@rule(SYNTH_SETTLING)
def synth_settling(shot):
    for channel, parts in shot.rig.channels.items():
        fout = shot.rig.outputs.get(f"{channel}.freq")
        aout = shot.rig.outputs.get(f"{channel}.amp")
        if fout is None or aout is None or not fout.settling_s:
            continue
        freq_writes = sorted((s for s in shot.segments if s.output == fout.name), key=lambda s: s.t1)
        level = aout.safe
        for a in sorted((s for s in shot.segments if s.output == aout.name), key=lambda s: s.t0):
            rises = level <= 0 < max(a.v1, a.v0 or 0.0)  # from off (the level before this write) to on
            level = a.v1
            if not rises:
                continue
            # the last frequency write that ends at or before the amplitude rises (same channel, same latency)
            last = None
            for f in freq_writes:
                if f.t1 > a.t0 + 1e-12:
                    break
                last = f
            if last is None or a.t0 - last.t1 >= fout.settling_s * (1 - 1e-9):
                continue
            gap = a.t0 - last.t1
            g = grid(shot, (fout.name, aout.name))  # the lead and the moments, in whole ticks of the synth
            lead = on_grid(0.0, outward(fout.settling_s), g, "up") if g > 0 else outward(fout.settling_s)
            latest = on_tick(a.t0 - lead, g, "down") if g > 0 else outward(a.t0 - fout.settling_s, up=False)
            hint = (f"write the frequency at least {fmt_tick(lead, g, unit='us')} before the "
                    f"pulse (at or before t = {fmt_tick(latest, g, 6, unit='ms')}), "
                    "or give the clock_pulse its `frequency:`, which it writes that far ahead")
            end = _pulse_end(shot, a)
            if last.action == "clock_pulse" and last.t0 + fout.settling_s > a.t0 + 1e-12 and end is not None:
                # a later clock_pulse's own write, a settling time ahead of its pulse: giving this pulse its
                # frequency changes nothing; the other pulse must write after this one ends
                whom = f"block '{last.block}'" if last.block != a.block else f"the clock_pulse at line {last.pos.line}"
                hint = (f"the clock_pulse at line {last.pos.line} (block '{last.block}') writes its frequency "
                        f"{fmt_time(fout.settling_s, unit='us')} (the synth's settling time) ahead of its own pulse, before "
                        f"this pulse ends at t = {fmt_time(end, 6, unit='ms')}: start {whom} at least "
                        f"{fmt_tick(on_grid(0.0, outward(end - last.t0), g, 'up') if g > 0 else outward(end - last.t0), g, unit='us')} later")
            yield make(SYNTH_SETTLING, f"'{channel}' turns its amplitude on {fmt_time(gap, unit='us')} after its frequency "
                       f"was written ({last.pos.file}:{last.pos.line}, block '{last.block}'); it settles in "
                       f"{fmt_time(fout.settling_s, unit='us')}, so the pulse starts while the frequency is in transit (for "
                       f"another {fmt_time(fout.settling_s - gap, unit='us')})",
                       a.pos, block=a.block, time_s=a.t0, hint=hint,
                       data={"settling_s": fout.settling_s, "gap_s": gap,
                             "frequency_write": f"{last.pos.file}:{last.pos.line}"})


@rule(MEMORY_DEPTH, stage="tables")
def memory_depth(shot, compiled):
    for t in compiled.tables:
        dev = shot.rig.devices[t.device]
        if dev.memory_depth and len(t.ticks) > dev.memory_depth:
            contrib = {}
            for (block, _out, _t0), n in t.rows_per_segment.items():
                contrib[block] = contrib.get(block, 0) + n
            top = sorted(contrib.items(), key=lambda kv: -kv[1])[:3]
            where = ", ".join(f"{b} ({n} rows)" for b, n in top) or "many sets"
            pos = shot.block(top[0][0]).pos if top else dev.pos
            yield make(MEMORY_DEPTH, f"device '{t.device}' needs {len(t.ticks)} rows, "
                       f"{len(t.ticks) - dev.memory_depth} over its memory depth {dev.memory_depth}; most from {where}",
                       pos, block=top[0][0] if top else None, hint="raise ramp tolerances, shorten ramps, or move channels to another device")


@dataclass(frozen=True)
class _Edge:
    """A fixed row one segment writes: its tick, the time the sequence asked for, and the latency that moved it."""
    tick: int
    seg: object
    time_s: float
    latency_s: float
    edge: str  # "rise" | "fall" | ""


def _edges(shot, device) -> list[_Edge]:
    """The fixed rows (sets, ramp ends) of a device's outputs, placed as compile places them: sorted as compile
    sorts them, moved earlier by the latency of the edge's direction, rounded to the tick."""
    tick = device.tick_s
    m = max(1, device.min_interval_ticks)
    linear = device.output_model == "linear"
    edges = []
    for out in shot.rig.outputs.values():
        if out.device != device.name:
            continue
        segs = sorted((x for x in shot.segments if x.output == out.name),
                      key=lambda x: (x.t0, 0 if x.action.endswith(":end") else 1))
        current = out.safe
        for x in segs:
            start = current if x.kind == "set" else x.v0
            edge = "rise" if x.v1 > start else ("fall" if x.v1 < start else "")
            lat = {"rise": out.latency_rise_s, "fall": out.latency_fall_s}.get(edge, 0.0)
            times = (x.t0,) if x.kind == "set" else (x.t0, x.t1)
            ks = quantize_times(np.array([max(t - lat, 0.0) for t in times]), tick)
            for k, when in zip(ks, times):
                edges.append(_Edge(int(k), x, when, lat, edge))
            if linear and x.kind == "set" and ks[0] - m > 0:  # the row that holds the old value before a step
                edges.append(_Edge(int(ks[0]) - m, x, x.t0, lat, edge))
            current = x.v1
    return edges


def _who(e: _Edge) -> str:
    moved = (f"; its {e.edge} latency {fmt_time(e.latency_s, 6, unit='ms' if e.latency_s >= 1e-4 else 'us')} "
             f"moved this edge from {fmt_time(e.time_s, 7, unit='ms')} to {fmt_time(e.time_s - e.latency_s, 7, unit='ms')}"
             if e.latency_s else "")
    return f"'{e.seg.output}' ({e.seg.action} in block '{e.seg.block}', line {e.seg.pos.line}{moved})"


def _clear_tick(ticks: np.ndarray, start: int, m: int, step: int, skip: int) -> int:
    """The first tick from `start` (walking by `step` = +1 later or -1 earlier) that lies at least m ticks
    from every row of `ticks` except the one at `skip` (the row being moved)."""
    others = ticks[ticks != skip]
    k = start
    for _ in range(64):
        near = others[np.abs(others - k) < m]
        if not len(near):
            return k
        k = int(near.max()) + m if step > 0 else int(near.min()) - m
    return k


@rule(MIN_INTERVAL, stage="tables")
def row_spacing(shot, compiled):
    for t in compiled.tables:
        dev = shot.rig.devices[t.device]
        m = dev.min_interval_ticks
        if m <= 1 or len(t.ticks) < 2:
            continue
        gaps = np.diff(t.ticks)
        bad = np.nonzero(gaps < m)[0]
        if not len(bad):
            continue
        k = int(bad[0])
        a, b = int(t.ticks[k]), int(t.ticks[k + 1])
        time = float(b * t.tick_s)
        interval = fmt_time(m * t.tick_s, unit="us")
        head = (f"device '{t.device}': {len(bad)} row(s) closer than its minimum interval {interval}; first at "
                f"{fmt_time(time, 6, unit='ms')} ({int(gaps[k])} ticks apart)")
        edges = _edges(shot, dev)
        later = next((e for e in edges if e.tick == b), None)
        earlier = next((e for e in edges if e.tick == a and (later is None or e.seg != later.seg)), None)
        blamed = later or earlier
        if blamed is None:  # rows of no segment (the table's first and last rows): name the place only
            block = next((x.name for x in shot.blocks if x.start_s <= time <= x.end_s), None)
            yield make(MIN_INTERVAL, head, shot.block(block).pos if block else dev.pos, block=block, time_s=time,
                       hint="separate the events by at least the minimum interval")
            continue
        other = earlier if blamed is later else None
        against = f", {int(gaps[k])} tick(s) after the row of {_who(other)}" if other else ""
        # ramp-interior rows give way to crowded rows (compile drops them): only fixed rows can crowd an edge
        fixed = np.unique(np.array([e.tick for e in edges] + [0, int(t.ticks[-1])], dtype=np.int64))
        own = later is not None and any(e.tick == a and e.seg == later.seg for e in edges)
        if own and later.seg.kind == "ramp":  # a ramp's own two rows: only a longer ramp separates them
            shift = m - (b - a)
            hint = f"make the ramp at least {interval} long"
        elif later is None and b == int(t.ticks[-1]):  # the table's last row: the end of the shot
            shift = m - (b - a)
            against = f", {int(gaps[k])} tick(s) before the shot's last row (its end)"
            hint = (f"let the sequence run at least {fmt_time(shift * t.tick_s, 6, unit='us')} longer (a later block or "
                    f"wait), so that it ends {interval} after this edge")
        elif blamed is later:
            shift = _clear_tick(fixed, a + m, m, +1, b) - b
            hint = (f"move this edge at least {fmt_time(shift * t.tick_s, 6, unit='us')} later, so that it lies "
                    f"{interval} from the other rows, or move the other write")
        else:
            shift = a - _clear_tick(fixed, b - m, m, -1, a)
            hint = (f"move this edge at least {fmt_time(shift * t.tick_s, 6, unit='us')} earlier, so that it lies "
                    f"{interval} from the other rows, or move the other write")
        yield make(MIN_INTERVAL, f"{head}: the row of {_who(blamed)}{against}", blamed.seg.pos,
                   block=blamed.seg.block, time_s=blamed.time_s, hint=hint,
                   data={"shift_s": shift * t.tick_s})


@rule(RESOLUTION)
def finer_than_resolution(shot):
    seen = set()
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        tol = s.tolerance if s.tolerance is not None else out.tolerance
        if s.kind != "ramp" or tol is None or out.lsb == 0 or (s.output, s.block) in seen:
            continue
        if tol < out.lsb / 2:
            seen.add((s.output, s.block))
            yield make(RESOLUTION, f"ramp on '{out.name}' asks for {tol:.3g} {out.unit}, finer than half an LSB "
                       f"({out.lsb / 2:.3g} {out.unit} at {out.bits} bits)", s.pos, block=s.block, time_s=s.t0,
                       hint=f"use a tolerance of at least {outward(out.lsb / 2, 3):.3g} {out.unit}",
                       data={"tolerance": tol, "half_lsb": out.lsb / 2})
