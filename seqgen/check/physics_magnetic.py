"""Physics checks of magnetic trap stages (the `magnetic_hold` action).

One cached analysis per hold (shared with `report`, i.e. `seqgen show
--physics`): the trap is built from every rig coil's current at the start of
the hold (after `ramp_on`), read from the shot's segments.

Conventions of this module:

* Magnetic moment = -dE/dB (J/T), from `seqgen.physics.zeeman.magnetic_moment`
  (Breit-Rabi formula): a NEGATIVE moment is a low-field seeker, which a field
  minimum holds with potential energy |moment| |B|; a positive moment (a
  high-field seeker) or a vanishing one (mF = 0) cannot be held. The moment is
  taken at the field of the trap's bottom (0 in a quadrupole, B0 in an
  Ioffe-Pritchard trap); the rig's `fields: bias` plays no part in a hold.
* Trap type: when a coil with `curvature_per_amp` carries current the trap is
  an Ioffe-Pritchard trap, with B0 = sum I x bias_per_amp, B' = sum I x
  gradient_per_amp (the radial gradient of the Ioffe field) and B'' = sum I x
  curvature_per_amp along the axis of the coil giving the most curvature.
  Otherwise it is a linear quadrupole trap: each coil's `gradient_per_amp` is
  the gradient of |B| along its `axis` (the strong axis, twice the radial
  one), the coils' fields add and their zeros are taken to coincide.
* Up is +z (gravity along -z), as for the optical traps.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import constants as sc

from ..findings import make
from .rules import rule
from ..values import value_at
from .physics_states import _fmt_t
from .physics_traps import _species, per_shot_cache
from ..codes import MAGNETIC_TRAP_LOST, MAJORANA_LOSS, STATE_NOT_TRAPPABLE

MU_B = sc.physical_constants["Bohr magneton"][0]
TESLA_PER_GAUSS = 1e-4
UP = (0.0, 0.0, 1.0)
MIN_MOMENT = 0.01 * MU_B  # below this a field minimum holds nothing (as for physics.push-no-force)
MIN_SPIN_ADIABATICITY = 10.0  # Larmor frequency over the trap and field-rotation rates (common practice, no source)


def _holds(shot):
    return [a for a in shot.phys if a.kind == "magnetic_hold"]


def _state_text(s) -> str:
    return f"|F={s[0]}, mF={s[1]:+d}>" if s[1] else f"|F={s[0]}, mF=0>"


def _gauss(b_t) -> str:
    return f"{b_t / TESLA_PER_GAUSS:.4g} G"


def _g_cm(g_t_m) -> str:
    return f"{g_t_m * 100:.4g} G/cm"


def _g_cm2(c_t_m2) -> str:
    return f"{c_t_m2:.4g} G/cm^2"  # 1 G/cm^2 = 1e-4 T / 1e-4 m^2 = 1 T/m^2


def _moment(sp, state, field_t):
    from ..physics.zeeman import magnetic_moment

    return float(magnetic_moment(state[0], state[1], abs(field_t), atom=sp))


def trappable_states(sp, field_t: float = 0.0) -> list:
    """The ground states of a species that a field minimum holds (moment = -dE/dB below -MIN_MOMENT)."""
    from ..physics.zeeman import ground_states

    out = []
    for F, mF in ground_states(sp.nuclear_spin):
        if abs(F - round(F)) > 1e-9:
            continue
        if _moment(sp, (int(F), int(mF)), field_t) < -MIN_MOMENT:
            out.append((int(F), int(mF)))
    return out


def _larmor_rad_s(sp, state, field_t):
    """Angular frequency between |F, mF> and a neighbouring mF at the field (Breit-Rabi), rad/s."""
    from ..physics.zeeman import transition_frequency

    F, mF = state
    other = mF + 1 if mF + 1 <= F else mF - 1
    if abs(other) > F:
        return 0.0
    return 2 * math.pi * abs(float(transition_frequency(F, mF, F, other, abs(field_t), atom=sp)))


@per_shot_cache(lambda shot, act: ("magnetic-hold", act.index, act.t0))
def hold_analysis(shot, act):
    """The trap of one magnetic hold (dict of SI numbers; see the module notes), or None without a species/state."""
    from ..physics import magnetic_trap as mt

    sp = _species(shot)
    state = act.args.get("state")
    if state is None and shot.sample is not None and shot.sample.F is not None and shot.sample.mF is not None:
        state = (int(shot.sample.F), int(shot.sample.mF))
    t_hold = act.t0 + act.args.get("ramp_on", 0.0)
    coils = []
    for coil in shot.rig.coils.values():
        if coil.current_channel not in shot.rig.outputs:
            continue
        amps = float(value_at(shot, coil.current_channel, t_hold)[0])
        if amps != 0 and math.isfinite(amps):
            coils.append((coil, amps))
    rep = {"t_hold": t_hold, "duration": act.args["duration"], "coils": [(c.name, i) for c, i in coils],
           "state": state, "species": sp.name if sp else None}
    beams_on = [b.name for b in shot.rig.beams.values()
                if b.role == "trap" and float(value_at(shot, b.power_channel, t_hold)[0]) > 0]
    rep["optical"] = beams_on
    bad_axes = [c.name for c, _ in coils if not (np.all(np.isfinite(c.axis)) and np.any(np.asarray(c.axis) != 0))]
    if bad_axes:  # the rig schema takes any three numbers; a zero axis gives no direction
        rep.update(kind="unknown", bad_axes=bad_axes)
        return rep
    curving = [(c, i) for c, i in coils if c.curvature_per_amp]
    if curving:
        axis_coil = max(curving, key=lambda ci: abs(ci[0].curvature_per_amp * ci[1]))[0]
        rep.update(kind="ioffe_pritchard", axis=tuple(axis_coil.axis),
                   bias=sum(i * (c.bias_per_amp or 0.0) for c, i in coils),
                   gradient=sum(i * (c.gradient_per_amp or 0.0) for c, i in coils),
                   curvature=sum(i * c.curvature_per_amp for c, i in curving))
        bottom = max(rep["bias"], 0.0)
    else:
        grads = [(c, i * c.gradient_per_amp) for c, i in coils if c.gradient_per_amp]
        if grads:
            matrix = mt.quadrupole_field_matrix([g for _, g in grads], [c.axis for c, _ in grads])
        else:
            matrix = np.zeros((3, 3))
        eig = np.abs(np.linalg.eigvalsh(matrix))
        rep.update(kind="quadrupole", matrix=matrix, holding_gradient=mt.holding_gradient(matrix, UP),
                   weakest_gradient=float(eig.min()), strongest_gradient=float(eig.max()),
                   axial=[(c.name, g) for c, g in grads])
        bottom = 0.0
    if sp is None or state is None:
        return rep
    try:
        rep["moment"] = _moment(sp, state, bottom)
    except (ValueError, OverflowError, TypeError) as exc:  # a state the species has not, or absurd numbers
        rep["bad_state"] = str(exc)
        return rep
    rep["trappable"] = rep["moment"] < -MIN_MOMENT
    if not rep["trappable"]:
        return rep
    mom, m = rep["moment"], sp.mass_kg
    temp = shot.sample.temperature_k if shot.sample is not None else None
    speed = math.sqrt(sc.k * temp / m) if temp else None
    rep["speed"] = speed
    if rep["kind"] == "quadrupole":
        g_hold = rep["holding_gradient"]
        rep["support"] = float(mt.gravity_support(mom, g_hold, m))
        if temp and rep["weakest_gradient"] > 0:
            size = float(mt.linear_trap_size(temp, mom, rep["weakest_gradient"]))
            rep["cloud_size"] = size
            rep["lifetime"] = float(mt.majorana_lifetime(m, size))
            rep["hole_radius"] = float(mt.majorana_hole_radius(mom, rep["weakest_gradient"], speed))
        return rep
    b0, b1, b2 = rep["bias"], rep["gradient"], rep["curvature"]
    c2 = float(np.dot(np.asarray(rep["axis"], float) / np.linalg.norm(rep["axis"]), UP)) ** 2
    sideways = math.sqrt(max(0.0, 1.0 - c2))  # gravity across the axis meets the linear radial field B'
    rep["support"] = (abs(mom) * abs(b1) / (m * mt.G_N * sideways)) if sideways > 1e-6 else math.inf
    if b2 <= 0:
        rep["unconfined"] = "axially: the curvature B'' is not positive"
        return rep
    if b0 <= 0:
        rep["field_zero"] = True
        return rep
    if b1 ** 2 / b0 - b2 / 2 <= 0:
        rep["unconfined"] = "radially: B'^2/B0 < B''/2"
        return rep
    w_rho, w_z = mt.ioffe_pritchard_frequencies(mom, b1, b2, b0, m)
    rep.update(omega_radial=w_rho, omega_axial=w_z, sag=mt.harmonic_sag(w_rho, w_z, rep["axis"], UP))
    rep["larmor"] = _larmor_rad_s(sp, state, b0)
    rep["rotation"] = float(mt.field_rotation_rate(b1, b0, speed)) if speed and b1 else 0.0
    rep["adiabaticity"] = rep["larmor"] / max(w_rho, rep["rotation"])
    return rep


def _weakest_text(rep, short: bool = False) -> str:
    """Which gradient the quadrupole's cloud size and Majorana numbers use: the weakest one, named."""
    one = len(rep.get("axial") or ()) == 1  # one coil: the radial gradient is half the axial one (div B = 0)
    text = f"{_g_cm(rep['weakest_gradient'])}, the trap's weakest{' (radial)' if one and short else ''} gradient"
    if one and not short:
        name, g = rep["axial"][0]
        text += f": the radial one, half of {name}'s {_g_cm(abs(g))} along its axis"
    return text


