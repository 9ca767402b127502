"""The physics notes of a shot (`seqgen show --physics`, the plot's notes, the HTML report): one row per
physics action, read from the predictions."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from ..textfmt import (fmt_angle_pi, fmt_energy, fmt_freq, fmt_gauss, fmt_gauss_per_cm, fmt_gauss_per_cm2, fmt_length,
                       fmt_pct, fmt_state, fmt_time, fmt_vec)
from . import text as tx
from .barrier import analyse
from .cloud import SEPARATION_WIDTHS, image_prediction, separations, view_edge_reach
from .imaging import images, probe_analysis
from .magnetic import holds, hold_analysis
from .pushes import push_analysis, pushes
from .species import G_N, MU_B, bias, species
from .states import (MG, barrier_drive_analysis, barriers, interferometer_analysis, interferometers, pulse_analysis,
                     pulse_fourier_width, pulses, sweep_analysis, sweeps)
from .traps import trap_writes, write_prediction



@dataclass(frozen=True)
class PhysicsRow:
    """One physics note: the action's block, kind and start time (s), and its lines of predictions."""

    block: str
    kind: str
    time_s: float
    items: tuple

    def as_dict(self) -> dict:
        return {"block": self.block, "kind": self.kind, "time_s": self.time_s, "items": list(self.items)}


def report_rows(shot) -> list[PhysicsRow]:
    """Every physics note of the shot, in time order."""
    rows = _trap_rows(shot) + _state_rows(shot) + _barrier_rows(shot) + _magnetic_rows(shot)
    return sorted(rows, key=lambda r: r.time_s)


def _row(block, kind, time_s, items) -> PhysicsRow:
    return PhysicsRow(block, kind, time_s, tuple(items))


# --------------------------------------------------------------------------- trap ramps and images

def _trap_rows(shot) -> list:
    rows = []
    if species(shot) is None:
        return rows
    seen: dict = {}  # ramps of several beams over the same interval describe one trap: one row, all beams named
    for w in trap_writes(shot):  # a trap_ramp, or plain ramps and sets on trap beams' channels
        kind = w.action.kind if w.action is not None else ("ramp" if w.t1 > w.t0 else "set")
        key = (w.block, w.t0, w.t1)
        if key in seen:
            first = seen[key][3]
            first[0] = first[0].replace("beam ", "beams ", 1) if first[0].startswith("beam ") else first[0]
            first[0] += " + " + " + ".join(w.beams)
            continue
        rep = write_prediction(shot, w)
        items = [("beams " if len(w.beams) > 1 else "beam ") + " + ".join(w.beams)]  # the trap of every beam on
        om = rep.omegas
        if np.all(np.isfinite(om[[0, -1]])):
            f0, f1 = om[0] / (2 * math.pi), om[-1] / (2 * math.pi)
            end = "/".join(f"{x:.4g}" for x in f1) + " Hz"
            items.append("trap frequencies " + (end if len(om) == 1 else "/".join(f"{x:.4g}" for x in f0) + " Hz -> " + end))
        depth = f"{rep.depth_g[-1] / sc.k * 1e6:.4g} uK"
        items.append("depth with gravity k_B x " + (depth if len(rep.depth_g) == 1 else
                                                    f"{rep.depth_g[0] / sc.k * 1e6:.4g} uK -> " + depth))
        if rep.eta is not None:
            items.append(f"eta at end {rep.eta:.3g}")
        if rep.excitation is not None:
            if rep.excitation_is_bound:
                items.append(f"excitation E/E_ad-1 <= {rep.excitation[0]:.2g} (slow ramp: bound from max |d omega/dt|/omega^2)")
            else:
                items.append("excitation E/E_ad-1 per axis " + ", ".join(f"{x:.2e}" for x in rep.excitation))
        rows.append([w.block, kind, w.t0, items])
        seen[key] = rows[-1]
    rows = [_row(*r) for r in rows]
    for img in shot.actions("image"):
        pred = image_prediction(shot, img)
        if pred:
            rows.append(_row(img.block, "image", img.t0, _image_items(pred)))
    return rows


