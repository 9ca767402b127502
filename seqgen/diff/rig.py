"""Rig level: devices, channels, calibrations, limits, latencies and geometry,
each with the outputs it affects (and which of those the sequence writes)."""

from __future__ import annotations

from dataclasses import fields

from ..calibration import describe
from . import fmt
from .model import Change

# Output fields by category, with the unit to show them in ("phys" = the output's physical unit)
_OUTPUT_FIELDS = {
    "calibration": (("calibration", None),),
    "limits": (("hard_min", "phys"), ("hard_max", "phys"), ("max_slew", "phys/s")),
    "latency": (("latency_rise_s", "s"), ("latency_fall_s", "s"), ("jitter_s", "s")),
    "range": (("lo", "out"), ("hi", "out"), ("bits", None), ("unit", None), ("kind", None), ("tolerance", "out")),
    "safe-value": (("safe", "phys"),),
    "channel": (("device", None), ("min_pulse_s", "s"), ("phys_unit", None)),
    # what a loader sends (README "DAC codes"): the code convention in effect (the channel's `code:`, else its
    # device's, else the default for its range), a synth word's reference clock, a synth's settling
    "handoff": (("code_convention", None), ("reference_clock_hz", "Hz"), ("settling_s", "s")),
}
# Device wiring (README "Wiring") and what its trigger input takes, with the unit to show them in
_WIRING_FIELDS = (("start_on", None), ("start_latency_s", "s"), ("step_on", None), ("step_latency_s", "s"),
                  ("clock_on", None), ("clock_max_hz", "Hz"), ("min_trigger_period_s", "s"),
                  ("min_trigger_pulse_s", "s"), ("trigger_jitter_s", "s"))
_WEIGHTS = {"wiring": 62, "handoff": 58, "limits": 70, "calibration": 65, "latency": 60, "range": 55, "safe-value": 50, "device": 50,
            "channel": 45, "geometry": 40, "field": 40, "repetition": 20, "channel-added": 45, "channel-removed": 50,
            "rig-file": 15}


def _fmt_field(value, unit, out):
    if value is None:
        return "none"
    if unit == "s":
        return fmt.t(value)
    if unit == "phys":
        return fmt.q(value, out.phys_unit)
    if unit == "phys/s":
        return fmt.q(value, f"{out.phys_unit}/s" if out.phys_unit else "1/s")
    if unit == "out":
        return fmt.q(value, out.unit)
    if unit == "Hz":
        return fmt.q(value, "Hz")
    return str(value)


def _cal_text(cal) -> str:
    if cal is None:
        return "none"
    return f"{cal.quantity}: " + describe(cal) + (
        "" if cal.kind == "linear" else " [" + ", ".join(f"{x:g}->{y:g}" for x, y in zip(cal.table_phys, cal.table_out)) + "]")


def _cal_same(a, b) -> bool:
    if a is None or b is None:
        return a is b
    return (a.kind == b.kind and fmt.close(a.dims, b.dims) and fmt.close(a.slope, b.slope) and fmt.close(a.offset, b.offset)
            and fmt.close(a.table_phys, b.table_phys) and fmt.close(a.table_out, b.table_out))


def _written(shot) -> set:
    return {s.output for s in shot.segments} if shot is not None else set()


