"""What the hardware plays: the one forward model of a shot's outputs that every physics prediction reads.

`played(shot, output, times)` is the physical value (SI, the output's physical unit) an output puts out at
each time, read from the compiled tables (`seqgen.compile.tables.compile_shot`), not from the intended
segments:

* table values in output units, DAC-quantized as compiled;
* held from row to row, or interpolated linearly, as the device's `output_model` says;
* each row appears one latency after the tick it is written at (the compiler writes it early by that
  latency, so the output changes at the intended time up to the tick): rise latency for a rising physical
  value, fall latency for a falling one;
* mapped back to physical units by the inverse calibration (`seqgen.calibration.to_physical`).

The shot is compiled once (`compiled_shot`, cached per shot; `pipeline.preflight_resolved` reuses the same
result). An output that has no table, or whose rows were clamped at t = 0 by the compiler (commanded before
the start to compensate its latency) or are not finite, falls back to the intended values
(`seqgen.values.value_at`) and says so: its `Track.source` is INTENDED instead of PLAYED.
"""

from __future__ import annotations

import hashlib
import threading
from dataclasses import dataclass

import numpy as np

from ..calibration import to_output, to_physical
from ..compile.tables import compile_shot
from ..values import value_at
from .cache import per_shot_cache

PLAYED = "played"  # read from the compiled tables
INTENDED = "intended"  # the output could not be compiled: the intended values (value_at) stand in

__all__ = ["INTENDED", "PLAYED", "Track", "clear_physical", "compiled_shot", "off_floor", "output_of", "played",
           "played_mean", "played_source", "track"]


@per_shot_cache(lambda shot: ("compiled-shot",))
def compiled_shot(shot):
    """(Compiled, compile findings as a tuple) of the shot, compiled once per shot."""
    compiled, findings = compile_shot(shot)
    return compiled, tuple(findings)


@dataclass(frozen=True, eq=False)
class Track:
    """One output as played: `times` (s, ascending) when each row's value appears at the output, `values`
    there in output units and `phys` in physical units; `linear`: interpolated between rows, else held.
    source: PLAYED, or INTENDED when the output could not be compiled (then times/values/phys are empty
    and the segments' intended values are read instead)."""

    output: str
    times: np.ndarray
    values: np.ndarray
    phys: np.ndarray
    linear: bool
    source: str
    slack: float = 0.0  # a row counts from this much before its time: k x tick misses t by float rounding

    def changes(self, t0: float, t1: float) -> np.ndarray:
        """Times strictly inside (t0, t1) at which the played value has a kink or a step."""
        if self.source != PLAYED or not len(self.times):
            return np.empty(0)
        inside = (self.times > t0 + self.slack) & (self.times < t1 - self.slack)
        if not self.linear:
            step = np.r_[False, self.values[1:] != self.values[:-1]]
            inside &= step
        return self.times[inside]


def _before_start(out, shot, tick: float) -> bool:
    """Whether the compiler had to clamp a write of `out` at t = 0 (commanded before the start)."""
    for seg in shot.segments:
        if seg.output == out.name:
            lat = max(out.latency_rise_s, out.latency_fall_s)
            if seg.t0 - lat < -0.5 * tick:
                return True
    return False


_PHYSICAL: dict = {}  # (output, bytes of its table column) -> physical values: an edit re-checks the same tables
_PHYSICAL_LOCK = threading.Lock()


def _physical(out, values: np.ndarray) -> np.ndarray:
    """to_physical of a table column, kept by content (a table calibration's inverse bisects 64 times)."""
    if out.calibration is None or out.calibration.kind == "linear":
        return np.asarray(to_physical(out, values), dtype=float).reshape(-1)
    key = (out, hashlib.sha256(np.ascontiguousarray(values).tobytes()).hexdigest(), len(values))
    hit = _PHYSICAL.get(key)
    if hit is None:
        hit = np.asarray(to_physical(out, values), dtype=float).reshape(-1)
        hit.setflags(write=False)
        with _PHYSICAL_LOCK:
            if len(_PHYSICAL) >= 256:
                _PHYSICAL.clear()
            _PHYSICAL[key] = hit
    return hit.copy()


def clear_physical() -> None:
    with _PHYSICAL_LOCK:
        _PHYSICAL.clear()


