"""Stage 5: resolved shot -> one quantized change-list table per device.

Each output's rows are generated from its segments (sets are single rows;
ramps are sampled adaptively within the output's tolerance, interior rows on
the device-wide grid of its minimum interval, checked at every tick), shifted
earlier by the channel's latency, quantized to the device tick and the DAC
code, and merged into one table per device with one row per tick at which any
of its outputs changes. All per-sample work is vectorised with numpy: no
Python object per row, and the value matrix is allocated once at its final
size and filled in cache-sized blocks of rows.
"""

from __future__ import annotations

import threading

import numpy as np

from ..calibration import to_output
from . import kept
from ..findings import Finding, make
from ..model import Compiled, DeviceTable, Output, Shot
from .sampling import sorted_unique, quantize_times, quantize_values, sample_ramp_report
from .shapes import PULSE_ENVELOPES, pulse_envelope, shape_fraction
from .wiring import compile_order, pulse, pulse_width, row_edges, start_edge
from ..codes import BEFORE_START, RAMP_UNDERSAMPLED, SWEEP_STEPPED
from ..textfmt import fmt_when, outward



_VERIFY_MAX = 1 << 23      # longer ramps are checked on an evenly spaced subset of about this many ticks
_FILL_ROWS = 1 << 15       # table rows filled at a time (a block of the value matrix stays in cache)
_RETRIES = 4               # re-samplings with a tighter tolerance when ticks between grid points miss it


def _value_function(out: Output, seg, latency: float):
    span = seg.t1 - seg.t0
    v0, v1 = seg.v0, seg.v1

    def value_at(t):
        s = np.clip((np.asarray(t, float) + latency - seg.t0) / span, 0.0, 1.0)
        if seg.shape in PULSE_ENVELOPES:
            frac = pulse_envelope(seg.shape, s)
        else:
            frac = shape_fraction(seg.shape, s, duration_s=span, tau_s=seg.tau_s, table=seg.table)
        # v0 (1 - f) + v1 f lands on v0 and v1 exactly at f = 0 and f = 1
        # (v0 + (v1 - v0) f can miss v1 by an ulp, enough to flip a DAC code tie)
        return to_output(out, v0 * (1.0 - frac) + v1 * frac)

    return value_at


def _latency(out: Output, before: float, after: float) -> float:
    return out.latency_rise_s if after > before else (out.latency_fall_s if after < before else 0.0)