def _image_items(pred) -> list:
    """The lines of one image: flight, size (or why unknown), geometry, each component."""
    if pred.release is None:
        return [tx.size_unknown_text(pred.why)]
    c = pred.cloud
    items = [f"time of flight {fmt_time(pred.tof, unit='ms')}",
             f"free fall {fmt_length(0.5 * G_N * pred.tof ** 2, 3, unit='mm')} below release"]
    if c is None:
        items.append(f"no size prediction: {tx.size_unknown_text(pred.why)}; centres alone are checked")
    else:
        items.append(f"{tx.sizes_text(c)} (released from {tx.trap_text(c)})")
        if c.thermal_stand_in:
            items.append(tx.THERMAL_STAND_IN)
        if c.at_release is not None:
            items.append(tx.not_at_rest_text(c))
    setup = pred.setup
    if pred.los is not None:
        items.append(f"camera looks along {fmt_vec(pred.los)} (probe beam '{setup.probe_beam}'), image plane perpendicular")
    elif setup is not None:
        items.append("line of sight unknown (no probe beam): vertical image plane, horizontal offsets counted in full")
    if pred.unknown:
        items.append("sign unknown, both ways checked: " + ", ".join(pred.unknown))
    if not pred.state_known:
        items.append("sample state unknown: magnetic pushes and separations left out")
    half = setup.field_of_view_m / 2 if setup is not None and setup.field_of_view_m else None
    for comp in pred.components:
        pos = comp.positions
        where = (" or ".join(fmt_vec(p, scale=1e3, unit="mm") for p in pos) if len(pos) <= 4 else
                 "within " + fmt_vec(pos.min(axis=0), scale=1e3, unit="mm") + " .. " + fmt_vec(pos.max(axis=0), scale=1e3, unit="mm"))
        vel = comp.velocities
        moving = (" or ".join(fmt_vec(v, scale=1e3, unit="mm/s") for v in vel) if len(vel) <= 4 else
                  "within " + fmt_vec(vel.min(axis=0), scale=1e3, unit="mm/s") + " .. " + fmt_vec(vel.max(axis=0), scale=1e3, unit="mm/s"))
        text = f"{tx.who(comp)} centred at {where} (rig frame), moving at {moving}"
        if comp.cloud is not None:
            text += f", {tx.sizes_text(comp.cloud)}"
        if half is not None:
            reach = view_edge_reach(pred, comp)
            text += f", reaching {fmt_length(float(np.max(reach)), 3, unit='mm')} of the {fmt_length(half, 3, unit='mm')} half field of view"
        items.append(text)
    if pred.empty:
        items.append("below the detection floor: " + ", ".join(f"{fmt_state(*st)} ({fmt_pct(f, 2)})" for st, f in pred.empty))
    return items


# --------------------------------------------------------------------------- internal states, pushes, probes

def _pulse_items(shot, act, rep):
    items = [f"angle {fmt_angle_pi(rep.area)}" + (f" (declared {rep.angle / math.pi:.3g} pi)" if rep.angle is not None else ""),
             f"peak Rabi frequency 2 pi x {fmt_freq(rep.peak_rabi_hz)}, {rep.envelope} {fmt_time(rep.duration)}"]
    if rep.pair:
        a, b = rep.pair
        items.append(f"{fmt_state(*a)} -> {fmt_state(*b)} line {fmt_freq(rep.line_hz + rep.light_shift_hz, 10)} at "
                     f"{bias(shot) * 1e4:.4g} G")
    items.append(f"detuning {fmt_freq(rep.detuning_hz)}" + ("" if rep.detuning_source == "frequency" or (
        rep.detuning_source == "played" and "frequency" in act.args)
                                                              else f" ({tx.detuning_source_text(rep)})"))
    if rep.transfer is not None:
        items.append(f"transfer {rep.transfer:.4g}" + (f" (intended {rep.intended_transfer:.4g})"
                                                       if rep.intended_transfer != rep.transfer else ""))
    fw = pulse_fourier_width(shot, act)
    if fw:
        items.append(f"Fourier width {fmt_freq(fw)}")
    if rep.slope_hz_per_t is not None:
        items.append(f"field sensitivity {rep.slope_hz_per_t * MG:.4g} Hz/mG")
    return items


