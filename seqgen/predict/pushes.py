"""Pushes and where each internal-state component is at an image.

* Magnetic push: force = moment x grad|B| (moment -dE/dB of the state the atoms are in, Breit-Rabi formula,
  Phys. Rev. 38, 2082 (1931), at the rig's bias field), dv = F t / m (seqgen.physics.kinematics.magnetic_push).
  Where the rig's coil declares `field_grows_along` (the direction in which |B| grows at the atoms), the push
  has a direction: a positive moment goes towards stronger field.
* Optical push: photon recoil and steady-state scattering (Adv. At. Mol. Opt. Phys. 42, 95 (2000)), along
  the beam.
* Components at an image: every populated state's displacement by the pushes and separations before it
  (uniform acceleration, then free flight), for every combination of force directions of unknown sign.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .cache import per_shot_cache
from .played import output_of, played_mean
from .species import MU_B, bias, gaussian_beams, sample_state, species, unit
from .states import barriers, is_populated, populated_states, populations, state_at
from .traps import held

TWO_PI = 2 * math.pi
NO_FORCE_MOMENT = 0.01 * MU_B  # below this a gradient pushes < 2 % as hard as on an |mF| = 1 state
RESONANT_WAVELENGTH_M = 0.01e-9  # a push beam within 0.01 nm of D2 is taken as resonant (wavelength figures are rounded)
MAX_UNKNOWN_SIGNS = 10  # force directions of unknown sign enumerated one by one (2^10 cases); beyond: a bounding box


def pushes(shot):
    return shot.actions("push")


@dataclass(frozen=True)
class PushPrediction:
    """One push. kind "magnetic" (state, moment -dE/dB J/T, gradient T/m) or "optical" (beam, saturation,
    detuning, photons, recoil and rms velocities, heating); velocity (m/s, signed for a magnetic push: > 0
    towards stronger field); no_force: the state has no usable moment; direction: unit vector of the kick,
    when known; arrival: when the atoms reach the push's target_distance, and barrier: the next barrier."""

    duration: float
    kind: str
    velocity: float
    no_force: bool
    state: tuple | None = None
    moment: float | None = None
    gradient: float | None = None
    beam: str | None = None
    saturation: float | None = None
    detuning_rad_s: float | None = None
    photons: float | None = None
    recoil: float | None = None
    rms_along: float | None = None
    heating_j: float | None = None
    direction: tuple | None = None
    arrival: float | None = None
    barrier: object = None


def played_gradient(shot, act) -> float:
    """The field gradient (T/m) a magnetic push or separation gives as played: the coil's gradient per amp times
    the time-averaged magnitude of its current over the action (DAC codes, calibration, latency), with the
    sign written; so the impulse is the one the coil delivers. The written gradient when the coil or its
    current output is not in the rig."""
    written = float(act.args["gradient"])
    coil = shot.rig.coils.get(act.args.get("coil"))
    name = output_of(shot, coil.current_channel) if coil is not None and coil.gradient_per_amp else None
    if name is None:
        return written
    if shot.rig.outputs[name].kind == "digital":  # a switched supply: the written gradient while it is on
        return written * played_mean(shot, name, act.t0, act.t1)
    current = played_mean(shot, name, act.t0, act.t1, magnitude=True)
    return math.copysign(abs(coil.gradient_per_amp) * current, written)


def played_power(shot, beam, t0: float, t1: float, written: float) -> float:
    """The time-averaged power (W) a beam puts out over [t0, t1], as played; on an on/off (digital) line the
    `written` power times the fraction of the time the line is on; `written` without a power output."""
    name = output_of(shot, beam.power_channel) if beam.power_channel else None
    if name is None:
        return float(written)
    if shot.rig.outputs[name].kind == "digital":
        return float(written) * played_mean(shot, name, t0, t1)
    return played_mean(shot, name, t0, t1)


