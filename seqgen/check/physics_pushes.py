"""Rules on pushes (velocity, direction against the next barrier, no force, arrival) and on the
Stern-Gerlach separation of the components at an image. They read `seqgen.predict.pushes` and
`seqgen.predict.cloud`."""

from __future__ import annotations

import math

import numpy as np

from ..codes import (
    COMPONENTS_OVERLAP, COMPONENTS_SEPARATED, PARTS_OVERLAP, EQUAL_MOMENTS, PUSH_AWAY_FROM_BARRIER, PUSH_NO_FORCE, PUSH_TOO_LATE,
    PUSH_VELOCITY,
)
from ..calibration import to_physical
from ..findings import make
from ..predict.barrier import analyse
from ..predict.cloud import SEPARATION_WIDTHS, cloud_at_image, image_prediction, separations
from ..predict.played import output_of
from ..predict.pushes import push_analysis, pushes
from ..predict.species import MU_B, bias
from ..predict.states import barriers, rel_off
from ..predict.text import who
from ..textfmt import fmt_length, fmt_state, fmt_time, fmt_vec, outward
from .physics_barrier import duration_hint
from .rules import rule
from .ticks import action_outputs, duration_text, fmt_tick, grid, min_interval, on_grid, overlap

PUSH_TOLERANCE = 0.10



@rule(PUSH_VELOCITY, stage="physics")
def push_velocity(shot):
    for act in pushes(shot):
        want = act.args.get("expect_velocity")
        rep = push_analysis(shot, act)
        if want is None or not rep or rep.no_force:
            continue
        tol = act.args.get("tolerance", PUSH_TOLERANCE)
        got = abs(rep.velocity)
        if rel_off(got, abs(want)) > tol:
            how = (f"moment {rep.moment / MU_B:+.4g} mu_B of {fmt_state(*rep.state)}, gradient "
                   f"{rep.gradient * 100:.4g} G/cm" if rep.kind == "magnetic" else
                   f"{rep.photons:.3g} photons of {rep.recoil * 1e3:.4g} mm/s recoil")
            clipped = _clipped_current(shot, act) if rep.kind == "magnetic" else None
            if clipped is not None and got > 0:
                hint = _within_range_hint(shot, act, rep, got, abs(want), *clipped)
            elif got > 0:
                d = _tick_duration(shot, act, rep.duration, abs(want) / got)
                hint = f"use duration {d} for {abs(want) * 1e3:.4g} mm/s"
            else:
                hint = "the push gives no velocity"
            yield make(PUSH_VELOCITY, f"the push gives {got * 1e3:.4g} mm/s ({how}, {fmt_time(rep.duration)}), "
                       f"but expect_velocity is {abs(want) * 1e3:.4g} mm/s (tolerance {tol * 100:g} %)", act.pos,
                       block=act.block, time_s=act.t0, hint=hint, data={"velocity_m_s": got, "expected_m_s": abs(want)})


def _played_span(shot, act, g: float) -> float:
    """The push's duration as its edges play, each on its tick, within the written interval its kick is
    integrated over (its written duration without a grid)."""
    d = overlap(act.t0, act.t1, g)
    return d if d > 0 else act.t1 - act.t0


def _tick_duration(shot, act, duration: float, scale: float) -> str:
    """The duration (text) the push's devices play that is nearest to `scale` times the played one (the kick
    grows in proportion to the push's duration at a given force)."""
    outs = action_outputs(shot, act)
    g = grid(shot, outs)
    d = on_grid(act.t0, _played_span(shot, act, g) * scale, g, "nearest", at_least=min_interval(shot, outs))
    return fmt_tick(d, g, lead=act.t0) if g > 0 else fmt_time(duration * scale)