def _state_rows(shot) -> list:
    rows = []
    if species(shot) is None:
        return rows
    for act in pulses(shot):
        rep = pulse_analysis(shot, act)
        if rep:
            rows.append(_row(act.block, "clock_pulse", act.t0, _pulse_items(shot, act, rep)))
    for kind, acts in interferometers(shot):
        r = interferometer_analysis(shot, kind, acts)
        items = [f"free evolution {fmt_time(r.free_time)} between blocks " + ", ".join(a.block for a in acts),
                 f"detuning {fmt_freq(r.detuning_hz)} -> free-evolution phase {r.phase_rad:.4g} rad"]
        if kind == "spin_echo":
            items[-1] += f" (static part cancelled; net time {fmt_time(r.net_time)})"
        if r.phase_per_mg is not None:
            items.append(f"phase per mG of static field offset {r.phase_per_mg:.4g} rad")
        if r.step_phase_per_mg is not None:
            items.append(f"phase per mG of a field step between the halves {r.step_phase_per_mg:.4g} rad")
        rows.append(_row(acts[0].block, kind, acts[0].t0, items))
    for drive, seg in sweeps(shot):
        rep = sweep_analysis(shot, drive, seg)
        if not rep:
            continue
        items = [f"sweep {fmt_freq(rep.f0, 10)} -> {fmt_freq(rep.f1, 10)} in {fmt_time(rep.duration)}",
                 f"{fmt_state(*rep.pair[0])} -> {fmt_state(*rep.pair[1])} line {fmt_freq(rep.resonance_hz, 10)}"]
        if rep.crosses:
            items.append(f"crossing at {fmt_freq(abs(rep.rate_hz_s))}/s, Rabi frequency 2 pi x {fmt_freq(rep.rabi_hz)}")
            items.append(f"Landau-Zener transfer {rep.lz_transfer:.4g}")
        else:
            items.append("does not cross the line")
        if rep.bloch_transfer is not None:
            items.append(f"integrated transfer {rep.bloch_transfer:.4g}")
        rows.append(_row(seg.block, "sweep", seg.t0, items))
    for act in barriers(shot):
        rep = barrier_drive_analysis(shot, act)
        if not rep:
            continue
        if rep.unsupported:
            items = [tx.barrier_drive_reason(rep)]
        else:
            a, b = rep.pair
            items = [f"modulation {fmt_freq(rep.f_mod, 10)} depth {rep.depth:.3g} on {fmt_state(*a)} -> {fmt_state(*b)}",
                     f"effective two-photon Rabi frequency 2 pi x {fmt_freq(rep.rabi_hz)} (circular polarisation assumed; "
                     f"peak intensity {rep.i_peak * 1e-4:.4g} W/cm^2)",
                     f"differential light shift {fmt_freq(rep.light_shift_hz)}",
                     f"line {fmt_freq(rep.resonance_hz, 10)} (Breit-Rabi {fmt_freq(rep.bare_hz, 10)}), "
                     f"modulation offset {fmt_freq(rep.offset_hz)} (tolerated {fmt_freq(rep.tolerance_hz)})"]
        rows.append(_row(act.block, "barrier_drive", act.t0, items))
    for act in pushes(shot):
        rep = push_analysis(shot, act)
        if not rep:
            continue
        if rep.kind == "magnetic":
            if rep.no_force:
                way = "no kick (no first-order magnetic moment)"
            else:
                way = (f"kick {abs(rep.velocity) * 1e3:.4g} mm/s towards "
                       f"{'stronger' if rep.moment > 0 else 'weaker'} field"
                       + (f", along {fmt_vec(rep.direction)}" if rep.direction is not None else
                          " (direction unknown: the coil has no field_grows_along)"))
            items = [f"{fmt_state(*rep.state)} moment {rep.moment / MU_B:+.5g} mu_B (-dE/dB) at {bias(shot) * 1e4:.4g} G",
                     way]
        else:
            items = [f"optical: saturation {rep.saturation:.3g}, {rep.photons:.3g} photons of "
                     f"{rep.recoil * 1e3:.4g} mm/s recoil", f"kick {rep.velocity * 1e3:.4g} mm/s along the beam, "
                     f"rms spread {rep.rms_along * 1e3:.3g} mm/s"]
        if act.args.get("expect_velocity") is not None:
            items.append(f"expected {abs(act.args['expect_velocity']) * 1e3:.4g} mm/s")
        if rep.arrival is not None:
            items.append(f"reaches {fmt_length(act.args['target_distance'], unit='mm')} at t = {fmt_time(rep.arrival)}")
            if rep.barrier is not None:
                b = rep.barrier
                items.append(f"barrier '{b.block}' on {fmt_time(b.t0)} to {fmt_time(b.t1)}")
        rows.append(_row(act.block, "push", act.t0, items))
    for act, rep in separations(shot):
        if rep.pair is None:
            held = ", ".join(fmt_state(*st) for st in rep.states) or "no state above the detection floor"
            rows.append(_row(act.block, "separate", act.t0, [f"only {held} holds atoms: nothing to separate"]))
            continue
        a, b = rep.pair
        items = [f"{fmt_state(*a)} {rep.moments[0] / MU_B:+.4g} mu_B, {fmt_state(*b)} {rep.moments[1] / MU_B:+.4g} mu_B",
                 f"separation at the image {fmt_length(abs(rep.separation), unit='mm')}"]
        if rep.combined is not None:
            along = f" along {fmt_vec(rep.direction)}" if rep.direction is not None else ""
            items.append(f"rms width {fmt_length(rep.sigma, unit='um')}{along} each: {abs(rep.separation) / rep.combined:.3g} "
                         f"combined rms widths (need {SEPARATION_WIDTHS:g})")
        rows.append(_row(act.block, "separate", act.t0, items))
    for act in images(shot):
        rep = probe_analysis(shot, act)
        if not rep:
            continue
        items = [f"saturation {rep.saturation:.3g}", f"{rep.photons:.3g} photons per atom",
                 f"Doppler shift {rep.doppler_linewidths:.3g} linewidths", f"recoil blur {fmt_length(rep.blur, 3, unit='um')}"
                 + (f" (pixel {fmt_length(rep.pixel, 3, unit='um')} in the atom plane)" if rep.pixel else "")]
        rows.append(_row(act.block, "probe", act.t0, items))
    return rows