@per_shot_cache(lambda shot, act: ("state-push", act.index, act.t0))
def push_analysis(shot, act) -> PushPrediction | None:
    """Kick of a push (velocity m/s signed, moment or photons, arrival at the target distance), or None."""
    from ..physics.kinematics import magnetic_push, optical_kick, time_to_reach

    sp = species(shot)
    if sp is None:
        return None
    dur = act.args["duration"]
    rep = dict(duration=dur)
    if "coil" in act.args:
        states = populated_states(shot, act.t0)  # the state the atoms are in at the push (most populated first)
        state = states[0] if states else sample_state(shot)
        if state is None:
            return None
        try:
            grad = played_gradient(shot, act)
            kick = magnetic_push(state[0], state[1], grad, dur, bias(shot), atom=sp)
        except ValueError:
            return None
        mu = float(kick.moment)
        rep.update(kind="magnetic", state=state, moment=mu, gradient=grad,
                   velocity=float(kick.velocity), no_force=state[1] == 0 or abs(mu) < NO_FORCE_MOMENT)
        grows = shot.rig.coils[act.args["coil"]].field_grows_along
        if grows is not None and mu != 0 and not rep["no_force"]:
            # |B| = |I| |b(r)| for the coil's own field: where it grows does not depend on the current's sign,
            # so the way the atoms go is the moment's sign alone (mu > 0: towards stronger field)
            rep["direction"] = tuple(math.copysign(1.0, mu) * x + 0.0 for x in grows)
    else:
        from ..physics.imaging import saturation_parameter

        beam = shot.rig.beams.get(act.args.get("beam"))
        if beam is None or not beam.waist_m:
            return None
        s0 = float(saturation_parameter(played_power(shot, beam, act.t0, act.t1, act.args["power"]), beam.waist_m, sp.saturation_intensity_w_m2))
        off = beam.wavelength_m - sp.d2_wavelength_m
        det = 0.0 if abs(off) < RESONANT_WAVELENGTH_M else TWO_PI * sc.c * (1 / beam.wavelength_m - 1 / sp.d2_wavelength_m)
        k = optical_kick(TWO_PI * sp.d2_linewidth_hz, s0, det, dur, beam.wavelength_m, sp.mass_kg)
        rep.update(kind="optical", beam=beam.name, saturation=s0, detuning_rad_s=det, photons=k.photons,
                   recoil=k.recoil_velocity, velocity=k.velocity, rms_along=k.rms_velocity_along,
                   heating_j=k.heating_j, no_force=False)
        norm = math.sqrt(sum(x * x for x in beam.direction))
        if norm > 0 and math.isfinite(norm):  # scattered photons push along the beam
            rep["direction"] = tuple(x / norm for x in beam.direction)
    speed = abs(rep["velocity"])
    d = act.args.get("target_distance")
    if d is not None:
        if speed == 0:
            t = math.inf
        elif d <= 0.5 * speed * dur:  # reached during the push, uniform acceleration from rest
            t = float(time_to_reach(d, 0.0, speed / dur))
        else:
            t = dur + float(time_to_reach(d - 0.5 * speed * dur, speed))
        rep["arrival"] = act.t0 + t
        nxt = [b for b in barriers(shot) if b.t0 >= act.t1 - 1e-12]
        if nxt:
            rep["barrier"] = min(nxt, key=lambda b: b.t0)
    return PushPrediction(**rep)


@dataclass(frozen=True, eq=False)
class Component:
    """The atoms of one state that took one set of displacements: state, fraction of the atoms,
    displacements (n_cases, 3) m from the trap centre (gravity not included), parts ((label, known_sign,
    vector for the + sign, column in `signs` or None), ...), velocities (n_cases, 3) m/s the forces gave
    (gravity not included; after a force confined by a trap, the kick's speed: an upper bound); split
    ((side, barrier block), ...): the barrier sheets this part met, in time order, side "transmitted" or
    "reflected" (seqgen.predict.split; empty when no sheet split it)."""

    state: tuple | None
    fraction: float
    displacements: np.ndarray
    parts: tuple
    velocities: np.ndarray | None = None
    split: tuple = ()


@dataclass(frozen=True, eq=False)
class Components:
    """Where the populated states are at an image: components, unknown (labels of forces of unknown sign),
    empty ((state, fraction) below the detection floor), signs ((n_cases, n_unknown) signs of each case, or
    None when the cases are the corners of a bounding box)."""

    components: tuple
    unknown: tuple
    empty: tuple
    signs: np.ndarray | None


def _kick(acc, t0, t1, t):
    """Velocity at t of an atom at rest accelerated uniformly by `acc` (3,) from t0 to t1 (textbook kinematics)."""
    return np.asarray(acc, dtype=float) * min(max(t - t0, 0.0), t1 - t0)


