"""Rules on optical trap beams and stages (a trap beam that repels, adiabaticity, depth against temperature
and gravity) and on the cloud at an
image after release (field of view, depth of field, aperture). They read `seqgen.predict.traps` and
`seqgen.predict.cloud`."""

from __future__ import annotations

import numpy as np
from scipy import constants as sc

from ..codes import (CLOUD_CLIPPED, CLOUD_OUTSIDE_VIEW, CLOUD_OUT_OF_FOCUS, CONDENSATE_AS_THERMAL, NONADIABATIC_RAMP,
                     REPULSIVE_TRAP_BEAM, SHALLOW_TRAP, TRAP_HEATING, TRAP_LOST)
from ..findings import make
from ..predict.cloud import (aperture_reach, focus_offset, focus_reach, image_prediction, view_edge_reach,
                             view_reach)
from ..predict.species import gaussian_beams, sample_state, scattering_length, species, trap_beams
from ..predict.text import size_text, who, why_there
from ..predict.played import off_floor, played
from ..predict.split import REFLECTED, sheet_hits
from ..predict.traps import held, trap_beam_shifts, trap_writes, write_prediction
from ..textfmt import fmt_length, fmt_state, fmt_temperature, fmt_time, fmt_vec, outward
from .rules import rule
from .ticks import moment_text


def _first_on(shot, channel):
    """The first write that gives `channel` a positive value, or None."""
    for seg in shot.segments:
        if seg.output == channel and max(seg.v1, seg.v0 or 0.0) > 0:
            return seg
    return None


@rule(REPULSIVE_TRAP_BEAM, stage="physics")
def repulsive_trap_beam(shot):
    for sh in trap_beam_shifts(shot):
        seg = _first_on(shot, shot.rig.beams[sh.beam].power_channel) if sh.repulsive else None
        if seg is None:
            continue
        yield make(REPULSIVE_TRAP_BEAM, f"trap beam '{sh.beam}' at {sh.wavelength * 1e9:.6g} nm repels "
                   f"{shot.sample.species}: its light shift is +k_B x {fmt_temperature(sh.potential_per_intensity * 1e7 / sc.k)} per "
                   f"kW/cm^2 (polarisability {sh.polarizability_au:.4g} a.u.), blue of the D lines; more power pushes "
                   f"the atoms out harder", seg.pos, block=seg.block, time_s=seg.t0,
                   hint=f"use a wavelength red of the {shot.sample.species} D1 line for '{sh.beam}' (e.g. 1064 nm)",
                   data={"potential_per_intensity": sh.potential_per_intensity,
                         "polarizability_au": sh.polarizability_au})


def _what(w) -> str:
    """The write in words: "ramp of 'a'", "ramps of 'a', 'b'", "set of 'a'"."""
    kind = "ramp" if w.t1 > w.t0 else "set"
    names = ", ".join(f"'{b}'" for b in w.beams)
    return f"{kind}{'s' if len(w.beams) > 1 else ''} of {names}"


def _others(w):
    """(text naming the writes that override a stretch, extra data) for a finding on trap write w."""
    if not w.others:
        return "", {}
    o = w.others[0]
    where = f"line {o.pos.line}" if o.pos.line else f"block '{o.block}'"
    return (f" (as played: the {o.action} of '{o.output}' at {where} overrides it at t = {fmt_time(o.t0, 6, unit='ms')})",
            {"other_line": o.pos.line, "other_column": o.pos.column})


def _writes(shot):
    """(trap write, its TrapStage) for every write to trap beams, with a species."""
    if species(shot) is None:
        return
    for w in trap_writes(shot):
        yield w, write_prediction(shot, w)