@per_shot_cache(lambda shot, output: ("played-track", output))
def track(shot, output: str) -> Track:
    """The played rows of one output (see the module notes)."""
    out = shot.rig.outputs[output]
    empty = np.empty(0)
    intended = Track(output, empty, empty, empty, False, INTENDED)
    device = shot.rig.devices.get(out.device)
    try:
        compiled = compiled_shot(shot)[0]
    except (ValueError, ArithmeticError, TypeError):  # the pipeline meets the same error when it compiles
        return intended
    table = next((tb for tb in compiled.tables if tb.device == out.device), None)
    if device is None or table is None or output not in table.columns or _before_start(out, shot, table.tick_s):
        return intended
    ticks = np.asarray(table.ticks, dtype=np.int64)
    values = np.asarray(table.values, dtype=float)[:, table.columns.index(output)]
    if not len(ticks) or not np.all(np.isfinite(values)):
        return intended
    linear = device.output_model == "linear"
    if not linear:  # a held output changes only where its code changes
        keep = np.r_[True, values[1:] != values[:-1]]
        ticks, values = ticks[keep], values[keep]
    phys = _physical(out, values)
    rising = np.r_[False, phys[1:] > phys[:-1]]
    falling = np.r_[False, phys[1:] < phys[:-1]]
    lat = np.where(rising, out.latency_rise_s, np.where(falling, out.latency_fall_s, 0.0))
    # a row with latency L appears L after its tick; unequal rise and fall latencies cannot reorder rows
    times = np.maximum.accumulate(ticks * table.tick_s + lat)
    for a in (times, values, phys):
        a.setflags(write=False)
    return Track(output, times, values, phys, linear, PLAYED, 1e-6 * table.tick_s)


def played(shot, output: str, times) -> np.ndarray:
    """Physical value (SI) that the hardware puts out on `output` at each time (vectorised; 1-D array).

    Read from the compiled tables (see the module notes); the intended value (`value_at`) where the output
    could not be compiled (`played_source` says which)."""
    tr = track(shot, output)
    if tr.source != PLAYED:
        return value_at(shot, output, times)
    t = np.atleast_1d(np.asarray(times, dtype=float))
    if tr.linear:
        out = shot.rig.outputs[output]
        cal = out.calibration
        if cal is None or cal.kind == "linear":  # interpolating in output or in physical units is the same
            return np.interp(t, tr.times, tr.phys)
        return np.asarray(to_physical(out, np.interp(t, tr.times, tr.values)), dtype=float).reshape(t.shape)
    idx = np.searchsorted(tr.times, t + tr.slack, side="right") - 1
    return tr.phys[np.maximum(idx, 0)]


def played_mean(shot, output: str, t0: float, t1: float, magnitude: bool = False) -> float:
    """Time average over [t0, t1] of what the hardware plays on `output` (of its magnitude with `magnitude`):
    what a pulse of that length does to the atoms when the force or light is proportional to the value (a
    push's impulse, a probe's photon count), with the DAC codes, calibration and latency of the tables. A
    held output is exact (value times time between its changes); an interpolated one by Simpson's rule between
    its rows. t1 <= t0: the value at t0."""
    if not t1 > t0:
        v = float(played(shot, output, [t0])[0])
        return abs(v) if magnitude else v
    tr = track(shot, output)
    if tr.source != PLAYED:  # the intended values, sampled finely
        t = np.linspace(t0, t1, 257)
        v = np.asarray(value_at(shot, output, t), dtype=float)
        v = np.abs(v) if magnitude else v
        return float(np.sum(0.5 * (v[1:] + v[:-1])) / 256)
    knots = np.unique(np.concatenate(([t0, t1], tr.times[(tr.times > t0) & (tr.times < t1)])))
    width = np.diff(knots)
    mid = 0.5 * (knots[1:] + knots[:-1])
    f = (lambda t: np.abs(played(shot, output, t))) if magnitude else (lambda t: played(shot, output, t))
    if tr.linear:
        area = np.sum(width * (f(knots[:-1]) + 4 * f(mid) + f(knots[1:])) / 6)
    else:  # held: the value at each interval's middle holds over all of it
        area = np.sum(width * f(mid))
    return float(area / (t1 - t0))


def output_of(shot, channel: str) -> str | None:
    """The output a beam's power channel or a coil's current channel names: the output itself, or the first of
    the channel's outputs (the one an action writes: resolve's `output_for`); None when there is none."""
    if channel in shot.rig.outputs:
        return channel
    names = shot.rig.channels.get(channel) or ()
    return names[0] if names else None


def played_source(shot, *outputs: str) -> str:
    """PLAYED when every output named is read from the tables, else INTENDED."""
    return PLAYED if all(track(shot, o).source == PLAYED for o in outputs if o in shot.rig.outputs) else INTENDED


@per_shot_cache(lambda shot, output: ("played-off-floor", output))
def off_floor(shot, output: str) -> float:
    """The largest physical value (>= 0) that still counts as off: one DAC step above the output's zero.

    A DAC cannot always put out exactly its zero: 0 V has a code on a range from 0 V or around it (LSB =
    span / 2^bits), but a calibration offset or another range can put the physical zero between codes; so a
    beam or coil played within one step of zero is off."""
    out = shot.rig.outputs[output]
    if out.kind == "digital" or not out.bits:
        return 0.0
    zero = float(np.asarray(to_output(out, 0.0)))
    step = float(np.asarray(to_physical(out, zero + out.lsb)))
    return abs(step) if np.isfinite(step) else 0.0