def output_rows(out: Output, segments, device, findings: list, spans: dict):
    """(ticks, values in output units, ramp-interior flags) for one output, before
    merging; spans gets (block, output, t0) -> (first tick, last tick) per ramp."""
    tick = device.tick_s
    ticks = [np.array([0], dtype=np.int64)]
    vals = [np.atleast_1d(to_output(out, out.safe)).astype(float)]
    flexible = [np.zeros(1, dtype=bool)]  # ramp-interior rows may be dropped to keep the device's spacing
    current = out.safe
    linear = device.output_model == "linear"
    for seg in segments:
        start = current if seg.kind == "set" else seg.v0
        lat = _latency(out, start, seg.v1)
        if seg.kind == "set":
            t = seg.t0 - lat
            k = int(quantize_times(np.array([max(t, 0.0)]), tick)[0])
            if t < -0.5 * tick:
                findings.append(_before_start(out, seg, t, lat))
            new = float(np.asarray(to_output(out, seg.v1)))
            # a linearly interpolating device makes a step as a ramp over one minimum
            # interval: a row m ticks before the edge holds the old value (unless an
            # earlier row of this output already sits within those m ticks)
            pre = k - max(1, device.min_interval_ticks)
            if linear and k > 0 and pre > ticks[-1][-1]:
                ticks.append(np.array([pre], dtype=np.int64))
                vals.append(np.array([vals[-1][-1]]))
                flexible.append(np.zeros(1, dtype=bool))
            ticks.append(np.array([k], dtype=np.int64))
            vals.append(np.array([new]))
            flexible.append(np.zeros(1, dtype=bool))
        else:
            t0, t1 = seg.t0 - lat, seg.t1 - lat
            if t0 < -0.5 * tick:
                findings.append(make(BEFORE_START, f"ramp on '{out.name}' would start {(-t0) * 1e3:.4g} ms before t = 0 "
                                     "after latency compensation", seg.pos, block=seg.block, time_s=seg.t0,
                                     hint="start this block later"))
                t0, t1 = max(t0, 0.0), max(t1, tick)
            k0, k1 = (int(x) for x in quantize_times(np.array([t0, t1]), tick))
            if k1 <= k0:
                k1 = k0 + 1
            tol = seg.tolerance if seg.tolerance is not None else out.sample_tolerance
            rt, rv, err, limited = sampled_ramp(out, seg, lat, k0, k1, device, tol, linear)
            spans[(seg.block, out.name, seg.t0)] = (k0, k1)
            if limited and seg.t1 - seg.t0 >= device.min_interval_ticks * tick:  # shorter: timing.ramp-too-fast
                stepped = seg.tolerance is None and out.tolerance is None and out.name == f"{out.channel}.freq"
                findings.append((_stepped if stepped else _undersampled)(out, seg, device, err, tol, len(rt)))
            ticks.append(np.asarray(rt, dtype=np.int64))
            vals.append(np.asarray(rv, dtype=float))
            flexible.append(np.r_[False, np.ones(len(rt) - 2, dtype=bool), False] if len(rt) >= 2 else np.zeros(len(rt), bool))
        current = seg.v1
    t = np.concatenate(ticks)
    v = np.concatenate(vals)
    fl = np.concatenate(flexible)
    order = np.argsort(t, kind="stable")
    t, v, fl = t[order], v[order], fl[order]
    # several writes on one tick: the last one wins (a pulse end then the next pulse's start)
    keep = np.ones(len(t), dtype=bool)
    keep[:-1] = t[1:] != t[:-1]
    return t[keep], v[keep], fl[keep]


def _before_start(out: Output, seg, t: float, lat: float) -> Finding:
    """A set that would have to be commanded before t = 0. A clock pulse's frequency write comes a synth's
    settling time ahead of its pulse (resolve's lower_clock_pulse): then the lead is the settling, not a latency."""
    if seg.action == "clock_pulse" and out.name == f"{out.channel}.freq" and out.settling_s > 0:
        lead = out.settling_s + lat
        plus = f" plus its {fmt_when(lat)} latency" if lat > 0 else ""
        return make(BEFORE_START, f"'{out.name}' is written {fmt_when(lead)} (the synth's settling time{plus}) before "
                    f"its pulse, before t = 0 (by {fmt_when(-t)})", seg.pos, block=seg.block, time_s=seg.t0,
                    hint=f"start the pulse at least {fmt_when(outward(lead))} after t = 0",
                    data={"settling_s": out.settling_s, "latency_s": lat})
    return make(BEFORE_START, f"'{out.name}' must be commanded {fmt_when(-t)} before t = 0 "
                f"to compensate its {fmt_when(lat)} latency", seg.pos, block=seg.block, time_s=seg.t0,
                hint="start this block later or move the whole sequence later")


def _undersampled(out: Output, seg, device, err: float, tol: float, rows: int) -> Finding:
    dt = device.min_interval_ticks * device.tick_s
    unit = f" {out.unit}" if out.unit else ""
    lsb = f" ({err / out.lsb:.3g} LSB)" if out.lsb > 0 else ""
    # rounded up, so that the longer ramp or looser tolerance the fix names is enough as printed
    factor = outward((err / tol) ** (0.5 if device.output_model == 'linear' else 1.0), 3)
    loose = outward(err, 3)
    return make(RAMP_UNDERSAMPLED,
                f"{seg.shape} ramp on '{out.name}' deviates from its curve by up to {err:.4g}{unit}{lsb}, "
                f"{err / tol:.3g} times its tolerance {tol:.4g}{unit} (misses it by {err - tol:.4g}{unit}): "
                f"{rows} rows over {fmt_when(seg.t1 - seg.t0)}, no closer than {device.name}'s minimum interval "
                f"{fmt_when(dt)}", seg.pos, block=seg.block, time_s=seg.t0,
                hint=f"make the ramp about {factor:.3g} times longer, loosen its tolerance to {loose:.3g}{unit}, "
                     "or use a device with a shorter minimum interval",
                data={"max_error": err, "tolerance": tol, "rows": rows, "min_interval_s": dt,
                      "length_factor": factor, "loose_tolerance": loose})