def rig_changes(old_shot, new_shot) -> list:
    ra, rb = old_shot.rig, new_shot.rig
    used = _written(old_shot) | _written(new_shot)
    out = []

    def add(kind, subject, message, old, new, affects):
        affects = sorted(set(affects))
        written = [o for o in affects if o in used]
        if affects:
            message += "; affects " + ", ".join(affects) + (f" (written by the sequence: {', '.join(written)})" if written
                                                           else " (not written by the sequence)")
        out.append(Change("rig", kind, subject, message, old, new, _WEIGHTS.get(kind, 30) + (10 if written else 0),
                          {"affects": affects, "written": written}))

    if ra.name != rb.name:  # another rig (a moved copy of the same rig file is no difference)
        add("rig-file", "rig", f"rig {ra.name} ({ra.file}) -> {rb.name} ({rb.file})", ra.name, rb.name, [])
    # devices
    for d in sorted(set(ra.devices) | set(rb.devices)):
        a, b = ra.devices.get(d), rb.devices.get(d)
        outs = [o.name for r in (ra, rb) for o in r.outputs.values() if o.device == d]
        if a is None or b is None:
            add("device", d, f"device {d} " + ("added" if a is None else "removed"), None if a is None else d,
                None if b is None else d, outs)
            continue
        for f, unit in (("timebase_hz", "Hz"), ("min_interval_s", "s"), ("memory_depth", None), ("output_model", None)):
            if f == "min_interval_s":  # compared in seconds: a new timebase alone changes the tick count
                x, y = a.min_interval_ticks * a.tick_s, b.min_interval_ticks * b.tick_s
            else:
                x, y = getattr(a, f), getattr(b, f)
            if not fmt.close(x, y):
                xs, ys = (fmt.t(x), fmt.t(y)) if unit == "s" else ((fmt.q(x, unit), fmt.q(y, unit)) if unit else (str(x), str(y)))
                add("device", f"{d}.{f}", f"device {d}: {f} {xs} -> {ys}", xs, ys, outs)
        for f, unit in _WIRING_FIELDS:
            x, y = getattr(a, f), getattr(b, f)
            if x == y or (unit and x is not None and y is not None and fmt.close(x, y)):
                continue
            xs, ys = (_fmt_field(v, unit, None) if v is not None else "none" for v in (x, y))
            lines = [v for v in (x, y) if isinstance(v, str)]
            add("wiring", f"{d}.{f}", f"device {d} wiring: {f} {xs} -> {ys}", xs, ys, outs + lines)
    # channels and their outputs
    for ch in sorted(set(ra.channels) - set(rb.channels)):
        add("channel-removed", ch, f"channel {ch} removed from the rig", ch, None, ra.channels[ch])
    for ch in sorted(set(rb.channels) - set(ra.channels)):
        add("channel-added", ch, f"channel {ch} added to the rig ({rb.outputs[rb.channels[ch][0]].kind}"
            f" on {rb.outputs[rb.channels[ch][0]].device})" if rb.channels[ch] else f"channel {ch} added", None, ch, rb.channels[ch])
    for name in sorted(set(ra.outputs) & set(rb.outputs)):
        a, b = ra.outputs[name], rb.outputs[name]
        for category, items in _OUTPUT_FIELDS.items():
            for f, unit in items:
                x, y = getattr(a, f), getattr(b, f)
                same = _cal_same(x, y) if f == "calibration" else fmt.close(x, y, abs_tol=1e-300)
                if same:
                    continue
                if f == "calibration":
                    xs, ys = _cal_text(x), _cal_text(y)
                else:
                    xs, ys = _fmt_field(x, unit, a), _fmt_field(y, unit, b)
                add(category, f"{name}.{f}", f"{name}: {f} {xs} -> {ys}", xs, ys, [name])
    # geometry: beams, coils, drives, imaging setups
    for title, ma, mb, chan_keys in (("beam", ra.beams, rb.beams, ("power_channel",)),
                                     ("coil", ra.coils, rb.coils, ("current_channel",)),
                                     ("drive", ra.drives, rb.drives, ("channel",)),
                                     ("imaging", ra.imaging, rb.imaging, ("camera_channel",))):
        for n in sorted(set(ma) | set(mb)):
            a, b = ma.get(n), mb.get(n)
            src = b or a
            affects = []
            for k in chan_keys:
                ch = getattr(src, k, None)
                affects += list((rb.channels.get(ch) or ra.channels.get(ch) or ())) if ch else []
            if title == "imaging" and getattr(src, "probe_beam", None):
                beam = rb.beams.get(src.probe_beam) or ra.beams.get(src.probe_beam)
                if beam is not None:
                    affects += list(rb.channels.get(beam.power_channel) or ())
            if a is None or b is None:
                add("geometry", f"{title} {n}", f"{title} {n} " + ("added" if a is None else "removed"),
                    None if a is None else n, None if b is None else n, affects)
                continue
            for f in fields(a):
                if f.name in ("pos", "name"):
                    continue
                x, y = getattr(a, f.name), getattr(b, f.name)
                if not fmt.close(x, y, abs_tol=1e-300):
                    add("geometry", f"{title} {n}.{f.name}", f"{title} {n}: {f.name} {fmt.q(x)} -> {fmt.q(y)}",
                        fmt.q(x), fmt.q(y), affects)
    if not fmt.close(ra.bias_field_t, rb.bias_field_t):
        add("field", "fields.bias", f"bias field {fmt.q(ra.bias_field_t, 'T')} -> {fmt.q(rb.bias_field_t, 'T')}",
            fmt.q(ra.bias_field_t, "T"), fmt.q(rb.bias_field_t, "T"), [])
    if not fmt.close(ra.repetition_period_s, rb.repetition_period_s):
        add("repetition", "repetition_period", f"repetition period {fmt.t(ra.repetition_period_s)} -> "
            f"{fmt.t(rb.repetition_period_s)}", fmt.t(ra.repetition_period_s), fmt.t(rb.repetition_period_s), [])
    return out