def _clipped_current(shot, act):
    """(current the push writes, A; the largest current in magnitude its channel plays and allows, A) when the
    written current lies beyond the channel's range, its hard limits or the coil's max_current, so that the
    played gradient is not the written one (or not allowed); else None."""
    coil = shot.rig.coils.get(act.args.get("coil"))
    name = output_of(shot, coil.current_channel) if coil is not None and coil.gradient_per_amp else None
    out = shot.rig.outputs.get(name) if name else None
    if out is None or out.kind == "digital":
        return None
    ends = sorted(float(x) for x in to_physical(out, [out.lo, out.hi]))
    lo, hi = ends
    if out.hard_min is not None:
        lo = max(lo, out.hard_min)
    if out.hard_max is not None:
        hi = min(hi, out.hard_max)
    if coil.max_current:
        lo, hi = max(lo, -coil.max_current), min(hi, coil.max_current)
    written = [v for s in shot.segments if s.output == name and s.block == act.block and s.pos == act.pos
               for v in ((s.v1,) if s.kind == "set" else (s.v0, s.v1)) if v is not None]
    worst = max(written, key=abs, default=None)
    if worst is None or lo - 1e-9 * abs(lo) <= worst <= hi + 1e-9 * abs(hi):
        return None
    return worst, (hi if worst > 0 else lo)


def _within_range_hint(shot, act, rep, got: float, want: float, written: float, limit: float) -> str:
    """The fix of a push whose current the channel clips (or does not allow): first the gradient at the
    channel's limit, then the duration that gives the expected velocity at that gradient, both from what the
    channel plays within its range, not from the clipped kick."""
    coil = shot.rig.coils[act.args["coil"]]
    g_max = outward(abs(limit * coil.gradient_per_amp) * 100, 4, up=False)  # G/cm, inside the range
    outs = action_outputs(shot, act)
    g = grid(shot, outs)
    per = got / (abs(rep.gradient) * 100 * _played_span(shot, act, g)) if rep.gradient else 0.0  # (m/s) per (G/cm s)
    if not per > 0 or not g_max > 0:
        return (f"first bring the current within the channel's range: the push writes {written:.4g} A, and "
                f"'{coil.current_channel}' plays and allows at most {abs(limit):.4g} A")
    d = on_grid(act.t0, want / (per * g_max), g, "nearest", at_least=min_interval(shot, outs))
    sign = "-" if act.args["gradient"] < 0 else ""
    return (f"first bring the current within the channel's range: the push writes {written:.4g} A, and "
            f"'{coil.current_channel}' plays and allows at most {abs(limit):.4g} A (the velocity above is the clipped "
            f"current's); e.g. gradient: {sign}{g_max:g} G/cm with duration: "
            f"{fmt_tick(d, g, lead=act.t0) if g > 0 else fmt_time(d)} for {want * 1e3:.4g} mm/s")


@rule(PUSH_AWAY_FROM_BARRIER, stage="physics")
def push_away_from_barrier(shot):
    for act in pushes(shot):
        rep = push_analysis(shot, act)
        if not rep or rep.no_force or rep.direction is None:
            continue
        nxt = [b for b in barriers(shot) if b.t0 >= act.t1 - 1e-12]
        if not nxt:
            continue
        bar = min(nxt, key=lambda b: b.t0)
        beam = shot.rig.beams.get(bar.args.get("beam"))
        where = np.asarray(beam.position_m if beam is not None else (0, 0, 0), dtype=float)
        dist = float(np.linalg.norm(where))
        if not (dist > 0 and math.isfinite(dist)):
            continue
        along = float(np.dot(rep.direction, where)) / dist
        if along < 0:
            why = (f"{fmt_state(*rep.state)} has moment {rep.moment / MU_B:+.3g} mu_B and goes towards "
                   f"{'stronger' if rep.moment > 0 else 'weaker'} field, i.e. along "
                   f"{fmt_vec(rep.direction)}" if rep.kind == "magnetic"
                   else f"light pushes along the beam '{rep.beam}', {fmt_vec(rep.direction)}")
            yield make(PUSH_AWAY_FROM_BARRIER, f"the push moves the atoms away from barrier '{beam.name}' "
                       f"(block '{bar.block}', {fmt_length(dist, unit='mm')} away along {fmt_vec(where / dist)}): {why}",
                       act.pos, block=act.block, time_s=act.t0,
                       hint="prepare a state that this push sends towards the barrier (the other sign of moment), "
                            "or check field_grows_along and the barrier position in the rig file",
                       data={"cos_angle": along, "barrier_distance_m": dist})