# --------------------------------------------------------------------------- barriers

def _barrier_rows(shot) -> list:
    rows = []
    if species(shot) is None or shot.sample is None:
        return rows
    for act in barriers(shot):
        rep = analyse(shot, act)
        if rep is None:
            continue
        items = [f"incident {rep.speed * 1e3:.4g} mm/s ({tx.incident_text(rep.incident)}), "
                 f"spread {rep.sigma_v * 1e3:.2g} mm/s ({tx.spread_text(rep.cloud)})"]
        if rep.release is not None:
            items.append(tx.release_text(rep.release))
        items += [
                 f"barrier V0 {fmt_energy(rep.V0)}, mean kinetic energy {fmt_energy(rep.E_mean)}",
                 f"transmitted fraction {rep.T:.3g} (spread {rep.T_spread:.2g})"]
        if rep.N_T is not None:
            items.append(f"transmitted atoms {rep.N_T:.3g}, reflected {rep.N_R:.3g} (floor {rep.floor:g})")
        ps = rep.passage
        edge = f", cloud edge {fmt_length(ps.edge, mm_from=1e-2)}" if ps.edge is not None else ""
        items.append(f"sheet {fmt_length(ps.distance, mm_from=1e-2)} from the atoms along the path{edge}; on {fmt_time(ps.on, unit='ms', nonfinite='never')} to "
                     f"{fmt_time(ps.off, unit='ms', nonfinite='never')} after the push starts; cloud centre there after {fmt_time(ps.centre_arrival, unit='ms', nonfinite='never')}; "
                     f"{fmt_pct(ps.early)} of the cloud arrives before it is on, {fmt_pct(ps.late)} after it is off")
        d = rep.drive
        if d and d.unsupported:
            items.append(tx.in_barrier_drive_reason(d))
        elif d and rep.rotation is not None:
            items.append(tx.rotation_text(rep))
            if rep.precession is not None:
                items.append(tx.larmor_clock_text(rep))
            items.append(f"free-flight rotation (no barrier) {rep.free_flight_rotation:.3g} rad")
            if rep.N_T:
                items.append(f"shot-noise angle 1/sqrt(N_T) {1 / math.sqrt(max(rep.N_T, 1.0)):.3g} rad")
        rows.append(_row(act.block, "barrier", act.t0, items))
    return rows


