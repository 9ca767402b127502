"""Rules on `barrier` actions: transmission of the kicked cloud through a thin repulsive light sheet, the
cloud's passage against the sheet's timing, and the spin rotation an intensity-modulated sheet drives. They
read `seqgen.predict.barrier` (the model and its sources are described there)."""

from __future__ import annotations

import math

from ..codes import (
    BARRIER_NO_SIGNAL, BARRIER_NOT_REACHED, BARRIER_ROTATION, BARRIER_TOO_LATE, BARRIER_TOO_SHORT, BARRIER_TRANSMISSION,
    CLOUD_OVERLAPS_BARRIER, DRIVE_TOO_STRONG, NOT_TUNNELLING, ROTATION_UNRESOLVABLE,
)
from ..findings import make
from ..predict.barrier import MISSED_FRACTION, THERMAL_EDGE_RMS, analyse
from ..predict.pushes import push_analysis
from ..predict.species import species
from ..predict.states import barrier_drive_analysis, barriers
from ..predict.text import (in_barrier_drive_reason, larmor_clock_text, release_text, rotation_text, spread_text,
                            stand_in_text)
from ..textfmt import fmt_energy, fmt_freq, fmt_length, fmt_pct, fmt_time, outward
from .rules import rule
from .ticks import duration_text, moment_text

MOST_MISSED = 0.50  # from half of the cloud missed on, a too-short barrier is an error (common practice, no source)
SLOW_TAIL = 3.0  # 90 % across later than this many times the centre's arrival: the slow tail sets the bound


def needed_duration(shot, act, rep) -> float:
    """The barrier duration (s) that physics.barrier-too-short and physics.push-too-late both propose: until 90 %
    of the cloud has crossed the sheet (the fraction that raises too-short) and, when the push names a
    target_distance, until its centre has reached that; math.inf when never."""
    ps = rep.passage
    need = ps.cross_by - ps.on
    push = push_analysis(shot, rep.incident.push)
    if push is not None and push.arrival is not None and push.barrier is act:
        need = max(need, push.arrival - act.t0)
    return need


def _follows(shot, block: str, earlier: str) -> bool:
    """Whether `block` is placed after `earlier` through its chain of anchors (so it moves when `earlier` grows)."""
    seen = set()
    b = shot.block(block)
    while b is not None and b.name not in seen:
        if b.anchor_block == earlier:
            return True
        seen.add(b.name)
        b = shot.block(b.anchor_block) if b.anchor_block else None
    return False


def duration_hint(shot, act, rep) -> str:
    """The fix both duration findings give: the needed duration, or why none can pass (the image comes first)."""
    ps, need = rep.passage, needed_duration(shot, act, rep)
    if not math.isfinite(need):
        return "part of the cloud never reaches the sheet: push harder"
    if ps.image_at is not None and ps.on + need > ps.image_at and not _follows(shot, ps.image.block, act.block):
        return (f"no barrier duration can: 90 % of the cloud has crossed the sheet only "
                f"{fmt_time(ps.on + need, unit='ms', nonfinite='never')} after the push starts, after the image at "
                f"{fmt_time(ps.image_at, unit='ms')}; push harder or image later")
    return (f"keep the barrier on for at least {duration_text(shot, act, outward(need, strict=True), 'up', unit='ms')} "
            "(90 % of the cloud across)")


def _each(shot):
    if species(shot) is None or shot.sample is None:
        return
    for act in barriers(shot):
        rep = analyse(shot, act)
        if rep is not None:
            yield act, rep


# --------------------------------------------------------------------------
# Checks
# --------------------------------------------------------------------------


