"""Rule on beam shutters: an image or a barrier needs its beam's shutter open, as played, for the whole pulse.

It reads the shutter channel as the hardware plays it (`seqgen.predict.played`: the table rows moved by the
channel's latency), so a shutter opened too late, never opened or closed early is seen whatever action wrote it.
"""

from __future__ import annotations

import numpy as np

from ..codes import BEAM_SHUTTERED
from ..findings import make
from ..predict.played import played, track
from ..textfmt import fmt_when, outward
from .rules import rule


def _lit_beams(shot):
    """(action, beam) for every image (its setup's probe beam) and barrier (its beam) whose beam has a shutter."""
    for act in shot.actions("image", "barrier"):
        if act.kind == "image":
            setup = shot.rig.imaging.get(act.args.get("setup"))
            name = setup.probe_beam if setup is not None else None
        else:
            name = act.args.get("beam")
        beam = shot.rig.beams.get(name) if name else None
        if beam is not None and beam.shutter and beam.shutter in shot.rig.outputs:
            yield act, beam


def _edges(shot, shutter: str) -> tuple[np.ndarray, np.ndarray]:
    """(times, open after it) of every played change of the shutter."""
    tr = track(shot, shutter)
    times = tr.changes(-np.inf, np.inf) if len(tr.times) else np.empty(0)
    return times, played(shot, shutter, times + 1e-12) > 0.5 if len(times) else np.empty(0, dtype=bool)


def _closed_span(first: float, edges, opened, since) -> str:
    """'from t=A (closed at t=B) until t=C': the first closed moment in the pulse, and when it opens again."""
    text = f"from t={fmt_when(first)}" + (f" (closed at t={fmt_when(float(since[-1]))})" if len(since) else "")
    reopen = edges[(edges > first) & opened]
    return text + (f" until t={fmt_when(float(reopen[0]))}" if len(reopen) else " on")


@rule(BEAM_SHUTTERED, stage="physics")
def beam_shuttered(shot):
    for act, beam in _lit_beams(shot):
        out = shot.rig.outputs[beam.shutter]
        t0, t1 = act.t0, act.t0 + float(act.args.get("duration", act.t1 - act.t0))
        edges, opened = _edges(shot, beam.shutter)
        inside = edges[(edges > t0) & (edges < t1)]
        probe = np.r_[t0, inside, 0.5 * (t0 + t1), t1 - 1e-9 * max(t1 - t0, 1e-9)]
        is_open = played(shot, beam.shutter, probe) > 0.5
        what = "probe pulse of the image" if act.kind == "image" else "barrier pulse"
        if not is_open.all():
            shut = probe[~is_open]
            since = edges[(edges <= t0) & ~opened]
            never = not opened.any()
            lead = out.jitter_s + 1e-6
            if is_open[0]:  # open as the pulse starts, closed before it ends: the close comes too early
                hint = (f"close the shutter after the pulse: move the `set: {{channel: {beam.shutter}, value: 0}}` to "
                        f"at least {fmt_when(outward(lead))} after t={fmt_when(t1)}, the end of the pulse (its "
                        "latency is compensated)")
            else:
                hint = (f"open the shutter before the pulse: `- set: {{channel: {beam.shutter}, value: 1}}` at least "
                        f"{fmt_when(outward(lead))} before t={fmt_when(t0)} (its latency is compensated), and close "
                        "it after the pulse")
            yield make(BEAM_SHUTTERED,
                       f"beam '{beam.name}' is blocked: its shutter '{beam.shutter}' is closed, as played, "
                       + ("for the whole shot" if never else _closed_span(float(shut[0]), edges, opened, since))
                       + f" during the {what} from t={fmt_when(t0)} to t={fmt_when(t1)}",
                       act.pos, block=act.block, time_s=t0,
                       hint=hint,
                       data={"closed_at_s": float(shut[0]), "pulse_start_s": t0, "pulse_end_s": t1})
            continue
        if not out.jitter_s:
            continue
        before = edges[edges <= t0]
        after = edges[edges >= t1]
        near = [(t0 - float(before[-1]), "opens", float(before[-1]))] if len(before) else []
        near += [(float(after[0]) - t1, "closes", float(after[0]))] if len(after) else []
        for gap, verb, at in near:
            if gap < out.jitter_s * (1 - 1e-9):  # a gap of exactly the jitter (the fix applied) is enough
                # under half the jitter, about half the shots or more lose part of the pulse: an error
                # (common practice, no source); between half and the whole jitter, some shots: a warning
                severity = "error" if gap < 0.5 * out.jitter_s else "warning"
                yield make(BEAM_SHUTTERED,
                           f"the shutter '{beam.shutter}' of beam '{beam.name}' {verb} at t={fmt_when(at)}, "
                           f"{fmt_when(gap)} from the {what} (t={fmt_when(t0)} to {fmt_when(t1)}), within its "
                           f"{fmt_when(out.jitter_s)} jitter: on some shots it may block part of the pulse",
                           act.pos, severity=severity, block=act.block, time_s=t0,
                           hint=f"leave at least {fmt_when(outward(out.jitter_s))} between the shutter's edge and "
                                f"the pulse ({verb} {fmt_when(outward(out.jitter_s - gap))} "
                                f"{'earlier' if verb == 'opens' else 'later'})",
                           data={"gap_s": gap, "jitter_s": out.jitter_s})
