"""Stage 5: resolved shot -> one quantized change-list table per device.

Each output's rows are generated from its segments (sets are single rows;
ramps are sampled adaptively within the output's tolerance), shifted earlier
by the channel's latency, quantized to the device tick and the DAC code, and
merged into one table per device with one row per tick at which any of its
outputs changes. All per-sample work is vectorised with numpy.
"""

from __future__ import annotations

import numpy as np

from ..calibration import to_output
from ..findings import Finding, _fmt_time, make
from ..model import Compiled, DeviceTable, Output, Shot
from ..registry import declare
from .sampling import quantize_times, quantize_values, sample_ramp
from .shapes import shape_fraction

BEFORE_START = declare("timing.before-start", "error", """
    After moving an edge earlier by its channel's latency (a shutter that needs
    3 ms to open must be told 3 ms early), the command would fall before the
    start of the sequence (t = 0). Start the block later, or anchor the
    sequence so there is room for the latency.""", "seqgen's own rule", "compile")

ENVELOPES = ("blackman", "gaussian")


def _envelope(shape: str, s: np.ndarray) -> np.ndarray:
    """Pulse envelopes of peak 1 on progress s in [0, 1] (0 at both ends)."""
    if shape == "blackman":
        # Blackman window coefficients 0.42, 0.5, 0.08 (Proc. IEEE 66, 51 (1978))
        return 0.42 - 0.5 * np.cos(2 * np.pi * s) + 0.08 * np.cos(4 * np.pi * s)
    # Gaussian truncated at +-3 sigma (sigma = duration / 6), shifted so it starts and ends at 0
    g = np.exp(-0.5 * ((s - 0.5) * 6.0) ** 2)
    edge = np.exp(-0.5 * 9.0)
    return (g - edge) / (1 - edge)


def _value_function(out: Output, seg, latency: float):
    span = seg.t1 - seg.t0
    v0, v1 = seg.v0, seg.v1

    def value_at(t):
        s = np.clip((np.asarray(t, float) + latency - seg.t0) / span, 0.0, 1.0)
        if seg.shape in ENVELOPES:
            frac = _envelope(seg.shape, s)
        else:
            frac = shape_fraction(seg.shape, s, duration_s=span, tau_s=seg.tau_s, table=seg.table)
        return to_output(out, v0 + (v1 - v0) * frac)

    return value_at


def _latency(out: Output, before: float, after: float) -> float:
    return out.latency_rise_s if after > before else (out.latency_fall_s if after < before else 0.0)


def output_rows(out: Output, segments, device, findings: list, rows_per_segment: dict):
    """(ticks, values in output units) for one output, before merging."""
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
                findings.append(make(BEFORE_START, f"'{out.name}' must be commanded {_fmt_time(-t)} before t = 0 "
                                     f"to compensate its {_fmt_time(lat)} latency", seg.pos, block=seg.block, time_s=seg.t0,
                                     hint="start this block later or move the whole sequence later"))
            new = float(np.asarray(to_output(out, seg.v1)))
            if linear and k > 0:
                ticks.append(np.array([k - 1], dtype=np.int64))
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
            rt, rv = _sample_on_grid(_value_function(out, seg, lat), k0, k1, device, tol, linear)
            rows_per_segment[(seg.block, out.name, seg.t0)] = int(len(rt))
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


def _sample_on_grid(value_at, k0: int, k1: int, device, tol: float, linear: bool):
    """Sample a ramp with interior rows on the device-wide grid of its minimum interval.

    Putting every ramp's interior rows on multiples of the minimum interval keeps
    rows of different outputs of one device from landing closer together than
    the device can update; the endpoints stay exactly where the sequence puts them.
    """
    m = device.min_interval_ticks
    model = "linear" if linear else "hold"
    if m <= 1:
        return sample_ramp(value_at, k0, k1, device.tick_s, tolerance=tol, model=model)
    g0 = -(-(k0 + m) // m)
    g1 = (k1 - m) // m
    ends = np.array([k0, k1], dtype=np.int64)
    if g1 <= g0:
        return ends, np.asarray(value_at(ends * device.tick_s), dtype=float)
    gt, gv = sample_ramp(value_at, g0, g1, device.tick_s * m, tolerance=tol, model=model)
    y_ends = np.asarray(value_at(ends * device.tick_s), dtype=float)
    return np.r_[k0, np.asarray(gt, dtype=np.int64) * m, k1], np.r_[y_ends[0], gv, y_ends[1]]


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


def _quantize(out: Output, values: np.ndarray) -> np.ndarray:
    if out.kind == "digital":
        return (values >= 0.5).astype(float)
    clipped = np.clip(values, out.lo, out.hi)  # out-of-range values were reported by the range check
    if not out.bits:
        return clipped
    return quantize_values(clipped, out.lo, out.hi, out.bits)[1]


def compile_shot(shot: Shot) -> tuple[Compiled, list[Finding]]:
    findings: list[Finding] = []
    rig = shot.rig
    by_output: dict[str, list] = {}
    for seg in shot.segments:
        by_output.setdefault(seg.output, []).append(seg)
    tables = []
    for dev_name, device in rig.devices.items():
        outs = [o for o in rig.outputs.values() if o.device == dev_name]
        if not outs:
            continue
        end_tick = int(quantize_times(np.array([shot.duration_s]), device.tick_s)[0])
        rows_per_segment: dict = {}
        per_out = []
        for o in outs:
            segs = sorted(by_output.get(o.name, []), key=lambda s: (s.t0, 0 if s.action.endswith(":end") else 1))
            per_out.append(output_rows(o, segs, device, findings, rows_per_segment))
        cat_t = np.concatenate([t for t, _, _ in per_out] + [np.array([end_tick], dtype=np.int64)])
        cat_f = np.concatenate([f for _, _, f in per_out] + [np.zeros(1, dtype=bool)])
        all_ticks, inverse = np.unique(cat_t, return_inverse=True)
        # a tick is flexible only if every row on it is a ramp-interior row
        fixed = np.zeros(len(all_ticks), dtype=bool)
        np.logical_or.at(fixed, inverse, ~cat_f)
        if device.min_interval_ticks > 1:
            all_ticks = all_ticks[_drop_crowded_rows(all_ticks, ~fixed, device.min_interval_ticks)]
        values = np.empty((len(all_ticks), len(outs)), dtype=float)
        for j, (o, (t, v, _)) in enumerate(zip(outs, per_out)):
            if device.output_model == "linear" and len(t) > 1:
                col = np.interp(all_ticks, t, v)
            else:
                col = v[np.searchsorted(t, all_ticks, side="right") - 1]
            values[:, j] = _quantize(o, col)
        # drop rows that change nothing (e.g. a write of the value already held)
        if len(all_ticks) > 1:
            changed = np.ones(len(all_ticks), dtype=bool)
            changed[1:] = np.any(values[1:] != values[:-1], axis=1)
            changed[-1] = True  # keep the end row: it marks the sequence end
            all_ticks, values = all_ticks[changed], values[changed]
        tables.append(DeviceTable(dev_name, device.tick_s, all_ticks, tuple(o.name for o in outs), values,
                                  tuple(o.unit for o in outs), tuple(o.kind for o in outs), rows_per_segment))
    return Compiled(tuple(tables), shot.duration_s), findings