@rule(BARRIER_TRANSMISSION, stage="physics")
def barrier_transmission(shot):
    for act, rep in _each(shot):
        ps = rep.passage
        if not ps.reached or ps.below:
            yield make(BARRIER_TRANSMISSION, f"no transmission: the cloud does not reach barrier '{act.args['beam']}' "
                       f"({_not_reached_text(ps)}; physics.barrier-not-reached)", act.pos,
                       block=act.block, time_s=act.t0,
                       data={"reached": False, "centre_arrival_s": ps.centre_arrival, "image_s": ps.image_at})
            continue
        if rep.attractive:
            msg = f"'{act.args['beam']}' is red-detuned for {shot.sample.species}: a well, not a barrier; T = {rep.T:.3g}"
        else:
            msg = (f"transmitted fraction {rep.T:.3g} (spread {rep.T_spread:.2g} over the momentum distribution); "
                   f"V0 = {fmt_energy(rep.V0)}, mean kinetic energy {fmt_energy(rep.E_mean)}, "
                   f"v = {rep.speed * 1e3:.4g} mm/s +/- {rep.sigma_v * 1e3:.2g} mm/s ({spread_text(rep.cloud)})")
            if rep.release is not None:
                msg += f"; {release_text(rep.release)}"
        data = {"transmission": rep.T, "transmission_spread": rep.T_spread, "V0_J": rep.V0,
                "mean_kinetic_energy_J": rep.E_mean, "velocity_m_s": rep.speed, "velocity_spread_m_s": rep.sigma_v}
        if rep.release is not None:
            data.update(chemical_potential_J=rep.release.mu, released_energy_J=rep.release.released,
                        released_along_path_J=rep.release.path_energy)
        yield make(BARRIER_TRANSMISSION, msg, act.pos, block=act.block, time_s=act.t0, data=data)



def _not_reached_text(ps) -> str:
    if ps.reached and ps.below:
        return (f"released {fmt_time(ps.released_at, unit='ms')} after the push starts, the cloud has fallen "
                f"{fmt_length(ps.fall, mm_from=1e-2)} when its centre comes to the sheet "
                f"{fmt_time(ps.centre_arrival, unit='ms', nonfinite='never')} after the push starts, more than the "
                f"sheet's {fmt_length(ps.sheet_height, mm_from=1e-2)} half-height (1/e^2): it passes under the sheet")
    return (f"its centre reaches the sheet {fmt_time(ps.centre_arrival, unit='ms', nonfinite='never')} after the push "
            f"starts, the first image comes {fmt_time(ps.image_at, unit='ms')} after it")


@rule(BARRIER_NOT_REACHED, stage="physics")
def barrier_not_reached(shot):
    for act, rep in _each(shot):
        ps = rep.passage
        if ps.reached and ps.below:
            # falls under the sheet: keep the trap on until 90 % has crossed (release at or after that)
            hold = max(ps.cross_by, ps.centre_arrival)
            hint = (f"release the atoms no earlier than {fmt_time(outward(hold, strict=True), unit='ms', nonfinite='never')} "
                    f"after the push starts (90 % of the cloud across the sheet), or push harder"
                    if math.isfinite(hold) else "push harder: the cloud's centre never reaches the sheet")
            yield make(BARRIER_NOT_REACHED, f"barrier '{act.args['beam']}' (block '{act.block}') is not reached: "
                       f"{_not_reached_text(ps)} (v = {rep.speed * 1e3:.4g} mm/s, sheet {fmt_length(ps.distance, mm_from=1e-2)} "
                       f"away); the imaged atoms never met the sheet", act.pos, block=act.block, time_s=act.t0, hint=hint,
                       data={"centre_arrival_s": ps.centre_arrival, "fall_m": ps.fall, "sheet_half_height_m": ps.sheet_height,
                             "released_s": ps.released_at})
            continue
        if ps.reached:
            continue
        img = ps.image
        start = shot.block(img.block).start_s
        # image once 90 % has crossed (the fraction physics.barrier-too-short counts), at least at the centre
        want = max(ps.cross_by, ps.centre_arrival)
        if math.isfinite(want) and want > ps.off:  # the sheet is off by then
            hint = (f"keep the barrier on for at least {duration_text(shot, act, outward(want - ps.on, strict=True), 'up', unit='ms')} "
                    f"and image once 90 % of the cloud has crossed it ({fmt_time(want, unit='ms')} after the push starts); "
                    f"or push harder")
        elif math.isfinite(want):
            at, _ = moment_text(shot, img, outward(ps.push_t0 + want - start, strict=True), start, "up", unit="ms")
            hint = (f"write 'at: {at}' in this action (from the start of block '{img.block}'): "
                    f"imaged once 90 % of the cloud has crossed the sheet; or push harder")
        else:
            hint = "push harder: the cloud's centre never reaches the sheet"
        yield make(BARRIER_NOT_REACHED, f"barrier '{act.args['beam']}' (block '{act.block}') is not reached before this "
                   f"image: {_not_reached_text(ps)} (v = {rep.speed * 1e3:.4g} mm/s, sheet "
                   f"{fmt_length(ps.distance, mm_from=1e-2)} away); the imaged atoms never met the sheet",
                   img.pos, block=img.block, time_s=img.t0, hint=hint,
                   data={"centre_arrival_s": ps.centre_arrival, "image_s": ps.image_at, "crossed_90_s": ps.cross_by})