@rule(PUSH_NO_FORCE, stage="physics")
def push_no_force(shot):
    for act in pushes(shot):
        rep = push_analysis(shot, act)
        if rep and rep.kind == "magnetic" and rep.no_force:
            yield make(PUSH_NO_FORCE, f"{fmt_state(*rep.state)} has moment {rep.moment / MU_B:.3g} mu_B at "
                       f"{bias(shot) * 1e4:.4g} G: the {rep.gradient * 100:.4g} G/cm gradient does not push it "
                       f"({abs(rep.velocity) * 1e6:.3g} um/s)", act.pos, block=act.block, time_s=act.t0,
                       hint="transfer the atoms to a state with mF != 0 before the push, or use an optical push")


@rule(PUSH_TOO_LATE, stage="physics")
def push_too_late(shot):
    for act in pushes(shot):
        rep = push_analysis(shot, act)
        if not rep or rep.barrier is None:
            continue
        b = rep.barrier
        if rep.arrival > b.t1:
            when = "never" if math.isinf(rep.arrival) else f"at t = {fmt_time(rep.arrival)}"
            yield make(PUSH_TOO_LATE, f"the atoms reach {fmt_length(act.args['target_distance'], unit='mm')} {when} "
                       f"({abs(rep.velocity) * 1e3:.4g} mm/s), but the barrier in block '{b.block}' ends at "
                       f"t = {fmt_time(b.t1)}", b.pos, block=b.block, time_s=b.t1,
                       hint=_late_hint(shot, rep, b),
                       data={"arrival_s": rep.arrival, "barrier_end_s": b.t1})



def _late_hint(shot, rep, b) -> str:
    """The fix of physics.push-too-late: the one duration physics.barrier-too-short proposes, when the sheet's
    passage is predicted (so that applied, neither fires), else until the centre's arrival."""
    if math.isinf(rep.arrival):
        return "the push gives no velocity"
    bar = analyse(shot, b) if shot.sample is not None else None
    if bar is not None and not bar.passage.below:
        return duration_hint(shot, b, bar)
    return (f"keep the barrier on until at least {duration_text(shot, b, outward(rep.arrival - b.t0, strict=True), 'up')} "
            "after its start")


@rule(EQUAL_MOMENTS, stage="physics")
def equal_moments(shot):
    for act, rep in separations(shot):
        if rep.equal:
            a, b = rep.pair
            yield make(EQUAL_MOMENTS, f"{fmt_state(*a)} and {fmt_state(*b)} have moments "
                       f"{rep.moments[0] / MU_B:+.4g} and {rep.moments[1] / MU_B:+.4g} mu_B: the gradient cannot "
                       f"separate them", act.pos, block=act.block, time_s=act.t0,
                       hint="drive a transition to a state with a different moment (another mF)")


def _up3(x: float) -> float:
    """x rounded up to 3 significant digits, so that the printed fix reaches the need."""
    if not (x > 0 and math.isfinite(x)):
        return x
    step = 10.0 ** (math.floor(math.log10(x)) - 2)
    return math.ceil(x / step * (1 - 1e-12)) * step


def _stand_in(shot, rep) -> str:
    """Why a declared condensate's width at the image is a thermal one (a linear trap), or ""."""
    cloud = cloud_at_image(shot, rep.image)
    return "; the sample says condensed, but it is in a linear trap: sized as thermal" if cloud and cloud.thermal_stand_in else ""


@rule(COMPONENTS_OVERLAP, stage="physics")
def components_overlap(shot):
    for act, rep in separations(shot):
        if rep.equal or rep.resolved is None or rep.resolved:
            continue
        need = SEPARATION_WIDTHS * rep.combined
        k = need / abs(rep.separation) if rep.separation else math.inf
        # G/cm, rounded away from zero (the separation grows with |gradient|), with the sign written
        written = float(act.args['gradient']) * 100
        gradient = math.copysign(outward(abs(written) * k, 3, strict=True), written) if math.isfinite(k) else math.nan
        yield make(COMPONENTS_OVERLAP, f"the components are {fmt_length(abs(rep.separation), unit='um')} apart at the "
                   f"image, {abs(rep.separation) / rep.combined:.3g} combined rms widths (each {rep.sigma * 1e6:.4g} "
                   f"um{_stand_in(shot, rep)}); at least {SEPARATION_WIDTHS:g} are needed", act.pos, block=act.block, time_s=act.t0,
                   hint=(f"raise the gradient to {gradient:.3g} G/cm, or lengthen the pulse" if math.isfinite(gradient)
                         else "the pulse separates nothing: give the coil a gradient and a duration"),
                   data={"separation_m": rep.separation, "combined_rms_m": rep.combined})


