"""Readable views of a resolved shot (for `seqgen show`), and which shot of a scan a view shows (`show`,
`plot` and the HTML report say it: the base shot, or shot N with its param values)."""

from __future__ import annotations

import math
from dataclasses import dataclass

from .resolve.units import Qty, display_unit, format_qty
from .textfmt import fmt_si


def _fmt(v, unit):
    if v is None:
        return "-"
    return fmt_si(v, unit) if unit else f"{v:.6g}"


def timeline_rows(shot, compiled=None) -> list[dict]:
    rows_used = {}
    if compiled is not None:
        for t in compiled.tables:
            rows_used.update(t.rows_per_segment)
    out = []
    generated = tuple(getattr(compiled, "wiring", ())) if compiled is not None else ()  # block and action "wiring"
    for s in sorted(shot.segments + generated, key=lambda s: (s.t0, s.output)):
        o = shot.rig.outputs[s.output]
        unit = o.phys_unit
        if s.kind == "ramp":
            values = f"{_fmt(s.v0, unit)} -> {_fmt(s.v1, unit)} ({s.shape})"
        else:
            values = _fmt(s.v1, unit)
        out.append({"block": s.block, "start": fmt_si(s.t0, "s"), "end": fmt_si(s.t1, "s"),
                    "output": s.output, "action": s.action, "values": values,
                    "rows": rows_used.get((s.block, s.output, s.t0), 1 if s.kind == "set" else "-"),
                    "start_s": s.t0, "end_s": s.t1})
    return out


def physics_rows(shot) -> list[dict]:
    """Physics predictions per physics action (seqgen.predict.report_rows), as plain rows."""
    from .predict import report_rows

    return [r.as_dict() for r in report_rows(shot)]


# ----------------------------------------------------------------------------- which shot of a scan


@dataclass(frozen=True)
class ShotChoice:
    """Which shot of an N-shot scan a view shows: shot `index` (run order, as in `seqgen check --json` and
    scan.json), or the base shot (`index` None: every scanned param at its `value:`)."""

    shots: int  # shots in the scan
    index: int | None  # run-order index; None: the base shot
    written_index: int | None  # position in written (unshuffled) order; None for the base shot
    names: tuple  # scanned params, written order
    values: tuple  # of Qty, in `names` order
    same_as: int | None = None  # the base shot: the index of the scan's shot with the same values, if any

    @property
    def values_text(self) -> str:
        return ", ".join(f"{n} = {format_qty(q)}" for n, q in zip(self.names, self.values))

    def caption(self) -> str:
        """One line: what is shown, with which values, and how to see another shot."""
        last = self.shots - 1
        if self.index is None:
            same = f"; the same values as shot {self.same_as}" if self.same_as is not None else ""
            pick = f"--shot 0..{last} picks a shot" if last > 0 else "--shot 0 picks it"
            return (f"base shot of a scan of {self.shots} shot{'s' if self.shots != 1 else ''} (each scanned param "
                    f"at its written value): "
                    f"{self.values_text}{same}; {pick}")
        order = f", written-order position {self.written_index}" if self.written_index != self.index else ""
        return f"shot {self.index} of the {self.shots} shots of the scan (run order{order}): {self.values_text}"

    def to_json(self) -> dict:
        return {"shots": self.shots, "shot": self.index, "written_index": self.written_index,
                "base": self.index is None, "same_as": self.same_as,
                "params": {n: {"value": q.value, "unit": display_unit(q.dims)} for n, q in zip(self.names, self.values)}}


def shot_choice(plan, index: int | None, shot=None) -> ShotChoice:
    """The ShotChoice of shot `index` of a `ScanPlan`, or (index None) of the base shot `shot` (a resolved
    `Shot` whose params hold the base values)."""
    if index is not None:
        return ShotChoice(len(plan), index, plan.written_index[index], plan.names, tuple(plan.points[index]))
    base = {p.name: Qty(p.value, p.dims) for p in (shot.params if shot is not None else ())}
    values = tuple(base.get(n) for n in plan.names)
    same = None
    if all(v is not None for v in values):
        same = next((i for i, pt in enumerate(plan.points)
                     if all(math.isclose(a.value, b.value, rel_tol=1e-12, abs_tol=0.0) or a.value == b.value
                            for a, b in zip(pt, values))), None)
    else:  # a scanned param the base shot does not resolve: show what the scan knows
        values = tuple(v if v is not None else Qty(float("nan"), plan.axis(n).values[0].dims)
                       for n, v in zip(plan.names, values))
    return ShotChoice(len(plan), None, None, plan.names, values, same)