@rule(CLOUD_OVERLAPS_BARRIER, stage="physics")
def cloud_overlaps_barrier(shot):
    for act, rep in _each(shot):
        ps, cloud = rep.passage, rep.cloud
        if not ps.overlap:
            continue
        edge = ps.edge + rep.waist_y
        what = ("Thomas-Fermi radius" if cloud.profile == "thomas-fermi"
                else f"edge ({THERMAL_EDGE_RMS:g} rms widths)")
        yield make(CLOUD_OVERLAPS_BARRIER, f"the cloud's {what} along the path at the push, {fmt_length(ps.edge, mm_from=1e-2)}, "
                   f"reaches barrier '{act.args['beam']}' {fmt_length(ps.distance, mm_from=1e-2)} from the atoms (sheet 1/e^2 half-width "
                   f"{fmt_length(rep.waist_y, mm_from=1e-2)} included): part of the cloud is in or beyond the sheet before it moves, outside "
                   f"the transmission model", act.pos, block=act.block, time_s=act.t0,
                   hint=f"put the sheet farther than {fmt_length(1.5 * edge, mm_from=1e-2)} from the atoms (rig file: the beam's position), "
                        "or shorten the cloud along the path (a tighter trap there at the push, fewer atoms)",
                   data={"cloud_edge_m": ps.edge, "barrier_distance_m": ps.distance})


@rule(BARRIER_TOO_SHORT, stage="physics")
def barrier_too_short(shot):
    for act, rep in _each(shot):
        ps = rep.passage
        if ps.late <= MISSED_FRACTION or not ps.reached or ps.below:
            continue  # a cloud not reached before the image is physics.barrier-not-reached's
        hint = duration_hint(shot, act, rep)
        if hint.startswith("keep") and ps.cross_by > SLOW_TAIL * ps.centre_arrival:
            # the slowest atoms set the bound: it falls steeply as the push outruns the spread
            hint += (f"; the slow tail of the velocity spread ({rep.sigma_v * 1e3:.3g} mm/s rms against the push's "
                     f"{rep.speed * 1e3:.4g} mm/s) sets it, so pushing harder shortens it most")
        if rep.cloud.stand_in:
            hint += f" ({stand_in_text(rep.cloud)[2:]}: a condensate's spread is smaller)"
        most = ps.late >= MOST_MISSED
        yield make(BARRIER_TOO_SHORT, f"barrier '{act.args['beam']}' is off {fmt_time(ps.off, unit='ms', nonfinite='never')} after the push "
                   f"starts, but {fmt_pct(ps.late)} of the cloud crosses the sheet {fmt_length(ps.distance, mm_from=1e-2)} away only later "
                   f"(v = {rep.speed * 1e3:.4g} mm/s, {spread_text(rep.cloud)}): those atoms pass unhindered"
                   + (f"; most of the cloud misses the sheet (an error from {fmt_pct(MOST_MISSED)} on)" if most else ""),
                   act.pos, severity="error" if most else None, block=act.block, time_s=act.t1, hint=hint,
                   data={"missed_fraction": ps.late, "barrier_off_s": ps.off, "needed_off_s": ps.on + needed_duration(shot, act, rep)})