def _current_hint(rep, factor) -> str:
    parts = [f"'{n}' to {abs(i) * factor:.4g} A" for n, i in rep["coils"]]
    return "raise the coil currents by at least x" + f"{factor:.3g}" + (f" ({', '.join(parts)})" if parts else "")


_SRC_STATE = ("Breit-Rabi formula, Phys. Rev. 38, 2082 (1931); a static field has no maximum in free space, so "
              "only low-field seekers are trapped (Phys. Rev. Lett. 51, 1336 (1983)) (from memory)")


@rule(STATE_NOT_TRAPPABLE, stage="physics")
def state_not_trappable(shot):
    for act in _holds(shot):
        rep = hold_analysis(shot, act)
        if rep.get("bad_state"):
            yield make(STATE_NOT_TRAPPABLE, f"the held state is not a ground level of {rep['species']}: "
                       f"{rep['bad_state']}", act.pos, block=act.block, time_s=act.t0,
                       hint="give the state's F and mF of the species' ground levels")
            continue
        if "moment" not in rep or rep["trappable"]:
            continue
        sp = _species(shot)
        ok = ", ".join(_state_text(s) for s in trappable_states(sp))
        mom = rep["moment"]
        why = ("has no magnetic moment" if abs(mom) < MIN_MOMENT else "is a high-field seeker")
        yield make(STATE_NOT_TRAPPABLE, f"{_state_text(rep['state'])} of {rep['species']} {why} "
                   f"(moment -dE/dB = {mom / MU_B:+.3g} mu_B): the magnetic trap cannot hold it", act.pos,
                   block=act.block, time_s=act.t0,
                   hint=f"transfer the atoms to a low-field seeker first ({ok}), or hold them optically",
                   data={"moment_mu_b": mom / MU_B})