def _force_parts(shot, t, paths):
    """Per push / separation before t: (label, known_sign, displacements (n_paths, 3), velocities (n_paths, 3))
    of each path at time t."""
    from ..physics.kinematics import pulse_displacement
    from ..physics.zeeman import magnetic_moment

    sp = species(shot)
    b = bias(shot)
    parts = []
    for act in sorted((a for a in shot.actions("push", "separate") if a.t0 < t), key=lambda a: a.t0):
        label = f"{act.kind} '{act.block}'"
        if "coil" in act.args:
            coil = shot.rig.coils.get(act.args["coil"])
            if coil is None:
                continue
            grows = unit(coil.field_grows_along) if coil.field_grows_along is not None else None
            way = grows if grows is not None else unit(coil.axis)
            if way is None:
                continue
            grad = abs(played_gradient(shot, act))
            disp, vel = [], []
            for _, ch in paths:
                st = state_at(ch, act.t0)
                try:
                    mu = float(magnetic_moment(st[0], st[1], b, atom=sp)) if st is not None else 0.0
                except ValueError:
                    mu = 0.0
                # force = moment x grad|B|, with grad|B| = |b'| x (where |B| grows): mu > 0 goes that way
                acc = mu * grad / sp.mass_kg
                disp.append(_confined(shot, sp, act, t, pulse_displacement(acc * way, act.t0, act.t1, t),
                                      abs(acc) * (act.t1 - act.t0)))
                vel.append(_kick(acc * way, act.t0, act.t1, t))
            if any(np.any(d != 0) for d in disp):
                parts.append((label + f" ({coil.name})", grows is not None, np.array(disp, dtype=float).reshape(-1, 3),
                              np.array(vel, dtype=float).reshape(-1, 3)))
        else:
            rep = push_analysis(shot, act)
            if not rep or rep.direction is None or not rep.velocity:
                continue
            acc = rep.velocity / max(act.t1 - act.t0, 1e-300) * np.asarray(rep.direction, dtype=float)
            d = _confined(shot, sp, act, t, pulse_displacement(acc, act.t0, act.t1, t), abs(rep.velocity))
            parts.append((label + f" (beam {rep.beam})", True, np.tile(np.asarray(d, dtype=float), (len(paths), 1)),
                          np.tile(_kick(acc, act.t0, act.t1, t), (len(paths), 1))))
    return parts


def _confined(shot, sp, act, t, disp, speed):
    """The free-flight displacement `disp` at t of a force that ends while an optical trap still holds the atoms
    (a release follows before t), bounded by what the trap allows: an oscillation of amplitude at most v / omega
    along the trap's weakest axis (harmonic motion, textbook), then free flight from the release at no more
    than the kick's speed v. Unchanged when the kick's energy exceeds the trap's depth (the atoms leave it)."""
    d = np.asarray(disp, dtype=float)
    bound = confinement_bound(shot, sp, act, t, speed)
    if bound is None:
        return d
    n = float(np.linalg.norm(d))
    return d * (bound / n) if n > bound else d


def confinement_bound(shot, sp, act, t, speed) -> float | None:
    """The largest displacement (m) at t of atoms given speed v by the force `act` while an optical trap still
    holds them (see `_confined`): v / omega_min + v (t - release); None when no trap holds them after the force
    or no release follows before t (free flight then)."""
    releases = [a.t0 for a in shot.actions("release") if act.t1 <= a.t0 < t]
    if not releases or speed <= 0:
        return None
    beams = gaussian_beams(shot, [act.t1])[0]
    if not beams:
        return None
    trap = held(sp, tuple(beams))
    depth, omegas = trap.depth, trap.omegas
    if omegas is None or not depth > 0.5 * sp.mass_kg * speed ** 2:
        return None
    return speed / float(np.min(omegas)) + speed * (t - min(releases))


@dataclass(frozen=True, eq=False)
class Motion:
    """Where the forces before t put each path of `populations` at t: cases (n_cases, n_paths, 3) displacements
    (m, gravity not included), speeds (n_cases, n_paths, 3) velocities (m/s), slots (per path: (label,
    known_sign, vector for the + sign, column in `signs` or None), ...), unknown (labels of forces of unknown
    sign), signs (as in Components)."""

    cases: np.ndarray
    speeds: np.ndarray
    slots: tuple
    unknown: tuple
    signs: np.ndarray | None