def _no_later(shot, act, ps) -> str:
    """The latest start of the barrier, from the push's start, that its devices play (on a tick, not after)."""
    if not math.isfinite(ps.need_on):
        return "never"
    return moment_text(shot, act, outward(ps.need_on, up=False), act.t0 - ps.on, "down", unit="ms")[0]


@rule(BARRIER_TOO_LATE, stage="physics")
def barrier_too_late(shot):
    for act, rep in _each(shot):
        ps = rep.passage
        if ps.overlap or ps.early <= MISSED_FRACTION:
            continue  # an overlapping cloud is physics.cloud-overlaps-barrier's
        yield make(BARRIER_TOO_LATE, f"barrier '{act.args['beam']}' comes on {fmt_time(ps.on, unit='ms', nonfinite='never')} after the push "
                   f"starts, when {fmt_pct(ps.early)} of the cloud has already reached the sheet {fmt_length(ps.distance, mm_from=1e-2)} "
                   f"away (v = {rep.speed * 1e3:.4g} mm/s)", act.pos, block=act.block, time_s=act.t0,
                   hint=f"start the barrier no later than {_no_later(shot, act, ps)} after the push starts",
                   data={"early_fraction": ps.early, "barrier_on_s": ps.on, "needed_on_s": ps.need_on})


@rule(BARRIER_NO_SIGNAL, stage="physics")
def barrier_no_signal(shot):
    for act, rep in _each(shot):
        if rep.N_T is None:
            continue
        floor = rep.floor
        side = None
        if rep.N_T < floor:
            side, n, fix = "transmitted", rep.N_T, "lower the sheet power or kick harder"
            if rep.V0 > rep.E_mean > 0 and act.args.get("power"):
                # the sheet's top at the atoms' mean energy: about half of them cross (common practice, no source)
                # (rounded up when tunnelling is expected, so the top stays above the mean energy)
                fix = (f"lower the sheet power to about "
                       f"{_mw(act.args['power'] * rep.E_mean / rep.V0, rep.expect == 'tunnelling')} mW "
                       "(the sheet's top at the atoms' mean kinetic energy) or kick harder")
        elif rep.N_R < floor and rep.expect != "over_barrier":
            side, n, fix = "reflected", rep.N_R, "raise the sheet power or kick less"
        if side:
            yield make(BARRIER_NO_SIGNAL, f"only {n:.3g} {side} atoms predicted (transmitted fraction "
                       f"{rep.T:.3g} of {shot.sample.atoms:.3g}); detection floor {floor:g} atoms", act.pos,
                       block=act.block, time_s=act.t0, hint=fix, data={"atoms": n, "floor": floor})


def _mw(power_w: float, up: bool) -> str:
    """A power in mW to 3 significant digits, rounded away from the threshold so that the fix passes."""
    mw = power_w * 1e3
    step = 10.0 ** (math.floor(math.log10(mw)) - 2) if mw > 0 else 1.0
    return f"{(math.ceil(mw / step) if up else math.floor(mw / step)) * step:.3g}"


def _released(rep) -> str:
    """The mean-field part of the mean kinetic energy, when there is one."""
    rel = rep.release
    if rel is None:
        return ""
    return (f" (of which the condensate's released mean-field energy gives {fmt_energy(rel.path_energy)} along the "
            f"path, the push alone {fmt_energy(rep.E_mean - rel.path_energy)})")