_SRC_LOST = ("force = moment x gradient of |B|, standard gravity g_n (SI Brochure); levitation gradient m g / |mu|; "
             "Ioffe-Pritchard field, Phys. Rev. Lett. 51, 1336 (1983)")


@rule(MAGNETIC_TRAP_LOST, stage="physics")
def magnetic_trap_lost(shot):
    for act in _holds(shot):
        rep = hold_analysis(shot, act)
        if not rep.get("trappable") or rep["optical"]:
            continue
        mom, sp = rep["moment"], _species(shot)
        weight = sp.mass_kg * 9.80665
        if rep.get("unconfined"):
            yield make(MAGNETIC_TRAP_LOST, f"the Ioffe-Pritchard trap does not confine {_state_text(rep['state'])} "
                       f"{rep['unconfined']} (B0 {_gauss(rep['bias'])}, B' {_g_cm(rep['gradient'])}, "
                       f"B'' {_g_cm2(rep['curvature'])})", act.pos, block=act.block, time_s=rep["t_hold"],
                       hint="check the coil currents and the signs of the coils' per-amp fields in the rig file")
            continue
        support = rep["support"]
        if support > 1:
            continue
        need = weight / abs(mom)
        if rep["kind"] == "quadrupole":
            what = (f"the coils' gradient that gravity meets is {_g_cm(rep['holding_gradient'])}" if rep["coils"]
                    else "no coil carries current")
        else:
            what = f"the radial gradient B' is {_g_cm(abs(rep['gradient']))}"
        hint = _current_hint(rep, 1 / support) if support > 0 else "give the coils a gradient (gradient_per_amp) and a current"
        yield make(MAGNETIC_TRAP_LOST, f"the magnetic trap does not hold {_state_text(rep['state'])} of "
                   f"{rep['species']} against gravity: {what}, {support:.3g} of the levitation gradient "
                   f"{_g_cm(need)} (m g_n / |moment|)", act.pos, block=act.block, time_s=rep["t_hold"], hint=hint,
                   data={"support": support, "levitation_gradient_t_m": need})


_SRC_MAJORANA = ("Majorana loss rate ~ hbar / (m l^2) for a cloud of size l = k_B T / (|mu| b') in a quadrupole "
                 "trap, Phys. Rev. Lett. 74, 3352 (1995) (from memory); Larmor frequency against the trap and "
                 "field-rotation rates x 10 (common practice, no source)")