def motion_at(shot, t, paths) -> Motion:
    """The displacements and velocities at time t of every path ((fraction, changes), ...) for every
    combination of the unknown signs (see `components_at`)."""
    from itertools import product

    forces = _force_parts(shot, t, paths)
    parts = [(label, known, disp) for label, known, disp, _ in forces]
    base = np.zeros((len(paths), 3))
    base_v = np.zeros((len(paths), 3))
    unknown, unknown_v = [], []
    for label, known, disp, vel in forces:
        if known:
            base += disp
            base_v += vel
        else:
            unknown.append((label, disp))
            unknown_v.append(vel)
    n_unk = len(unknown)
    signs = None
    if n_unk <= MAX_UNKNOWN_SIGNS:
        signs = np.array(list(product((1.0, -1.0), repeat=n_unk)), dtype=float).reshape(2 ** n_unk, n_unk)
        stack = np.array([d for _, d in unknown], dtype=float).reshape(n_unk, len(paths), 3)
        cases = base[None] + np.einsum("cu,upk->cpk", signs, stack)  # (n_cases, n_paths, 3)
        speeds = base_v[None] + np.einsum("cu,upk->cpk", signs, np.array(unknown_v, dtype=float).reshape(n_unk, len(paths), 3))
    else:  # the corners of the box that holds every combination
        reach = np.sum(np.abs([d for _, d in unknown]), axis=0)  # (n_paths, 3)
        corners = np.array(list(product((1.0, -1.0), repeat=3)))
        cases = base[None] + corners[:, None, :] * reach[None]
        speeds = base_v[None] + corners[:, None, :] * np.sum(np.abs(unknown_v), axis=0)[None]
    slots = []
    for k in range(len(paths)):
        row, j = [], 0
        for label, known, disp in parts:  # which column of `signs` an unknown sign is
            row.append((label, known, disp[k], None if known else j))
            j += 0 if known else 1
        slots.append(tuple(row))
    return Motion(cases, speeds, tuple(slots), tuple(label for label, _ in unknown), signs)


def gather(shot, rows, pop, motion: Motion) -> Components:
    """Components from rows dict(state, fraction, displacements, velocities, parts, split): rows of one state
    and one split with the same displacements merged, those below the detection floor listed as empty."""
    comps: list = []
    empty: dict = {}
    for r in rows:
        for c in comps:
            if (c["state"] == r["state"] and c["split"] == r["split"]
                    and np.allclose(c["displacements"], r["displacements"], rtol=0, atol=1e-12)):
                c["fraction"] += r["fraction"]
                break
        else:
            comps.append(dict(r))
    # the detection floor is a state's: a state below it is empty; a faint part (split by a barrier) of a state
    # above it is left out silently, neither drawn nor judged nor called empty
    totals: dict = {}
    for c in comps:
        totals[c["state"]] = totals.get(c["state"], 0.0) + c["fraction"]
    seen = {c["state"] for c in comps if pop is None or is_populated(shot, c["fraction"])}
    kept = []
    for c in sorted(comps, key=lambda c: -c["fraction"]):
        if pop is None or is_populated(shot, c["fraction"]):
            kept.append(c)
        elif not is_populated(shot, totals[c["state"]]):
            empty[c["state"]] = empty.get(c["state"], 0.0) + c["fraction"]
        elif c["state"] not in seen:  # every part faint, the state not: its parts are kept
            kept.append(c)
    kept = tuple(Component(c["state"], c["fraction"], c["displacements"], tuple(c["parts"]), c["velocities"],
                           tuple(c["split"])) for c in kept)
    return Components(kept, motion.unknown, tuple(sorted(empty.items())), motion.signs)


@per_shot_cache(lambda shot, img: ("state-components", img.index, img.t0))
def components_at(shot, img) -> Components | None:
    """Where the atoms of each populated state are at an image, from the pushes and separations before it.

    dict(components=[dict(state, fraction, displacements (n_cases, 3) m, velocities (n_cases, 3) m/s,
    parts=[(label, known_sign, vector for the + sign, column in `signs` or None)])], unknown=[labels of forces whose sign is unknown], signs=(n_cases,
    n_unknown) array of the signs of each case (None when the cases are the corners of a bounding box),
    empty=[(state, fraction) of states below the floor]).
    Displacements are from the atoms' place before the first force (the trap centre, the rig's origin), for
    every combination of the unknown signs (a coil without `field_grows_along` pushes along its `axis`, either
    way); gravity is not included. Each force: uniform acceleration moment x |b'| / m (moment -dE/dB of the
    state the path is in when the force starts, Breit-Rabi at the rig's bias) or the optical push's velocity
    over its duration, then free flight until the image; when an optical trap still holds the atoms after
    the force (and the kick's energy is below its depth), the displacement is bounded by an oscillation of
    amplitude v / omega_min and free flight at v after the release (`_confined`). Either way an upper bound. Paths that end in the same state with the
    same displacement are merged. A barrier sheet does not split them here (seqgen.predict.split does). None
    without a species."""
    if species(shot) is None:
        return None
    pop = populations(shot, img.t0)
    paths = pop.paths if pop is not None else [(1.0, ((-math.inf, None),))]
    motion = motion_at(shot, img.t0, paths)
    rows = [dict(state=state_at(ch, img.t0), fraction=f, displacements=motion.cases[:, k, :], parts=motion.slots[k],
                 velocities=motion.speeds[:, k, :], split=()) for k, (f, ch) in enumerate(paths)]
    return gather(shot, rows, pop, motion)
