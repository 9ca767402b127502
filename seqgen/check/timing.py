"""Timing checks on the resolved timeline."""

from __future__ import annotations

import math

import numpy as np

from ..compile.sampling import quantize_times
from ..codes import JITTER, LATENCY_REORDER, OVERLAP, RAMP_TOO_FAST, SUB_TICK
from ..findings import make
from ..textfmt import fmt_time
from .rules import rule


@rule(OVERLAP)
def overlapping_writes(shot):
    by_out = {}
    for s in shot.segments:
        by_out.setdefault(s.output, []).append(s)
    for name, segs in by_out.items():
        segs = sorted(segs, key=lambda s: (s.t0, s.t1))
        busy = None  # the ramp currently running
        last_set = None
        for s in segs:
            if busy is not None and s.t0 < busy.t1 - 1e-12 and not (s.kind == "set" and s.t0 <= busy.t0 + 1e-12):
                yield make(OVERLAP, f"'{name}': {s.action} in block '{s.block}' ({s.pos}) overlaps "
                           f"{busy.action} in block '{busy.block}' ({busy.pos}) running until {fmt_time(busy.t1, 6, unit='ms')}",
                           s.pos, block=s.block, time_s=s.t0, hint="start one after the other ends, or remove one")
            if (s.kind == "set" and last_set is not None and abs(s.t0 - last_set.t0) < 1e-12 and s.v1 != last_set.v1
                    and not last_set.action.endswith(":end") and not s.action.endswith(":end")):
                yield make(OVERLAP, f"'{name}' is set to two values at t = {fmt_time(s.t0, 6, unit='ms')}: by {last_set.action} "
                           f"in '{last_set.block}' ({last_set.pos}) and by {s.action} in '{s.block}' ({s.pos})",
                           s.pos, block=s.block, time_s=s.t0, hint="keep one of the two writes")
            if s.kind == "ramp" and (busy is None or s.t1 > busy.t1):
                busy = s
            if s.kind == "set":
                last_set = s


@rule(SUB_TICK)
def sub_tick_timing(shot):
    seen = set()
    for s in shot.segments:
        dev = shot.rig.devices[shot.rig.outputs[s.output].device]
        for t in (s.t0, s.t1) if s.kind == "ramp" else (s.t0,):
            n = t * dev.timebase_hz
            shift = (math.floor(n + 0.5) - n) / dev.timebase_hz
            if abs(shift) > 1e-6 / dev.timebase_hz and (s.block, s.output, dev.name) not in seen:
                seen.add((s.block, s.output, dev.name))
                yield make(SUB_TICK, f"'{s.output}' at {fmt_time(t, 6, unit='us')} is not on the {dev.name} tick "
                           f"({1e9 / dev.timebase_hz:.6g} ns); rounded by {shift * 1e9:+.4g} ns", s.pos, block=s.block,
                           time_s=t, hint="use times that are multiples of the tick to silence this note")


def _ramp_ticks(out, dev, s) -> tuple[int, int]:
    """The ticks a ramp's end rows land on, as compile places them: both ends moved earlier by the
    channel's latency for the ramp's direction, rounded to the tick (ties to the later tick)."""
    lat = out.latency_rise_s if s.v1 > s.v0 else (out.latency_fall_s if s.v1 < s.v0 else 0.0)
    tick = 1.0 / dev.timebase_hz
    t0, t1 = s.t0 - lat, s.t1 - lat
    if t0 < -0.5 * tick:  # compile clips it (and reports timing.before-start)
        t0, t1 = max(t0, 0.0), max(t1, tick)
    k0, k1 = (int(k) for k in quantize_times(np.array([max(t0, 0.0), max(t1, 0.0)]), tick))
    return k0, max(k1, k0 + 1)


@rule(RAMP_TOO_FAST)
def ramp_faster_than_device(shot):
    # a ramp must be written at least the minimum interval long (up to float error: 0.7 s + 2 us - 0.7 s is
    # 1.99999999999e-06), and its two rows, as compile rounds its ends, must lie that many ticks apart
    for s in shot.segments:
        if s.kind != "ramp":
            continue
        out = shot.rig.outputs[s.output]
        dev = shot.rig.devices[out.device]
        m = dev.min_interval_ticks
        if m < 1:  # no minimum interval: nothing is too fast
            continue
        min_dt = m / dev.timebase_hz
        k0, k1 = _ramp_ticks(out, dev, s)
        if k1 - k0 < m or s.t1 - s.t0 < min_dt - 1e-6 / dev.timebase_hz:
            # a whole number of ticks: both ends then round alike, so the ramp spans exactly m ticks or more
            rows = f" ({k1 - k0} tick(s) between its rows)" if k1 - k0 < m else ""
            yield make(RAMP_TOO_FAST, f"ramp on '{s.output}' lasts {fmt_time((s.t1 - s.t0), unit='us')}{rows}, shorter than {dev.name}'s minimum interval "
                       f"{fmt_time(min_dt, unit='us')}", s.pos, block=s.block, time_s=s.t0,
                       hint=f"make it at least {fmt_time(min_dt, unit='us')} long, or use 'set'")


@rule(LATENCY_REORDER)
def latency_reorders_edges(shot):
    for name, out in shot.rig.outputs.items():
        if out.latency_rise_s == out.latency_fall_s:
            continue
        sets = sorted((s for s in shot.segments if s.output == name and s.kind == "set"), key=lambda s: s.t0)
        prev_value, prev_cmd, prev = out.safe, None, None
        for s in sets:
            lat = out.latency_rise_s if s.v1 > prev_value else (out.latency_fall_s if s.v1 < prev_value else 0.0)
            cmd = s.t0 - lat
            if prev_cmd is not None and cmd < prev_cmd:
                yield make(LATENCY_REORDER, f"'{name}': after latency compensation the edge at "
                           f"{fmt_time(s.t0, 6, unit='ms')} would be commanded before the edge at {fmt_time(prev.t0, 6, unit='ms')} "
                           f"(rise {fmt_time(out.latency_rise_s, unit='ms')}, fall {fmt_time(out.latency_fall_s, unit='ms')})", s.pos,
                           block=s.block, time_s=s.t0, hint="make the pulse longer than the latency difference")
            prev_value, prev_cmd, prev = s.v1, cmd, s


@rule(JITTER)
def edges_within_jitter(shot):
    for name, out in shot.rig.outputs.items():
        if not out.jitter_s:
            continue
        sets = sorted((s for s in shot.segments if s.output == name and s.kind == "set"), key=lambda s: s.t0)
        for a, b in zip(sets, sets[1:]):
            if 0 < b.t0 - a.t0 < out.jitter_s:
                yield make(JITTER, f"'{name}' edges {fmt_time((b.t0 - a.t0), unit='us')} apart, within its "
                           f"{fmt_time(out.jitter_s, unit='us')} jitter", b.pos, block=b.block, time_s=b.t0,
                           hint="keep edges of this channel further apart than its jitter")