@rule(TRAP_LOST, stage="physics")
def trap_lost(shot):
    repels = {sh.beam for sh in trap_beam_shifts(shot) if sh.repulsive}
    for w, rep in _writes(shot):
        lost = np.nonzero(rep.depth_g <= 0)[0]
        if len(lost):
            t = float(rep.times[lost[0]])
            over, data = _others(w)
            power = ", ".join(f"'{b}' {played(shot, shot.rig.beams[b].power_channel, t)[0] * 1e3:.4g} mW" for b in w.beams)
            # more power of a repulsive beam only pushes harder: point at the wavelength instead
            hint = (f"'{w.beams[0]}' repels the atoms (physics.repulsive-trap-beam): more power will not hold them; use a "
                    f"wavelength red of the D1 line" if w.beams[0] in repels else
                    ("end the ramp at a higher power" if w.t1 > w.t0 else "set a higher power"))
            yield make(TRAP_LOST, f"the trap no longer holds {shot.sample.species} against gravity from "
                       f"t = {fmt_time(t, 6, unit='ms')} (power of {power}){over}",
                       w.pos, block=w.block, time_s=t, hint=hint, data=data or None)


# warn when the trap light alone would add the sample's whole temperature over a ramp (common practice, no
# source); an evaporation ramp carries part of it away, so a smaller share is not worth a warning
HEATING_LIMIT = 1.0


def _heating_hint(shot) -> str:
    """What to change against recoil heating: the wavelength only when a trap beam is near the D lines (within
    a third of the D2 wavelength: 1064 nm light is already far from an alkali's lines)."""
    sp = species(shot)
    near = [b for b in trap_beams(shot) if sp is not None and abs(b.wavelength_m / sp.d2_wavelength_m - 1) < 1 / 3]
    if near:
        return "use a trap wavelength farther from the D lines (e.g. 1064 nm), a shorter ramp or less power"
    return "shorten this stage or lower the trap power (the trap light is already far from the D lines)"


@rule(TRAP_HEATING, stage="physics")
def trap_heating(shot):
    if shot.sample is None or not shot.sample.temperature_k:
        return
    temp = shot.sample.temperature_k
    for w, rep in _writes(shot):
        if rep.heating > HEATING_LIMIT * temp:
            over, data = _others(w)
            yield make(TRAP_HEATING, f"photon scattering from the trap light heats {shot.sample.species} by "
                       f"{fmt_temperature(rep.heating)} during the {_what(w)} (up to "
                       f"{fmt_temperature(rep.heating_rate)}/s at the trap minimum), more than the sample's "
                       f"{fmt_temperature(temp)}{over}", w.pos, block=w.block, time_s=w.t0,
                       hint=_heating_hint(shot),
                       data={"heating_k": rep.heating, "heating_rate_k_s": rep.heating_rate, "temperature_k": temp,
                             **data})


@rule(NONADIABATIC_RAMP, stage="physics")
def nonadiabatic_ramp(shot):
    for w, rep in _writes(shot):
        exc = rep.excitation
        if exc is None:
            continue
        worst = max(exc)
        if worst > shot.limits.max_excitation:
            axis = int(np.argmax(exc))
            if rep.omegas_before is not None:
                yield _sudden_step(shot, w, rep, worst, axis)
                continue
            over, data = _others(w)
            yield make(NONADIABATIC_RAMP, f"{_what(w)} leaves {worst:.3g} of the energy above "
                       f"adiabatic on its axis {axis + 1} (limit {shot.limits.max_excitation:g}); max |d omega/dt|/omega^2 = "
                       f"{rep.adiabaticity:.3g}{over}", w.pos, block=w.block, time_s=w.t0,
                       hint="make the ramp longer or smoother (minimum_jerk / smooth shapes)",
                       data={"excitation": worst, "adiabaticity": rep.adiabaticity, **data})