@rule(COMPONENTS_SEPARATED, stage="physics")
def components_separated(shot):
    for act, rep in separations(shot):
        if rep.equal or not rep.resolved:
            continue
        yield make(COMPONENTS_SEPARATED, f"{fmt_state(*rep.pair[0])} and {fmt_state(*rep.pair[1])} are "
                   f"{fmt_length(abs(rep.separation), 3, unit='mm')} apart at the image, {abs(rep.separation) / rep.combined:.3g} "
                   f"combined rms widths (margin {abs(rep.separation) / (SEPARATION_WIDTHS * rep.combined):.3g} x the "
                   f"{SEPARATION_WIDTHS:g} needed)", act.pos, block=act.block, time_s=act.t0,
                   data={"separation_m": rep.separation, "combined_rms_m": rep.combined})


MISCOUNTED = 0.02  # at most this fraction of a part beyond the midpoint between two parts (common practice, no source)


def _beyond_midpoint(cloud, direction, half_gap: float) -> float:
    """Fraction of a part's atoms beyond `half_gap` from its centre along `direction`: on the other part's side
    of the midpoint between them (Thomas-Fermi line density, or a Gaussian's tail)."""
    from ..physics.passage import fraction_beyond

    if cloud.size_kind.startswith("Thomas"):
        return float(fraction_beyond(half_gap, "thomas-fermi", cloud.reach_along(direction)))
    return float(fraction_beyond(half_gap, "gaussian", cloud.rms_along(direction)))


@rule(PARTS_OVERLAP, stage="physics")
def parts_overlap(shot):
    # the two parts of one state that a sheet split last, as the camera sees them: the fraction of each beyond
    # the midpoint between their centres (in the image plane) along the line joining them, for the whole
    # cloud's size there; both parts keep that size (seqgen.predict.split)
    for img in shot.actions("image"):
        pred = image_prediction(shot, img)
        if pred is None or pred.cloud is None:
            continue
        sides: dict = {}
        for comp in pred.components:
            if comp.split:
                sides.setdefault((comp.state, comp.split[:-1], comp.split[-1][1]), {})[comp.split[-1][0]] = comp
        for (state, _, block), pair in sides.items():
            if len(pair) != 2:
                continue
            a, b = pair.values()
            gap = np.hypot(*(a.plane - b.plane).T)  # per sign case
            case = int(np.argmin(gap))
            line = a.positions[case] - b.positions[case]
            norm = float(np.linalg.norm(line))
            if norm == 0:
                continue
            beyond = _beyond_midpoint(pred.cloud, line / norm, 0.5 * float(gap[case]))
            if beyond <= MISCOUNTED:
                continue
            rel = float(np.linalg.norm(a.velocities[case] - b.velocities[case])) if a.velocities is not None else 0.0
            yield make(PARTS_OVERLAP, f"{who(a)} and {who(b)} are {fmt_length(float(gap[case]), unit='um')} apart in "
                       f"the image, and {beyond:.1%} of each lies beyond the midpoint between them ({pred.cloud.size_kind} "
                       f"along the line joining them {fmt_length(pred.cloud.reach_along(line / norm) if pred.cloud.size_kind.startswith('Thomas') else pred.cloud.rms_along(line / norm), unit='um')}); "
                       f"at most {MISCOUNTED:.0%} lets the picture count them apart",
                       img.pos, block=img.block, time_s=img.t0,
                       hint=f"image later (the parts move apart at {rel * 1e3:.3g} mm/s once free; a longer flight "
                            f"also widens them), or push harder so that they part faster",
                       data={"separation_m": float(gap[case]), "beyond_midpoint": beyond, "barrier_block": block})