@rule(NOT_TUNNELLING, stage="physics")
def not_tunnelling(shot):
    for act, rep in _each(shot):
        e, v0, want = rep.E_mean, rep.V0, rep.expect
        if want == "tunnelling" and v0 <= 0:
            yield make(NOT_TUNNELLING, f"expect: tunnelling, but '{act.args['beam']}' is red-detuned for "
                       f"{shot.sample.species}: it makes a well ({fmt_energy(v0)}), not a barrier", act.pos,
                       block=act.block, time_s=act.t0, hint="use a beam blue of the D lines for a barrier",
                       data={"E_J": e, "V0_J": v0})
        elif want == "tunnelling" and e >= v0:
            yield make(NOT_TUNNELLING, f"expect: tunnelling, but the mean kinetic energy {fmt_energy(e)} "
                       f"is above the barrier top {fmt_energy(v0)}{_released(rep)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"raise the sheet power above {_mw(act.args['power'] * e / v0, True)} mW or kick less",
                       data={"E_J": e, "V0_J": v0})
        elif want == "over_barrier" and e < v0:
            yield make(NOT_TUNNELLING, f"expect: over_barrier, but the mean kinetic energy {fmt_energy(e)} "
                       f"is below the barrier top {fmt_energy(v0)}{_released(rep)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"lower the sheet power below {_mw(act.args['power'] * e / v0, False)} mW or kick harder",
                       data={"E_J": e, "V0_J": v0})



def _with_rotation(shot):
    for act, rep in _each(shot):
        if rep.drive and rep.rotation is not None:
            yield act, rep


@rule(BARRIER_ROTATION, stage="physics")
def barrier_rotation(shot):
    for act, rep in _each(shot):
        d = rep.drive
        if not d:
            continue
        if d.unsupported:
            yield make(BARRIER_ROTATION, in_barrier_drive_reason(d), act.pos, block=act.block, time_s=act.t0)
            continue
        msg = rotation_text(rep) + (f"; {larmor_clock_text(rep)}" if rep.precession is not None else "")
        data = {"rotation_rad": rep.rotation, "rotation_spread_rad": rep.rotation_spread,
                "rabi_peak_rad_s": d.rabi_peak, "detuning_hz": d.detuning_hz}
        if rep.precession is not None:
            data.update(precession_rad=rep.precession, alignment_rad=rep.alignment,
                        precession_time_s=rep.precession_time, alignment_time_s=rep.alignment_time)
        yield make(BARRIER_ROTATION, msg, act.pos, block=act.block, time_s=act.t0, data=data)


@rule(DRIVE_TOO_STRONG, stage="physics")
def drive_too_strong(shot):
    lim = shot.limits.weak_probe_angle
    for act, rep in _with_rotation(shot):
        if rep.rotation > lim:
            yield make(DRIVE_TOO_STRONG, f"the modulated barrier rotates the transmitted spin by "
                       f"{rep.rotation:.3g} rad, above the weak-probe limit {lim:g} rad", act.pos, block=act.block,
                       time_s=act.t0, hint=f"lower the modulation depth to about {rep.drive.depth * lim / rep.rotation * 0.8:.2g}",
                       data={"rotation_rad": rep.rotation, "limit_rad": lim})


@rule(ROTATION_UNRESOLVABLE, stage="physics")
def rotation_unresolvable(shot):
    for act, rep in _with_rotation(shot):
        n = rep.N_T
        if not n or (rep.floor and n < rep.floor):  # too few atoms to image: physics.barrier-no-signal says so
            continue
        noise = 1.0 / math.sqrt(max(n, 1.0))
        if rep.rotation < noise:
            d = rep.drive
            off = abs(d.detuning_hz) * 2 * math.pi * rep.waist_y / rep.speed > 3.0
            # the light-shifted line to the hertz, as physics.modulation-off-resonance names it: applied, neither fires
            line = getattr(barrier_drive_analysis(shot, act), "resonance_hz", None) or d.transition_hz
            hint = (f"tune the modulation to the line at {line:.10g} Hz"
                    if off else "raise the modulation depth, or transmit more atoms")
            yield make(ROTATION_UNRESOLVABLE, f"rotation {rep.rotation:.3g} rad of the transmitted spin is below "
                       f"the shot noise {noise:.3g} rad of {n:.3g} transmitted atoms (detuning "
                       f"{fmt_freq(d.detuning_hz, {'MHz': 6, 'kHz': 5, 'Hz': 4}, top='MHz')})", act.pos, block=act.block, time_s=act.t0, hint=hint,
                       data={"rotation_rad": rep.rotation, "noise_rad": noise})
