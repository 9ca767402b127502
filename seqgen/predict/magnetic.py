"""The trap of a `magnetic_hold`: built from every rig coil's current at the start of the hold (after
`ramp_on`), as the hardware plays it (`predict.played`), for the states that hold atoms then.

* Held states: the hold's `state:` when given, else the states that hold atoms at the start of the hold
  (`predict.states.populated_states`: after a pi pulse, the state it transferred the atoms to), else the
  sample's. The trap is analysed for the most populated state the trap can hold (else the most populated
  one); other populated states it cannot hold are listed in `lost_states`.

* Magnetic moment = -dE/dB (J/T), from `seqgen.physics.zeeman.magnetic_moment` (Breit-Rabi formula): a
  NEGATIVE moment is a low-field seeker, which a field minimum holds with potential energy |moment| |B|; a
  positive moment (a high-field seeker) or a vanishing one (mF = 0) cannot be held. The moment is taken at
  the field of the trap's bottom (0 in a quadrupole, B0 in an Ioffe-Pritchard trap); the rig's
  `fields: bias` plays no part in a hold.
* Trap type: when a coil with `curvature_per_amp` carries current the trap is an Ioffe-Pritchard trap, with
  B0 = sum I x bias_per_amp, B' = sum I x gradient_per_amp (the radial gradient of the Ioffe field) and
  B'' = sum I x curvature_per_amp along the axis of the coil giving the most curvature. Otherwise it is a
  linear quadrupole trap: each coil's `gradient_per_amp` is the gradient of |B| along its `axis` (the strong
  axis, twice the radial one), the coils' fields add and their zeros are taken to coincide.
* Up is +z (gravity along -z), as for the optical traps.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .cache import per_shot_cache
from .played import off_floor, played, played_source
from .species import MU_B, LevelProblem, level_problem, sample_state, species, unevaluable
from .states import populated_states, state_fractions

UP = (0.0, 0.0, 1.0)
MIN_MOMENT = 0.01 * MU_B  # below this a field minimum holds nothing (as for physics.push-no-force)


@dataclass(frozen=True, eq=False)
class HoldPrediction:
    """One magnetic hold, SI numbers. kind: "quadrupole", "ioffe_pritchard" or "unknown" (bad_axes: coils
    whose axis is no direction). unconfined: "axial" or "radial" when the Ioffe-Pritchard field does not
    confine; field_zero: its bias B0 <= 0. bad_state: why the held state has no moment
    (species.LevelProblem). lost_states: ((state, moment J/T, fraction of the atoms), ...) of the other
    populated states the trap cannot hold; source: "played" (currents read from the compiled tables) or
    "intended" (some coil's output could not be compiled). Fields that do not apply are None."""

    t_hold: float
    duration: float
    coils: tuple  # (coil name, current A)
    state: tuple | None
    species: str | None
    optical: tuple  # names of trap beams on at the hold
    kind: str | None = None
    bad_axes: tuple | None = None
    axis: tuple | None = None
    bias: float | None = None
    gradient: float | None = None
    curvature: float | None = None
    matrix: np.ndarray | None = None
    holding_gradient: float | None = None
    weakest_gradient: float | None = None
    strongest_gradient: float | None = None
    axial: tuple | None = None  # (coil name, gradient T/m along its axis)
    moment: float | None = None
    bad_state: LevelProblem | None = None
    trappable: bool | None = None
    speed: float | None = None
    support: float | None = None
    cloud_size: float | None = None
    lifetime: float | None = None
    hole_radius: float | None = None
    unconfined: str | None = None
    field_zero: bool = False
    omega_radial: float | None = None
    omega_axial: float | None = None
    sag: float | None = None
    larmor: float | None = None
    rotation: float | None = None
    adiabaticity: float | None = None
    lost_states: tuple = ()
    source: str = "played"


def holds(shot):
    return shot.actions("magnetic_hold")


def _moment(sp, state, field_t):
    from ..physics.zeeman import magnetic_moment

    return float(magnetic_moment(state[0], state[1], abs(field_t), atom=sp))


def _larmor_rad_s(sp, state, field_t):
    """Angular frequency between |F, mF> and a neighbouring mF at the field (Breit-Rabi), rad/s."""
    from ..physics.zeeman import transition_frequency

    F, mF = state
    other = mF + 1 if mF + 1 <= F else mF - 1
    if abs(other) > F:
        return 0.0
    return 2 * math.pi * abs(float(transition_frequency(F, mF, F, other, abs(field_t), atom=sp)))


@per_shot_cache(lambda shot, act: ("magnetic-hold", act.index, act.t0))
def hold_analysis(shot, act) -> HoldPrediction:
    """The trap of one magnetic hold (see the module notes)."""
    rep = _hold(shot, act)
    return HoldPrediction(**rep)


def _settled(shot, output, t):
    """A tick of the output's device after t: a write at t is played by then (its row sits at the tick nearest
    t - latency, so it may appear up to half a tick late)."""
    out = shot.rig.outputs[output]
    dev = shot.rig.devices.get(out.device)
    return t + (dev.tick_s if dev is not None else 0.0)


def held_states(shot, act) -> tuple:
    """The states a hold holds (see the module notes), most populated first; () without any state."""
    st = act.args.get("state")
    if st is not None:
        return (tuple(int(x) for x in st),)
    pop = populated_states(shot, act.t0) if species(shot) is not None else []
    if pop:
        return tuple(pop)
    state = sample_state(shot)
    return (state,) if state else ()


def _pick_state(sp, states, bottom):
    """(the state to analyse, ((state, moment), ...) of the others that cannot be held)."""
    if sp is None or len(states) < 2:
        return (states[0] if states else None), ()
    moments = []
    for st in states:
        try:
            moments.append(None if level_problem(sp, *st) else _moment(sp, st, bottom))
        except (ValueError, OverflowError, TypeError):
            moments.append(None)
    held_ok = [i for i, m in enumerate(moments) if m is not None and m < -MIN_MOMENT]
    main = held_ok[0] if held_ok else 0
    lost = tuple((states[i], m) for i, m in enumerate(moments) if i != main and m is not None and m >= -MIN_MOMENT)
    return states[main], lost


def _hold(shot, act) -> dict:
    from ..physics import magnetic_trap as mt

    sp = species(shot)
    states = held_states(shot, act)
    t_hold = act.t0 + act.args.get("ramp_on", 0.0)
    coils = []
    channels = []
    for coil in shot.rig.coils.values():
        if coil.current_channel not in shot.rig.outputs:
            continue
        channels.append(coil.current_channel)
        amps = float(played(shot, coil.current_channel, _settled(shot, coil.current_channel, t_hold))[0])
        if abs(amps) > off_floor(shot, coil.current_channel) and math.isfinite(amps):
            coils.append((coil, amps))
    rep = {"t_hold": t_hold, "duration": act.args["duration"], "coils": tuple((c.name, i) for c, i in coils),
           "state": states[0] if states else None, "species": sp.name if sp else None,
           "source": played_source(shot, *channels)}
    beams_on = [b.name for b in shot.rig.beams.values()
                if b.role == "trap" and float(played(shot, b.power_channel, _settled(shot, b.power_channel, t_hold))[0])
                > off_floor(shot, b.power_channel)]
    rep["optical"] = tuple(beams_on)
    bad_axes = [c.name for c, _ in coils if not (np.all(np.isfinite(c.axis)) and np.any(np.asarray(c.axis) != 0))]
    if bad_axes:  # the rig schema takes any three numbers; a zero axis gives no direction
        rep.update(kind="unknown", bad_axes=tuple(bad_axes))
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
                   axial=tuple((c.name, g) for c, g in grads))
        bottom = 0.0
    state, lost = _pick_state(sp, states, bottom)
    if lost:
        fractions = state_fractions(shot, act.t0) or {}
        rep["lost_states"] = tuple((st, m, fractions.get(st, 0.0)) for st, m in lost)
    rep["state"] = state
    if sp is None or state is None:
        return rep
    try:
        problem = level_problem(sp, *state)  # a state the species has not
        rep["moment"] = None if problem else _moment(sp, state, bottom)
    except (ValueError, OverflowError, TypeError) as exc:  # absurd numbers
        problem = unevaluable(sp, state, exc)
    if problem:
        rep["bad_state"] = problem
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
        rep["unconfined"] = "axial"
        return rep
    if b0 <= 0:
        rep["field_zero"] = True
        return rep
    if b1 ** 2 / b0 - b2 / 2 <= 0:
        rep["unconfined"] = "radial"
        return rep
    w_rho, w_z = mt.ioffe_pritchard_frequencies(mom, b1, b2, b0, m)
    rep.update(omega_radial=w_rho, omega_axial=w_z, sag=mt.harmonic_sag(w_rho, w_z, rep["axis"], UP))
    rep["larmor"] = _larmor_rad_s(sp, state, b0)
    rep["rotation"] = float(mt.field_rotation_rate(b1, b0, speed)) if speed and b1 else 0.0
    rep["adiabaticity"] = rep["larmor"] / max(w_rho, rep["rotation"])
    return rep