def manifest_rig_changes(old_man: dict | None, new_man: dict | None) -> list:
    """Builds carry the rig's name, file and hash, and per device what a loader needs: each column's code
    (convention, bits, lsb) and the device's wiring; those are compared, the rest of the rig is not."""
    a = (old_man or {}).get("rig") or {}
    b = (new_man or {}).get("rig") or {}
    out = []
    if a.get("sha256") and b.get("sha256") and a.get("sha256") != b.get("sha256"):
        out.append(Change("rig", "rig-file", "rig", f"rig file content changed ({a.get('file')} sha256 "
                          f"{a['sha256'][:12]} -> {b.get('file')} {b['sha256'][:12]}); the builds do not say all "
                          "that changed", a["sha256"][:12], b["sha256"][:12], 30,
                          {"old_sha256": a["sha256"], "new_sha256": b["sha256"]}))
    da = (old_man or {}).get("devices") or {}
    db = (new_man or {}).get("devices") or {}
    for dev in sorted(set(da) & set(db)):
        wa, wb = da[dev].get("wiring") or {}, db[dev].get("wiring") or {}
        cols = [c.get("name") for c in db[dev].get("columns") or ()]
        for key in sorted(set(wa) | set(wb)):
            x, y = wa.get(key), wb.get(key)
            if x == y or (isinstance(x, (int, float)) and isinstance(y, (int, float)) and fmt.close(x, y)):
                continue
            out.append(Change("rig", "wiring", f"{dev}.{key}", f"device {dev} wiring: {key} {x} -> {y}; affects "
                              + ", ".join(cols), str(x), str(y), _WEIGHTS["wiring"], {"affects": cols, "written": []}))
        ca = {c.get("name"): c.get("code") or {} for c in da[dev].get("columns") or ()}
        cb = {c.get("name"): c.get("code") or {} for c in db[dev].get("columns") or ()}
        for name in sorted(set(ca) & set(cb)):
            for key in ("convention", "bits", "lsb"):
                x, y = ca[name].get(key), cb[name].get(key)
                if x == y or (isinstance(x, float) and isinstance(y, float) and fmt.close(x, y)):
                    continue
                out.append(Change("rig", "handoff", f"{name}.code.{key}", f"{name}: code {key} {x} -> {y}; affects "
                                  f"{name}", str(x), str(y), _WEIGHTS["handoff"], {"affects": [name], "written": []}))
    return out