@rule(MAJORANA_LOSS, stage="physics")
def majorana_loss(shot):
    for act in _holds(shot):
        rep = hold_analysis(shot, act)
        if not rep.get("trappable"):
            continue
        if rep["kind"] == "quadrupole":
            tau = rep.get("lifetime")
            if tau is None or rep["duration"] <= tau:
                continue
            lost = 1 - math.exp(-rep["duration"] / tau)
            yield make(MAJORANA_LOSS, f"Majorana spin flips: at {shot.sample.temperature_k * 1e6:.4g} uK the "
                       f"cloud in the quadrupole is ~{rep['cloud_size'] * 1e6:.3g} um (k_B T / |moment| b', "
                       f"b' = {_weakest_text(rep, short=True)}), lifetime "
                       f"~ m l^2/hbar = {_fmt_t(tau)}, shorter than the {_fmt_t(rep['duration'])} hold (~{lost:.0%} lost)",
                       act.pos, block=act.block, time_s=rep["t_hold"],
                       hint="shorten the hold, or plug the field zero (optical plug, Ioffe-Pritchard trap, rotating bias)",
                       data={"lifetime_s": tau, "hold_s": rep["duration"]})
        elif rep.get("field_zero"):
            yield make(MAJORANA_LOSS, f"the Ioffe-Pritchard trap's bias B0 = {_gauss(rep['bias'])} leaves a field "
                       f"zero in the trap: spins flip there and atoms are lost", act.pos, block=act.block,
                       time_s=rep["t_hold"], hint="raise the bias (less anti-bias current) to well above zero")
        elif rep.get("adiabaticity") is not None and rep["adiabaticity"] < MIN_SPIN_ADIABATICITY:
            yield make(MAJORANA_LOSS, f"Ioffe-Pritchard bias {_gauss(rep['bias'])} is low: Larmor frequency "
                       f"{rep['larmor'] / (2 * math.pi):.4g} Hz is only {rep['adiabaticity']:.3g} x the faster of the radial "
                       f"trap frequency ({rep['omega_radial'] / (2 * math.pi):.4g} Hz) and the field rotation rate "
                       f"({rep['rotation'] / (2 * math.pi):.4g} Hz); want >= {MIN_SPIN_ADIABATICITY:g}", act.pos,
                       block=act.block, time_s=rep["t_hold"], hint="raise the bias B0 (less anti-bias current)",
                       data={"adiabaticity": rep["adiabaticity"], "bias_t": rep["bias"]})


def report(shot) -> list[dict]:
    rows = []
    for act in _holds(shot):
        rep = hold_analysis(shot, act)
        items = [", ".join(f"{n} {i:.4g} A" for n, i in rep["coils"]) or "no coil current"]
        if rep.get("bad_axes"):
            items.append("trap not evaluated: coil axis of " + ", ".join(rep["bad_axes"]) + " is not a direction")
        elif rep["kind"] == "quadrupole":
            items.append("quadrupole trap: " + (", ".join(f"{n} {_g_cm(g)} along its axis" for n, g in rep["axial"])
                                                or "no gradient"))
        else:
            items.append(f"Ioffe-Pritchard trap: B0 {_gauss(rep['bias'])}, B' {_g_cm(rep['gradient'])}, "
                         f"B'' {_g_cm2(rep['curvature'])}")
        if rep.get("bad_state"):
            items.append(rep["bad_state"])
        if "moment" in rep:
            kind = "low-field seeker" if rep["trappable"] else "not trappable"
            items.append(f"{_state_text(rep['state'])}: moment -dE/dB {rep['moment'] / MU_B:+.4g} mu_B ({kind})")
        elif rep["state"] is None:
            items.append("no sample state: trap not evaluated")
        if rep["optical"]:
            items.append("optical trap beams on (" + ", ".join(rep["optical"]) + "): hybrid trap")
        if "support" in rep:
            items.append("magnetic force / weight " + ("unbounded (vertical axis)" if math.isinf(rep["support"])
                                                      else f"{rep['support']:.3g}"))
        if "omega_radial" in rep:
            items.append(f"trap frequencies radial/axial {rep['omega_radial'] / (2 * math.pi):.4g}/"
                         f"{rep['omega_axial'] / (2 * math.pi):.4g} Hz")
            items.append(f"gravity sag {rep['sag'] * 1e6:.3g} um")
            items.append(f"Larmor frequency {rep['larmor'] / (2 * math.pi):.4g} Hz, "
                         f"{rep['adiabaticity']:.3g} x the trap / field-rotation rate")
        if "lifetime" in rep:
            items.append(f"cloud size ~{rep['cloud_size'] * 1e6:.3g} um, Majorana hole ~{rep['hole_radius'] * 1e6:.3g} um, "
                         f"lifetime ~{_fmt_t(rep['lifetime'])} (hold {_fmt_t(rep['duration'])}), all with "
                         f"b' = {_weakest_text(rep)}")
        rows.append({"block": act.block, "kind": "magnetic_hold", "time_s": act.t0, "items": items})
    return rows