def _sudden_step(shot, w, rep, worst, axis):
    """The finding for sets that step the trap at once (excitation of a sudden change, predict.step_prediction),
    with the shortest linear ramp of the same powers that passes the check."""
    def hz(omegas):
        return "/".join(f"{x / (2 * np.pi):.4g}" for x in omegas) + " Hz"

    many = len(w.segments) > 1
    if rep.min_ramp_s is not None:
        # 10 % above the shortest ramp: the check samples the played ramp, not this ideal one
        need = fmt_time(outward(1.1 * rep.min_ramp_s, 2), unit="ms")
        hint = (f"replace the set{'s' if many else ''} by {'ramps' if many else 'a ramp'} to the same "
                f"value{'s' if many else ''} of at least {need} (linear{', starting together: at: 0 s' if many else ''})")
    else:
        hint = "ramp the powers instead of setting them (a linear ramp, long against the trap periods)"
    return make(NONADIABATIC_RAMP, f"{_what(w)} step{'' if many else 's'} the trap at once from "
                f"{hz(rep.omegas_before)} to {hz(rep.omegas[-1])}: a sudden change leaves {worst:.3g} of the energy "
                f"above adiabatic on its axis {axis + 1} (E/E_ad = (omega0^2 + omega1^2)/(2 omega0 omega1); limit "
                f"{shot.limits.max_excitation:g})", w.pos, block=w.block, time_s=w.t0, hint=hint,
                data={"excitation": worst, "omegas_before_rad_s": [float(x) for x in rep.omegas_before],
                      "omegas_after_rad_s": [float(x) for x in rep.omegas[-1]], "min_ramp_s": rep.min_ramp_s})


def _way_out(shot, t):
    """'; the atoms escape along 'guide' (x)' for the trap at t (the lowest barrier's direction), or ''."""
    beams = gaussian_beams(shot, [t])[0]
    d = held(species(shot), tuple(beams)).escape if beams else None
    if d is None:
        return ""
    on = [b for b in trap_beams(shot) if played(shot, b.power_channel, [t])[0] > off_floor(shot, b.power_channel)]
    for b, g in zip(on, beams):  # the same beams, in the same order, as gaussian_beams
        k = np.asarray(g.direction)
        if abs(float(d @ k)) > np.cos(np.radians(15)):
            axis = "xyz"[int(np.argmax(np.abs(k)))] if np.max(np.abs(k)) > 0.99 else fmt_vec(k, 2)
            return f"; the atoms escape along '{b.name}' ({axis})"
    return "; the atoms escape downward" if d[2] < -0.9 else f"; the atoms escape towards {fmt_vec(d, 2)}"


@rule(SHALLOW_TRAP, stage="physics")
def shallow_trap(shot):
    if shot.sample is None or not shot.sample.temperature_k:
        return
    for w, rep in _writes(shot):
        eta = rep.eta
        if eta is not None and 0 < eta < shot.limits.min_eta:
            over, data = _others(w)
            yield make(SHALLOW_TRAP, f"after the {_what(w)} the trap is only {eta:.3g} k_B T deep "
                       f"for T = {fmt_temperature(shot.sample.temperature_k)} (limit {shot.limits.min_eta:g})"
                       f"{_way_out(shot, float(rep.times[-1]))}{over}", w.pos,
                       block=w.block, time_s=w.t1, hint="end at a higher power, or accept it if spilling is intended",
                       data=data or None)


def _worst(pred, metric, comps=None):
    """(component, case, value) with the largest metric(pred, comp)[case] over `comps` (default: every
    component), or None."""
    best = None
    for comp in pred.components if comps is None else comps:
        vals = metric(pred, comp)
        if vals is None or not len(vals):
            continue
        i = int(np.argmax(vals))
        if best is None or vals[i] > best[2]:
            best = (comp, i, float(vals[i]))
    return best


def _imaging_predictions(shot, needs: str):
    """(image action, setup, prediction) for images after a release whose setup declares `needs`."""
    for img in shot.actions("image"):
        setup = shot.rig.imaging.get(img.args["setup"])
        if setup is None or not getattr(setup, needs):
            continue
        pred = image_prediction(shot, img)
        if pred and pred.release is not None and pred.components:
            yield img, setup, pred



def _reflected(comp) -> bool:
    return any(side == REFLECTED for side, _ in comp.split)