def _stepped(out: Output, seg, device, err: float, tol: float, rows: int) -> Finding:
    """A synth frequency sweep without a tolerance of its own: a staircase, told as a note (hardware.sweep-stepped)."""
    dt = device.min_interval_ticks * device.tick_s
    loose = outward(err, 3)
    return make(SWEEP_STEPPED,
                f"{seg.shape} sweep on '{out.name}' plays as {rows} rows no closer than {device.name}'s minimum "
                f"interval {fmt_when(dt)}, up to {err:.4g} {out.unit} off the intended curve; the physics checks "
                "follow the atoms through these steps", seg.pos, block=seg.block, time_s=seg.t0,
                hint=f"to hold the sweep to a bound, give it `tolerance: {loose:.3g} {out.unit}` (a warning when "
                     "the steps exceed it)",
                data={"max_error": err, "rows": rows, "min_interval_s": dt, "loose_tolerance": loose})


class RampCache:
    """Sampled ramps keyed on everything the sampling depends on (output, segment,
    latency, tick span, device, tolerance), so the shots of a scan, which mostly
    repeat the same ramps, sample each once per process. Bounded by total rows;
    the cached arrays are read-only."""

    MAX_ROWS = 1 << 21  # about 32 MB of ticks and values

    def __init__(self):
        self._items: dict = {}
        self._rows = 0
        self._lock = threading.Lock()  # a threaded cluster worker may compile several shots at once

    def get(self, key):
        return self._items.get(key)

    def put(self, key, value):
        rows = len(value[0])
        if rows > self.MAX_ROWS // 8:
            return
        for a in value[:2]:
            a.setflags(write=False)
        with self._lock:
            while self._items and self._rows + rows > self.MAX_ROWS:
                old = self._items.pop(next(iter(self._items)))  # oldest first
                self._rows -= len(old[0])
            if key not in self._items:
                self._items[key] = value
                self._rows += rows

    def clear(self):
        with self._lock:
            self._items.clear()
            self._rows = 0


RAMP_CACHE = RampCache()


def sampled_ramp(out: Output, seg, lat: float, k0: int, k1: int, device, tol: float, linear: bool):
    key = (out, seg, lat, k0, k1, device, tol, linear)
    try:
        hit = RAMP_CACHE.get(key)
    except TypeError:  # an unhashable field (never in resolved shots): sample without the cache
        key, hit = None, None
    if hit is not None:
        return hit
    disk_key = kept.key(key, k0, k1) if key is not None else None
    value = kept.read(disk_key) if disk_key is not None else None
    if value is None:
        rt, rv, err, limited = _sample_on_grid(_value_function(out, seg, lat), k0, k1, device, tol, linear)
        value = (np.asarray(rt, dtype=np.int64), np.asarray(rv, dtype=float), err, limited)
        if disk_key is not None:
            kept.write(disk_key, value)
    if key is not None:
        RAMP_CACHE.put(key, value)
    return value


