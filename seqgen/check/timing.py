"""Timing checks on the resolved timeline."""

from __future__ import annotations

import math

from ..findings import make
from ..registry import check


@check("timing.overlap", "error", "seqgen's own rule: one output holds one value at a time")
def overlapping_writes(shot):
    """Two actions write one output at overlapping times (a set inside a ramp,
    two ramps that overlap, or two different values set at the same instant).
    The message names both actions and both source lines. Move one of them, or
    split the block."""
    by_out = {}
    for s in shot.segments:
        by_out.setdefault(s.output, []).append(s)
    for name, segs in by_out.items():
        segs = sorted(segs, key=lambda s: (s.t0, s.t1))
        busy = None  # the ramp currently running
        last_set = None
        for s in segs:
            if busy is not None and s.t0 < busy.t1 - 1e-12 and not (s.kind == "set" and s.t0 <= busy.t0 + 1e-12):
                yield make("timing.overlap", f"'{name}': {s.action} in block '{s.block}' ({s.pos}) overlaps "
                           f"{busy.action} in block '{busy.block}' ({busy.pos}) running until {busy.t1 * 1e3:.6g} ms",
                           s.pos, block=s.block, time_s=s.t0, hint="start one after the other ends, or remove one")
            if (s.kind == "set" and last_set is not None and abs(s.t0 - last_set.t0) < 1e-12 and s.v1 != last_set.v1
                    and not last_set.action.endswith(":end") and not s.action.endswith(":end")):
                yield make("timing.overlap", f"'{name}' is set to two values at t = {s.t0 * 1e3:.6g} ms: by {last_set.action} "
                           f"in '{last_set.block}' ({last_set.pos}) and by {s.action} in '{s.block}' ({s.pos})",
                           s.pos, block=s.block, time_s=s.t0, hint="keep one of the two writes")
            if s.kind == "ramp" and (busy is None or s.t1 > busy.t1):
                busy = s
            if s.kind == "set":
                last_set = s


@check("timing.sub-tick", "note", "seqgen's rounding rule: nearest tick, exact halves round to the later tick")
def sub_tick_timing(shot):
    """A time that is not a whole number of its device's ticks. seqgen rounds it
    to the nearest tick (an exact half rounds to the later tick) and reports the
    shift so that nothing moves silently."""
    seen = set()
    for s in shot.segments:
        dev = shot.rig.devices[shot.rig.outputs[s.output].device]
        for t in (s.t0, s.t1) if s.kind == "ramp" else (s.t0,):
            n = t * dev.timebase_hz
            shift = (math.floor(n + 0.5) - n) / dev.timebase_hz
            if abs(shift) > 1e-6 / dev.timebase_hz and (s.block, s.output, dev.name) not in seen:
                seen.add((s.block, s.output, dev.name))
                yield make("timing.sub-tick", f"'{s.output}' at {t * 1e6:.6g} us is not on the {dev.name} tick "
                           f"({1e9 / dev.timebase_hz:.6g} ns); rounded by {shift * 1e9:+.4g} ns", s.pos, block=s.block,
                           time_s=t, hint="use times that are multiples of the tick to silence this note")


@check("timing.ramp-too-fast", "error", "seqgen's own rule: a ramp needs at least two table rows")
def ramp_faster_than_device(shot):
    """A ramp shorter than the device's minimum interval between rows cannot be
    produced: the device can only jump. Make the ramp longer, use a set, or use
    a faster device."""
    for s in shot.segments:
        if s.kind != "ramp":
            continue
        dev = shot.rig.devices[shot.rig.outputs[s.output].device]
        min_dt = dev.min_interval_ticks / dev.timebase_hz
        if s.t1 - s.t0 < min_dt:
            yield make("timing.ramp-too-fast", f"ramp on '{s.output}' lasts {(s.t1 - s.t0) * 1e6:.4g} us, shorter than "
                       f"{dev.name}'s minimum interval {min_dt * 1e6:.4g} us", s.pos, block=s.block, time_s=s.t0,
                       hint=f"make it at least {min_dt * 1e6:.4g} us long, or use 'set'")


@check("timing.latency-reorder", "error", "seqgen's own rule: compensation must keep the order of a channel's edges")
def latency_reorders_edges(shot):
    """With different rise and fall latencies (a mechanical shutter that opens in
    3 ms but closes in 2 ms), moving each edge earlier by its own latency can
    swap two edges: a pulse shorter than the difference of the latencies would
    be commanded to close before it opens. Lengthen the pulse or use a faster
    switch (an AOM) for short pulses."""
    for name, out in shot.rig.outputs.items():
        if out.latency_rise_s == out.latency_fall_s:
            continue
        sets = sorted((s for s in shot.segments if s.output == name and s.kind == "set"), key=lambda s: s.t0)
        prev_value, prev_cmd, prev = out.safe, None, None
        for s in sets:
            lat = out.latency_rise_s if s.v1 > prev_value else (out.latency_fall_s if s.v1 < prev_value else 0.0)
            cmd = s.t0 - lat
            if prev_cmd is not None and cmd < prev_cmd:
                yield make("timing.latency-reorder", f"'{name}': after latency compensation the edge at "
                           f"{s.t0 * 1e3:.6g} ms would be commanded before the edge at {prev.t0 * 1e3:.6g} ms "
                           f"(rise {out.latency_rise_s * 1e3:.4g} ms, fall {out.latency_fall_s * 1e3:.4g} ms)", s.pos,
                           block=s.block, time_s=s.t0, hint="make the pulse longer than the latency difference")
            prev_value, prev_cmd, prev = s.v1, cmd, s


@check("hardware.jitter", "warning", "the rig file's jitter per channel (e.g. a mechanical shutter's timing spread)")
def edges_within_jitter(shot):
    """Two edges of one channel closer together than the channel's declared
    timing jitter: the second may come before the first has settled, so the
    pulse may be much shorter than written or missing."""
    for name, out in shot.rig.outputs.items():
        if not out.jitter_s:
            continue
        sets = sorted((s for s in shot.segments if s.output == name and s.kind == "set"), key=lambda s: s.t0)
        for a, b in zip(sets, sets[1:]):
            if 0 < b.t0 - a.t0 < out.jitter_s:
                yield make("hardware.jitter", f"'{name}' edges {(b.t0 - a.t0) * 1e6:.4g} us apart, within its "
                           f"{out.jitter_s * 1e6:.4g} us jitter", b.pos, block=b.block, time_s=b.t0,
                           hint="keep edges of this channel further apart than its jitter")
