"""Hardware checks: output ranges, pulse widths, slew, table size, row spacing."""

from __future__ import annotations

import numpy as np

from ..calibration import to_output
from ..codes import (
    HARD_LIMIT, MEMORY_DEPTH, MIN_INTERVAL, OUTSIDE_CALIBRATION, OUT_OF_RANGE, PULSE_TOO_SHORT, RESOLUTION, SLEW,
)
from ..findings import make
from ..textfmt import fmt_si, fmt_time
from .rules import rule


def _extremes(seg):
    """Physical values a segment reaches (endpoints, plus the envelope peak)."""
    if seg.kind == "set":
        return (seg.v1,)
    return (seg.v0, seg.v1)


@rule(OUT_OF_RANGE)
def output_range(shot):
    for s in shot.segments:
        out = shot.rig.outputs[s.output]
        for v in _extremes(s):
            y = float(to_output(out, v))
            if not (out.lo - 1e-12 * max(1, abs(out.lo)) <= y <= out.hi + 1e-12 * max(1, abs(out.hi))):
                phys = f" ({v:.6g} {out.phys_unit})" if out.calibration else ""
                yield make(OUT_OF_RANGE, f"'{out.name}' would output {y:.6g} {out.unit}{phys}, outside "
                           f"[{out.lo:g}, {out.hi:g}] {out.unit}", s.pos, block=s.block, time_s=s.t0,
                           hint="lower the value, or check the channel's calibration and range in the rig")
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
                           time_s=s.t0, hint="reduce the value; hard limits are not to be raised without the lab's safety review")
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
            if width < out.min_pulse_s:
                yield make(PULSE_TOO_SHORT, f"pulse on '{out.name}' lasts {fmt_time(width, unit='us')}, shorter than its "
                           f"minimum {fmt_time(out.min_pulse_s, unit='us')}", s.pos, block=s.block, time_s=s.t0,
                           hint=f"make it at least {fmt_time(out.min_pulse_s, unit='us')}")


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
                           block=s.block, time_s=s.t0, hint=f"make the ramp at least {fmt_time((s.t1 - s.t0) * rate / out.max_slew, unit='ms')} long")


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


@rule(MIN_INTERVAL, stage="tables")
def row_spacing(shot, compiled):
    for t in compiled.tables:
        dev = shot.rig.devices[t.device]
        if dev.min_interval_ticks <= 1 or len(t.ticks) < 2:
            continue
        gaps = np.diff(t.ticks)
        bad = np.nonzero(gaps < dev.min_interval_ticks)[0]
        if len(bad):
            k = int(bad[0])
            time = float(t.ticks[k + 1] * t.tick_s)
            block = next((b.name for b in shot.blocks if b.start_s <= time <= b.end_s), None)
            pos = shot.block(block).pos if block else dev.pos
            yield make(MIN_INTERVAL, f"device '{t.device}': {len(bad)} row(s) closer than its minimum interval "
                       f"{fmt_time(dev.min_interval_ticks * t.tick_s, unit='us')}; first at {fmt_time(time, 6, unit='ms')} "
                       f"({int(gaps[k])} ticks apart)", pos, block=block, time_s=time,
                       hint="separate the events by at least the minimum interval")


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
                       hint=f"use a tolerance of at least {out.lsb / 2:.3g} {out.unit}")