@rule(CLOUD_OUTSIDE_VIEW, stage="physics")
def cloud_outside_view(shot):
    # the cloud's edge per image axis: its centre plus its half-extent along that axis (per-axis sizes); a part a
    # barrier reflected is judged on its own, with its own message and fix
    for img, setup, pred in _imaging_predictions(shot, "field_of_view_m"):
        half = setup.field_of_view_m / 2
        out = sum(1 for c in pred.components if np.any(view_edge_reach(pred, c) > half))
        others = f" ({out} of {len(pred.components)} components leave it)" if len(pred.components) > 1 else ""
        for group in ([c for c in pred.components if not _reflected(c)], [c for c in pred.components if _reflected(c)]):
            worst = _worst(pred, view_edge_reach, group)
            if worst is None or worst[2] <= half:
                continue
            comp, case, reach = worst
            centre = float(view_reach(pred, comp)[case])
            h, v = comp.plane[case]
            data = {"reach_m": reach, "half_view_m": half}
            if _reflected(comp):
                at = _earlier_image(shot, img, setup, pred, half)
                start = shot.block(img.block).start_s
                at_text, at = moment_text(shot, img, at, start, "down", digits=3, unit="ms") if at is not None else ("", at)
                block = comp.split[-1][1]
                data.update(split=[list(p) for p in comp.split], at_s=at)
                hint = (f"write 'at: {at_text}' in this action (from the start of block "
                        f"'{img.block}'): imaged {fmt_time(img.t0 - shot.block(img.block).start_s - at, 3, unit='ms')} "
                        f"earlier, every part is in view; or recentre the camera (the imaging setup's center)"
                        if at is not None else
                        f"image earlier (the part barrier '{block}' reflects flies back from the sheet), recentre the "
                        "camera (the imaging setup's center), or raise the sheet's transmission")
            else:
                # the cloud's own half-extent reach - centre fits in the half-view: it is out because of where it
                # is (a recentred camera or a shorter flight brings it in); else it is too large wherever it is
                hint = ("shorten the time of flight, weaken the push or separation, or recentre the camera (the imaging "
                        "setup's center)" if reach - centre <= half else
                        "the cloud itself is too large for the view: shorten the time of flight or image a colder cloud")
            yield make(CLOUD_OUTSIDE_VIEW, f"after {fmt_time(pred.tof, unit='ms')} of flight {who(comp)} is centred "
                       f"{fmt_length(centre, 3, unit='mm')} from the centre of view of '{setup.name}' (image plane: {h * 1e3 + 0.0:+.3g} mm right, "
                       f"{v * 1e3 + 0.0:+.3g} mm up; {why_there(pred, comp, case)}), {size_text(pred)}; its edge reaches "
                       f"{fmt_length(reach, 3, unit='mm')} and the field of view {fmt_length(half, 3, unit='mm')} from its centre{others}",
                       img.pos, block=img.block, time_s=img.t0, hint=hint, data=data)


EARLIER_STEPS = 2000  # image times tried between the latest allowed one and the image's own


def _earlier_image(shot, img, setup, pred, half):
    """The image action's `at:` (s from its block's start, 3 digits, rounded down) at which every part's edge
    is within the view, or None. Each centre is followed back from the image at its velocity under gravity
    alone (exact after the last push, separation, barrier split and the release); the sizes are kept at the
    image's, larger than earlier ones (an expanding cloud): the safe side. Not earlier than the block's start."""
    from ..physics.kinematics import image_plane_basis
    from ..predict.cloud import UP
    from ..predict.species import G_N

    block = shot.block(img.block)
    beam = shot.rig.beams.get(setup.probe_beam) if setup.probe_beam else None
    if block is None or beam is None or any(c.plane_velocity is None for c in pred.components):
        return None
    e_h, e_v, _ = image_plane_basis(beam.direction, UP)
    g = -G_N * np.array([UP @ e_h, UP @ e_v])
    t_min = max([pred.release.t0, block.start_s] + [a.t1 for a in shot.actions("push", "separate") if a.t1 <= img.t0]
                + [h.time for h in sheet_hits(shot, img.t0)])
    ext_h, ext_v, _, ext_plane = pred.extents

    def fits(delta):
        for c in pred.components:
            p = c.plane - c.plane_velocity * delta + 0.5 * g * delta ** 2
            r = (np.hypot(p[:, 0], p[:, 1]) + ext_plane if pred.top_down
                 else np.maximum(np.abs(p[:, 0]) + ext_h, np.abs(p[:, 1]) + ext_v))
            if np.any(r > half):
                return False
        return True

    offset = img.t0 - block.start_s
    for delta in np.linspace(0.0, img.t0 - t_min, EARLIER_STEPS + 1)[1:]:
        at = outward(offset - float(delta), 3, up=False)
        if at >= t_min - block.start_s and at > 0 and fits(offset - at):
            return at
    return None