def _sample_on_grid(value_at, k0: int, k1: int, device, tol: float, linear: bool):
    """Sample a ramp with interior rows on the device-wide grid of its minimum interval.

    Putting every ramp's interior rows on multiples of the minimum interval keeps
    rows of different outputs of one device from landing closer together than
    the device can update; the endpoints stay exactly where the sequence puts them.
    Returns (ticks, values, largest deviation from the curve at the device's
    ticks, whether that deviation is over tol because rows cannot be closer).
    """
    m = device.min_interval_ticks
    tick = device.tick_s
    model = "linear" if linear else "hold"
    if m <= 1:
        r = sample_ramp_report(value_at, k0, k1, tick, tolerance=tol, model=model)
        return r.ticks, r.values, r.max_error, r.min_interval_limited
    # the grid sampler sees only grid points: the curve is evaluated at the device's
    # ticks too, hold rows get the midpoint of what the curve does while they hold,
    # and the grid is re-sampled with a tighter tolerance while the ticks miss it
    fit = _DenseFit(value_at, k0, k1, tick, linear)
    g0 = -(-(k0 + m) // m)
    g1 = (k1 - m) // m
    ticks, vals, err = fit(np.array([k0, k1], dtype=np.int64), None)
    if g1 < g0 or err <= tol:  # no room for interior rows, or none needed (a linear ramp on a linear device)
        return ticks, vals, err, err > tol * (1 + 1e-9)
    target, rows, best = tol, -1, None
    for _ in range(_RETRIES):
        r = sample_ramp_report(value_at, g0, g1, tick * m, tolerance=target, model=model)
        ticks, vals, err = fit(np.concatenate(([k0], r.ticks * m, [k1])), r.values)
        if best is None or err < best[2]:
            best = (ticks, vals, err)
        if err <= tol * (1 + 1e-9) or r.min_interval_limited or r.rows == rows:
            break
        rows = r.rows
        # hold errors shrink in proportion to the row spacing, linear ones faster
        target *= 0.9 * tol / err
    ticks, vals, err = best
    return ticks, vals, err, err > tol * (1 + 1e-9)


class _DenseFit:
    """A ramp's curve at every device tick of [k0, k1] (an evenly spaced subset
    for ramps over _VERIFY_MAX ticks), to fit and check rows placed on a grid.

    Hold: each row but the last gets the midpoint of the curve's range while it
    holds (error: half that range); the last row is the curve's end value.
    Linear: rows keep the curve's values (interpolation); the error is the
    largest |straight lines between rows - curve| at the ticks."""

    def __init__(self, value_at, k0: int, k1: int, tick_s: float, linear: bool):
        stride = max(1, -(-(k1 - k0) // _VERIFY_MAX))
        self.k = np.arange(k0, k1 + 1, stride, dtype=np.int64)
        if self.k[-1] != k1:
            self.k = np.append(self.k, np.int64(k1))
        self.y = np.asarray(value_at(self.k * tick_s), dtype=float)
        self.value_at, self.tick_s, self.linear = value_at, tick_s, linear

    def __call__(self, ticks: np.ndarray, interior: np.ndarray | None):
        ticks = np.asarray(ticks, dtype=np.int64)
        if self.linear:
            ends = self.y[[0, -1]]
            vals = np.concatenate((ends[:1], interior, ends[1:])) if interior is not None else ends.copy()
            err = float(np.max(np.abs(np.interp(self.k, ticks, vals) - self.y)))
            return ticks, vals, err
        body = self.y[:-1]
        # a row after the last checked tick but one (ramps checked on a strided subset) starts in the last piece
        starts = np.minimum(np.searchsorted(self.k, ticks[:-1]), len(body) - 1)
        lo = np.minimum.reduceat(body, starts)
        hi = np.maximum.reduceat(body, starts)
        vals = np.append(0.5 * (lo + hi), self.y[-1])
        return ticks, vals, float(np.max(0.5 * (hi - lo)))


def _drop_crowded_rows(ticks: np.ndarray, flexible: np.ndarray, m: int) -> np.ndarray:
    """Drop ramp-interior rows that sit closer than m ticks to another row."""
    keep = np.ones(len(ticks), dtype=bool)
    for _ in range(16):
        t = ticks[keep]
        f = flexible[keep]
        close = np.nonzero(np.diff(t) < m)[0]
        if not len(close):
            break
        drop = np.where(f[close + 1], close + 1, np.where(f[close], close, -1))
        drop = drop[drop >= 0]
        if not len(drop):
            break
        idx = np.nonzero(keep)[0]
        keep[idx[np.unique(drop)]] = False
    return keep


def _grid(out: Output) -> tuple[float, float, int]:
    """(origin, step, shift) of an output's codes: code index n plays origin + n step; the code sent is
    n - shift (two's complement: shift 2^(bits-1); IEEE Std 1658-2011, DAC terminology)."""
    origin = 0.0 if out.reference_clock_hz else out.lo
    shift = 2 ** (out.bits - 1) if out.code_convention == "twos_complement" else 0
    return origin, out.lsb, shift


def _quantize(out: Output, values: np.ndarray) -> np.ndarray:
    if out.kind == "digital":
        return (values >= 0.5).astype(float)
    clipped = np.clip(values, out.lo, out.hi)  # out-of-range values were reported by the range check
    if not out.bits:
        return clipped
    origin, step, _ = _grid(out)
    return quantize_values(clipped, out.lo, out.hi, out.bits, origin=origin, step=step)[1]


def output_codes(out: Output, values: np.ndarray) -> np.ndarray:
    """The integer codes (int64) of an output's quantized values (see `Output.code_convention`): 0/1 on a
    digital line, 0 where the output has no bits; two's complement codes are signed."""
    v = np.asarray(values, dtype=float)
    if out.kind == "digital":
        return (v >= 0.5).astype(np.int64)
    if not out.bits:
        return np.zeros(v.shape, dtype=np.int64)
    origin, step, shift = _grid(out)
    # the values sit on codes already: the division lands within float noise of an integer
    return np.rint((v - origin) / step).astype(np.int64) - shift


def _needed(q: np.ndarray, linear: bool) -> np.ndarray:
    """Rows of one output (quantized values q) that the device needs.

    Hold: rows that change the code. Linear: all but those inside a run of equal
    codes (dropping a row whose neighbours differ would bend the interpolation)."""
    need = np.ones(len(q), dtype=bool)
    if len(q) < 2:
        return need
    if linear:
        if len(q) > 2:
            need[1:-1] = (q[1:-1] != q[:-2]) | (q[1:-1] != q[2:])
    else:
        np.not_equal(q[1:], q[:-1], out=need[1:])
    return need


def compile_shot(shot: Shot) -> tuple[Compiled, list[Finding]]:
    """One DeviceTable per device; findings from compiling (latency, undersampling).

    Per output: rows from its segments, quantized to the DAC code, reduced to
    the rows the device needs. Per device: the union of those ticks (minus
    ramp-interior rows crowding another row closer than the minimum interval),
    then one column per output written straight into the value matrix (hold:
    each needed row's code repeated up to the next one; linear: interpolated
    and quantized). The matrix is allocated once at its final size.
    """
    findings: list[Finding] = []
    rig = shot.rig
    by_output: dict[str, list] = {}
    for seg in shot.segments:
        by_output.setdefault(seg.output, []).append(seg)
    built, generated, starts = {}, [], {}
    # a wired child before its parent: the parent's generated edges come from the child's rows
    for dev_name in compile_order(rig.devices, rig.outputs):
        device = rig.devices[dev_name]
        outs = [o for o in rig.outputs.values() if o.device == dev_name]
        if not outs:
            continue
        table = _device_table(shot, dev_name, device, outs, by_output, findings)
        built[dev_name] = table
        for seg in _wiring_edges(shot, device, outs, table, starts):
            by_output.setdefault(seg.output, []).append(seg)
            generated.append(seg)
    tables = [built[n] for n in rig.devices if n in built]
    return Compiled(tuple(tables), shot.duration_s, tuple(generated), starts), findings


def _wiring_edges(shot, device, outs, table, starts) -> list:
    """The pulses a wired device needs on its parent's lines (compile/wiring.py); a triggered device's start
    goes to starts."""
    rig = shot.rig
    out = []
    if device.start_on and device.start_on in rig.outputs:
        line = rig.outputs[device.start_on]
        parent = rig.devices[line.device]
        t, starts[device.name] = start_edge(device, parent)
        out.extend(pulse(line, t, pulse_width(line, parent, device), device))
    edge_line = device.edge_line
    if edge_line and edge_line in rig.outputs:
        line = rig.outputs[edge_line]
        parent = rig.devices[line.device]
        w = pulse_width(line, parent, device)
        end_tick = int(quantize_times(np.array([shot.duration_s]), device.tick_s)[0])
        for t in row_edges(device, table, end_tick):
            if t >= 0:  # an edge before t = 0 cannot be played: check.wiring reports it
                out.extend(pulse(line, t, w, device))
    return out


def _device_table(shot, dev_name, device, outs, by_output, findings) -> DeviceTable:
    """One device's table (see compile_shot)."""
    linear = device.output_model == "linear"
    end_tick = int(quantize_times(np.array([shot.duration_s]), device.tick_s)[0])
    end = np.array([end_tick], dtype=np.int64)
    per_out, windows = [], []
    for o in outs:
        segs = sorted(by_output.get(o.name, []), key=lambda s: (s.t0, 0 if s.action.endswith(":end") else 1))
        spans: dict = {}
        t, v, fl = output_rows(o, segs, device, findings, spans)
        q = _quantize(o, v)
        need = _needed(q, linear)
        per_out.append((t, v, q, need, fl))
        windows.append(spans)
    ticks = sorted_unique(np.concatenate([t[need] for t, _, _, need, _ in per_out] + [end]))
    m = device.min_interval_ticks
    if m > 1 and len(ticks) > 1 and np.any(np.diff(ticks) < m):
        # a tick is flexible only if every needed row on it is a ramp-interior row
        fixed = sorted_unique(np.concatenate([t[need & ~fl] for t, _, _, need, fl in per_out] + [end]))
        pos = np.minimum(np.searchsorted(fixed, ticks), len(fixed) - 1)
        ticks = ticks[_drop_crowded_rows(ticks, fixed[pos] != ticks, m)]
    n = len(ticks)
    values = np.empty((n, len(outs)), dtype=float)
    bounds = np.arange(0, n + _FILL_ROWS, _FILL_ROWS).clip(max=n)  # row blocks that stay in cache
    fills, rows_per_segment = [], {}
    for j, (o, (t, v, q, need, _)) in enumerate(zip(outs, per_out)):
        tn = t[need]
        p = np.searchsorted(ticks, tn)  # table row of (or after) each needed row
        if linear and len(t) > 1:
            fills.append((o, t, v, None, None))
        else:
            # hold: row r gets the code of the last needed row at or before it; tick 0 is
            # always a needed row (p[0] == 0); a needed row dropped for crowding ends up
            # with a run of length 0, or hands its value to the next table row
            fills.append((o, None, q[need], p, (np.searchsorted(p, bounds[:-1], side="right") - 1,
                                                np.searchsorted(p, bounds[1:], side="left"))))
        # rows this output's segments use: its needed rows that made it into the table
        survived = tn == ticks[np.minimum(p, n - 1)]
        cum = np.concatenate(([0], np.cumsum(survived)))
        for key, (k0, k1) in windows[j].items():
            a, b = np.searchsorted(tn, [k0, k1 + 1])
            rows_per_segment[key] = int(cum[b] - cum[a])
    for c, (c0, c1) in enumerate(zip(bounds[:-1], bounds[1:])):
        block = values[c0:c1]
        for j, (o, t, v, p, ab) in enumerate(fills):
            if p is None:
                block[:, j] = _quantize(o, np.interp(ticks[c0:c1], t, v))
            else:
                a, b = ab[0][c], ab[1][c]
                runs = p[a:b].copy()
                runs[0] = c0
                block[:, j] = np.repeat(v[a:b], np.diff(runs, append=c1))
    codes = np.empty(values.shape, dtype=np.int64)
    for j, o in enumerate(outs):
        codes[:, j] = output_codes(o, values[:, j])
    return DeviceTable(dev_name, device.tick_s, ticks, tuple(o.name for o in outs), values,
                       tuple(o.unit for o in outs), tuple(o.kind for o in outs), rows_per_segment,
                       codes, tuple(o.code_convention for o in outs),
                       tuple(1 if o.kind == "digital" else int(o.bits or 0) for o in outs),
                       tuple(1.0 if o.kind == "digital" else o.lsb for o in outs),
                       tuple(o.code_zero for o in outs))