# --------------------------------------------------------------------------- magnetic holds

def _magnetic_rows(shot) -> list:
    rows = []
    for act in holds(shot):
        rep = hold_analysis(shot, act)
        items = [", ".join(f"{n} {i:.4g} A" for n, i in rep.coils) or "no coil current"]
        if rep.bad_axes:
            items.append("trap not evaluated: coil axis of " + ", ".join(rep.bad_axes) + " is not a direction")
        elif rep.kind == "quadrupole":
            items.append("quadrupole trap: " + (", ".join(f"{n} {fmt_gauss_per_cm(g)} along its axis" for n, g in rep.axial)
                                                or "no gradient"))
        else:
            items.append(f"Ioffe-Pritchard trap: B0 {fmt_gauss(rep.bias)}, B' {fmt_gauss_per_cm(rep.gradient)}, "
                         f"B'' {fmt_gauss_per_cm2(rep.curvature)}")
        if rep.bad_state:
            items.append(tx.level_problem_text(rep.bad_state))
        if rep.moment is not None:
            kind = "low-field seeker" if rep.trappable else "not trappable"
            items.append(f"{fmt_state(*rep.state)}: moment -dE/dB {rep.moment / MU_B:+.4g} mu_B ({kind})")
        elif rep.state is None:
            items.append("no sample state: trap not evaluated")
        if rep.optical:
            items.append("optical trap beams on (" + ", ".join(rep.optical) + "): hybrid trap")
        if rep.support is not None:
            items.append("magnetic force / weight " + ("unbounded (vertical axis)" if math.isinf(rep.support)
                                                      else f"{rep.support:.3g}"))
        if rep.omega_radial is not None:
            items.append(f"trap frequencies radial/axial {rep.omega_radial / (2 * math.pi):.4g}/"
                         f"{rep.omega_axial / (2 * math.pi):.4g} Hz")
            items.append(f"gravity sag {fmt_length(rep.sag, 3, unit='um')}")
            items.append(f"Larmor frequency {rep.larmor / (2 * math.pi):.4g} Hz, "
                         f"{rep.adiabaticity:.3g} x the trap / field-rotation rate")
        if rep.lifetime is not None:
            items.append(f"cloud size ~{fmt_length(rep.cloud_size, 3, unit='um')}, Majorana hole ~{fmt_length(rep.hole_radius, 3, unit='um')}, "
                         f"lifetime ~{fmt_time(rep.lifetime)} (hold {fmt_time(rep.duration)}), all with "
                         f"b' = {tx.weakest_text(rep)}")
        rows.append(_row(act.block, "magnetic_hold", act.t0, items))
    return rows