@rule(CLOUD_OUT_OF_FOCUS, stage="physics")
def cloud_out_of_focus(shot):
    # the cloud's extent along the line of sight (its half-extent along the probe beam), not its largest size
    for img, setup, pred in _imaging_predictions(shot, "depth_of_field_m"):
        worst = _worst(pred, focus_reach)
        if worst is None or 2 * worst[2] <= setup.depth_of_field_m:
            continue
        comp, case, reach = worst
        off = float(focus_offset(pred, comp)[case])
        where = f", centred {fmt_length(off, 3, unit='mm')} from the focal plane" if off > 0 else ""
        yield make(CLOUD_OUT_OF_FOCUS, f"{who(comp)} spans {fmt_length(2 * reach, 3, unit='mm')} about the focal plane "
                   f"along the line of sight{where} ({size_text(pred)}; {fmt_length(pred.extents[2], 3)} "
                   f"from its centre along the line of sight), more than the {fmt_length(setup.depth_of_field_m, 3, unit='mm')} "
                   f"depth of field of '{setup.name}'", img.pos, block=img.block, time_s=img.t0,
                   hint="shorten the time of flight" + (", or push across the line of sight" if off > 0 else ""),
                   data={"extent_m": 2 * reach, "depth_of_field_m": setup.depth_of_field_m})


@rule(CLOUD_CLIPPED, stage="physics")
def cloud_clipped(shot):
    # the cloud's largest half-extent in the image plane beyond its centre's distance from the release point
    for img, setup, pred in _imaging_predictions(shot, "aperture_radius_m"):
        worst = _worst(pred, aperture_reach)
        if worst is None or worst[2] <= setup.aperture_radius_m:
            continue
        comp, case, reach = worst
        yield make(CLOUD_CLIPPED, f"after {fmt_time(pred.tof, unit='ms')} {who(comp)} reaches {fmt_length(reach, 3, unit='mm')} "
                   f"from the release point ({why_there(pred, comp, case)}; {size_text(pred)}), beyond the "
                   f"{fmt_length(setup.aperture_radius_m, 3, unit='mm')} aperture of '{setup.name}'",
                   img.pos, block=img.block, time_s=img.t0, hint="shorten the time of flight",
                   data={"reach_m": reach, "aperture_m": setup.aperture_radius_m})


@rule(CONDENSATE_AS_THERMAL, stage="physics")
def condensate_as_thermal(shot):
    s, sp = shot.sample, species(shot)
    state = sample_state(shot)
    if sp is None or s is None or not s.condensed or state is None:
        return
    a = scattering_length(sp, state)
    if s.atoms and a and a > 0:
        return
    why = (f"{sp.name} {fmt_state(*state)} has no positive scattering length in seqgen's data" if not (a and a > 0)
           else "it gives no atom number")
    thermal = (f"the barrier checks take a thermal cloud at T = {fmt_temperature(s.temperature_k)}" if s.temperature_k
               else "the barrier checks take no velocity spread (no temperature either)")
    top = int(round(sp.nuclear_spin + 0.5))
    known = sorted({st for st in [(top, top), (top, -top)] + [(f, m) for f in range(top + 1) for m in range(-f, f + 1)]
                    if (scattering_length(sp, st) or 0) > 0}, key=lambda st: (-st[0], -st[1]))
    e_g = f" (in seqgen's data: {', '.join(fmt_state(*st) for st in known)})" if known else ""
    images = ("the clouds at the images are sized as thermal too" if s.atoms is None or not s.atoms else
              "the clouds at the images have no size (a thermal one after a linear magnetic trap)")
    yield make(CONDENSATE_AS_THERMAL, f"the sample says condensed, but {why}: no Thomas-Fermi size, chemical potential "
               f"or mean-field release; {thermal}, and {images}", s.pos,
               hint=f"write condensed: false if the cloud is thermal, or use a state with a scattering length{e_g}",
               data={"scattering_length_m": a})
