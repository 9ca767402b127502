"""Readable views of a resolved shot (for `seqgen show`)."""

from __future__ import annotations

from .resolve.units import format_value


def _fmt(v, unit):
    if v is None:
        return "-"
    return format_value(v, unit) if unit else f"{v:.6g}"


def timeline_rows(shot, compiled=None) -> list[dict]:
    rows_used = {}
    if compiled is not None:
        for t in compiled.tables:
            rows_used.update(t.rows_per_segment)
    out = []
    for s in sorted(shot.segments, key=lambda s: (s.t0, s.output)):
        o = shot.rig.outputs[s.output]
        unit = o.phys_unit
        if s.kind == "ramp":
            values = f"{_fmt(s.v0, unit)} -> {_fmt(s.v1, unit)} ({s.shape})"
        else:
            values = _fmt(s.v1, unit)
        out.append({"block": s.block, "start": format_value(s.t0, "s"), "end": format_value(s.t1, "s"),
                    "output": s.output, "action": s.action, "values": values,
                    "rows": rows_used.get((s.block, s.output, s.t0), 1 if s.kind == "set" else "-"),
                    "start_s": s.t0, "end_s": s.t1})
    return out


def physics_rows(shot) -> list[dict]:
    """Physics predictions per physics action, from the physics checks' reports."""
    try:
        from .check.physics import report_physics
    except ImportError:
        return []
    return report_physics(shot)
