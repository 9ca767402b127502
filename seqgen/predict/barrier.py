"""Predictions of `barrier` actions: transmission of the kicked cloud through
a thin repulsive light sheet, and the spin rotation that an intensity-modulated
sheet drives in the atoms that cross it.

The model, in one place (one cached analysis per barrier action; the rules of
seqgen.check.physics_barrier read it):

* Incident velocity: from the last `push` before the barrier, through the
  push model of `seqgen.predict.pushes.push_analysis`: a magnetic push gives
  v = moment b' tau / m with the moment -dE/dB of the sample state from the
  Breit-Rabi formula at the rig's bias field (force = moment x gradient of
  |B|, the package-wide sign of `seqgen.physics`); only the speed is used,
  the direction is reported. An optical push, or a state without a usable
  moment (mF = 0), falls back to the push's `expect_velocity`.
  A push that sends the atoms away from the barrier (the push's direction
  against the barrier beam's `position` in the rig, the atoms starting at the
  rig's origin) gives no incident velocity: the atoms never arrive, and
  `physics.push-away-from-barrier` says so; the barrier checks stay silent.
* The cloud along the path, from the trap just before the push (trap
  frequencies from `sample.trap_frequencies`, else from the rig's trap beams
  then on): a condensate has the Thomas-Fermi radius R along the path, line
  density (15/16R)(1 - x^2/R^2)^2 and sigma_v = 1.602 hbar/(m R)
  (`seqgen.physics.scattering.condensate_velocity_rms`); a thermal cloud is
  Gaussian with rms width sqrt(k_B T/(m omega^2)) along the path (edge at 2.5
  rms) and sigma_v = sqrt(k_B T / m).
* Passage: the barrier plane lies d = position . direction from the atoms
  along the path; every atom starts at its place x0 in the cloud with its own
  velocity offset u, moves with the push (uniform acceleration over the push,
  then at the pushed speed) plus u t, and has crossed the sheet once
  x0 + s(t) + u t passes d + w_y. `physics.cloud-overlaps-barrier` warns when
  the cloud's edge already reaches the sheet at the push,
  `physics.barrier-too-short` when more than 10 % of the cloud crosses the
  sheet only after it is off, `physics.barrier-too-late` when more than 10 %
  reaches its near edge (d - w_y) before it is on: the transmission below
  assumes that every atom meets the sheet, coming from one side.
* Barrier: V(x) = V0 exp(-2 x^2 / w_y^2) along the path, V0 = (U/I) 2P/(pi w w_y)
  with U/I the D1 + D2 light shift per intensity of the species at the beam's
  wavelength (Adv. At. Mol. Opt. Phys. 42, 95 (2000)); `power` is the
  time-averaged power (intensities from `seqgen.physics.optical.peak_intensity`
  and `modulated_peak_intensity`, shared with `seqgen.predict.states`).
  Single-particle, stationary 1D scattering (the finite length of the pulse
  is not included), averaged over a Gaussian velocity distribution of the
  same rms with Gauss-Hermite quadrature.
* Mean-field release (a condensate): the push starts the release; the
  interaction energy, (2/7) mu per atom (Rev. Mod. Phys. 71, 463 (1999)),
  turns into kinetic energy as the cloud expands by the scaling solution of
  Phys. Rev. Lett. 77, 5315 (1996) (`seqgen.physics.barrier.scaling_release`),
  in the trap beams still on during the flight (piecewise constant between
  their writes, frequencies projected on the held trap's axes; none: a free
  release, as with `sample.trap_frequencies`). An atom at x_i moves at
  x_i b_i'(t): the velocities form the Thomas-Fermi ellipsoid with
  half-widths R_i b_i'(t), read when the cloud's centre reaches the sheet.
  Projected on the path it is (1 - u^2/S^2)^2, rms S/sqrt(7); that rms adds
  in quadrature to the in-trap width above. The passage uses the cloud's
  length along the path scaled the same way. A radially held guide keeps
  feeding its radial energy into the path in the scaling (Thomas-Fermi)
  picture: an upper bound, the radial zero-point energy is not kept.
* Drive inside the barrier: an intensity modulation at `modulation.frequency`
  with depth eps makes a co-propagating Raman pair that couples |F, m> to the
  other hyperfine level at equal m; the Rabi frequency follows the local
  intensity, Omega(x) = Omega_peak exp(-2 x^2 / w_y^2), with Omega_peak from
  `seqgen.physics.drive.two_photon_rabi_from_modulated_beam` (vector light
  shift, Adv. At. Mol. Opt. Phys. 42, 95 (2000)). The rig file does not state
  the sheet's polarisation, so seqgen takes circular light (the largest
  coupling): a warning that the drive is too strong is then conservative. The
  partner level sees V(x) plus the differential light shift and, in the frame
  rotating with the modulation, the internal offset h (f_0 - f_mod) (f_0 from
  the Breit-Rabi formula at the rig's bias field). The two-component
  stationary solver gives the transmitted spinor; the rotation angle is the
  angle between the incident and the transmitted Bloch vectors (Larmor clock,
  Phys. Rev. B 27, 6178 (1983)), averaged over the momentum distribution with
  the transmitted probability as weight.
"""
from __future__ import annotations

import functools
import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from ..physics.barrier import (PROJECTED_RMS_PER_HALF_WIDTH, barrier_height, free_flight_rotation, gaussian_profile,
                               projected_half_width, released_energy_per_atom, scaling_release, sheet_grid,
                               spin_rotation, transmitted_weighted_mean)
from ..physics.passage import fraction_reached, path_frequency, time_to_fraction
from ..values import value_at
from .cache import per_shot_cache
from .pushes import push_analysis
from .states import barrier_played
from .species import (BAD_DEPTH, G_N, NO_PARTNER, LevelProblem, gaussian_beams, level_problem, sample_state,
                      scattering_length, species, trap_before, trap_beams, unevaluable)

DEFAULT_DETECTION_FLOOR = 100.0  # atoms per component in one image (common practice, no source)
N_VELOCITIES = 24  # Gauss-Hermite nodes of the velocity average
# beyond |delta| w_y / v = 20 the transit-time Fourier factor of a Gaussian
# coupling, exp(-(delta w_y / v)^2 / 8), is below 1e-21: no transfer at all
FAR_OFF_RESONANCE = 20.0
THERMAL_EDGE_RMS = 2.5  # a thermal cloud's edge along the path: 2.5 rms widths, 98.8 % of it (common practice, no source)
HINT_FRACTION = 0.01  # the passage times aim at 1 % of the cloud missed
MISSED_FRACTION = 0.10  # a barrier may miss at most 10 % of the cloud (common practice, no source)
RELEASE_HORIZON_S = 0.1  # the scaling solution is integrated at least this far, if the sheet is on that long


@dataclass(frozen=True)
class Incident:
    """The atoms' velocity towards a barrier: speed (m/s), signed (> 0: pushed towards stronger field),
    direction (unit vector of the push, or the coil axis / beam direction when its sense is unknown),
    known_direction, the push action; source "push" (coil, state (F, mF), moment -dE/dB, push_direction
    when known) or "expect_velocity" (the push's declared velocity)."""

    speed: float
    signed: float
    direction: tuple
    known_direction: bool
    push: object
    source: str
    coil: str | None = None
    state: tuple | None = None
    moment: float | None = None
    push_direction: tuple | None = None


# why a sample declared condensed is taken as thermal along the path (CloudAlongPath.stand_in)
NO_SCATTERING_LENGTH, NO_ATOM_NUMBER, NO_TRAP_ALONG_PATH = "no_scattering_length", "no_atom_number", "no_trap"


@dataclass(frozen=True)
class CloudAlongPath:
    """The sample along the path: sigma_v (m/s), profile ("thomas-fermi", "gaussian" or "point"), size
    (Thomas-Fermi radius or rms width, m; 0 when unknown), half_length (the edge, m, or None), temperature_k
    (a thermal cloud's temperature, else None); stand_in: why a sample declared condensed is not a
    Thomas-Fermi condensate here (one of the codes above, None otherwise), state: "K41 |F=1, mF=+1>" of it."""

    sigma_v: float
    profile: str
    size: float
    half_length: float | None
    temperature_k: float | None = None
    stand_in: str | None = None
    state: str | None = None


@dataclass(frozen=True)
class MeanFieldRelease:
    """A condensate's interaction energy released from the push on (see the module notes): mu (J), released
    (2/7 mu per atom, J), read_at (s after the push starts: the cloud's centre at the sheet), half_width S
    (m/s) of the velocity profile along the path, sigma_v = S/sqrt(7) (m/s), path_energy m sigma_v^2 / 2 (J),
    held (names of the trap beams on during the flight; empty: free release), path_scale (the cloud's
    length along the path over its length at the push, at read_at)."""

    mu: float
    released: float
    read_at: float
    half_width: float
    sigma_v: float
    path_energy: float
    held: tuple
    path_scale: float


@dataclass(frozen=True)
class Passage:
    """The cloud against the sheet, times from the push's start: distance (m) of the sheet along the path,
    the cloud's edge (m or None), on / off (s), push_t0, overlap at the push, early (fraction at the near
    edge before the sheet is on), late (fraction across the far edge only after it is off), need_off /
    need_on (s: 99 % across / 1 % arrived), centre_arrival (s)."""

    distance: float
    edge: float | None
    on: float
    off: float
    push_t0: float
    overlap: bool
    early: float
    late: float
    need_off: float
    need_on: float
    centre_arrival: float
    cross_by: float = math.inf
    image_at: float | None = None
    image: object = None
    fall: float = 0.0  # m: how far the cloud has fallen when its centre arrives (released from every trap before)
    released_at: float | None = None  # s after the push's start: the release it falls from
    sheet_height: float = math.inf  # m: the sheet's 1/e^2 half-size along the vertical

    @property
    def reached(self) -> bool:
        """The cloud's centre reaches the sheet before the first image after the push (or there is none)."""
        return self.image_at is None or self.centre_arrival <= self.image_at

    @property
    def below(self) -> bool:
        """The cloud has fallen out of the sheet (more than its 1/e^2 half-height) when its centre arrives."""
        return self.fall > self.sheet_height


@dataclass(frozen=True)
class InBarrierDrive:
    """The modulated sheet's coupling of the sample state (initial) to its partner. unsupported: why there is
    none ("not_in_transition", "changes_mf", "no_coupling" with `problem`, a species.LevelProblem); else rabi_peak (rad/s), the
    partner's light shift and rotating-frame offset (J), the bare line (Hz), the modulation's detuning from
    it (Hz), assumed_resonant (no modulation frequency), far_off (no transfer in the transit time)."""

    initial: tuple
    partner: tuple | None
    depth: float
    unsupported: str | None = None
    problem: LevelProblem | None = None
    rabi_peak: float | None = None
    transition_hz: float | None = None
    detuning_hz: float | None = None
    shift_j: float | None = None
    offset_j: float | None = None
    light_shift_hz: float | None = None
    assumed_resonant: bool = False
    far_off: bool = False


@dataclass(frozen=True)
class BarrierPrediction:
    """One barrier action (see the module notes): incident speed and its spread, V0 (J), mean kinetic energy
    E_mean (J), waist_y (m), expect, transmission T and its spread, the cloud along the path, the passage,
    the in-barrier drive and rotation (rad), atom numbers N_T / N_R and the detection floor. sigma_v is the
    whole spread along the path: the cloud's in-trap width and the mean-field `release` in quadrature.
    precession / alignment (rad): the transmitted spin's rotation about the coupling axis and towards it
    (Phys. Rev. B 27, 6178 (1983)), and their Larmor-clock times (angle / peak Rabi frequency, s), each
    averaged with the transmitted probability as weight."""

    speed: float
    signed: float
    incident: Incident
    sigma_v: float
    V0: float
    E_mean: float
    waist_y: float
    expect: str
    cloud: CloudAlongPath
    passage: Passage
    drive: InBarrierDrive | None
    T: float
    T_spread: float
    floor: float
    attractive: bool = False
    opaque: str | None = None
    free_flight_rotation: float | None = None
    rotation: float | None = None
    rotation_spread: float | None = None
    N_T: float | None = None
    N_R: float | None = None
    release: MeanFieldRelease | None = None
    precession: float | None = None
    alignment: float | None = None
    precession_time: float | None = None
    alignment_time: float | None = None


def _last_push(shot, act):
    pushes = [a for a in shot.actions("push") if a.t0 <= act.t0]
    return pushes[-1] if pushes else None


def _unit(v):
    a = np.asarray(v, dtype=float)
    n = float(np.linalg.norm(a))
    return a / n if n > 0 and math.isfinite(n) else None


def incident_velocity(shot, act) -> Incident | None:
    """The atoms' velocity towards the barrier action, or None.

    One push model for every rule: `pushes.push_analysis` (moment
    -dE/dB from the Breit-Rabi formula at the rig's bias field). `signed` > 0:
    pushed towards stronger field. A push that gives the state no force
    (mF = 0, or |moment| below the push checks' threshold) or an optical push
    falls back to the push's `expect_velocity` when it gives one. None when
    the push has a direction (`push_analysis(...).direction`) that leads
    away from the barrier beam's rig `position` (the atoms start at the rig's
    origin): the atoms never arrive (physics.push-away-from-barrier)."""
    push = _last_push(shot, act)
    if species(shot) is None or push is None:
        return None
    args = push.args
    rep = push_analysis(shot, push)
    direction = rep.direction if rep else None
    known = direction is not None
    if direction is None:
        direction = shot.rig.coils[args["coil"]].axis if "coil" in args else shot.rig.beams[args["beam"]].direction
    beam = shot.rig.beams.get(act.args.get("beam"))
    if known and beam is not None:
        where = np.asarray(beam.position_m, dtype=float)
        dist = float(np.linalg.norm(where))
        if dist > 0 and math.isfinite(dist) and float(np.dot(direction, where)) < 0:
            return None  # pushed away from the sheet: it meets no atoms
    if rep and rep.kind == "magnetic" and not rep.no_force and rep.velocity != 0:
        signed = rep.velocity
        return Incident(abs(signed), signed, direction, known, push, "push", args["coil"],
                        (shot.sample.F, shot.sample.mF), rep.moment, rep.direction)
    if args.get("expect_velocity"):
        v = float(args["expect_velocity"])
        return Incident(abs(v), v, direction, known, push, "expect_velocity")
    return None


def _beam_trap(sp, beams):
    """(omegas, principal axes as columns) of the trap of these beams, or (None, None)."""
    from ..physics.optical import find_trap_minimum

    if not beams:
        return None, None
    try:
        m = find_trap_minimum(sp, beams)
    except (ValueError, RuntimeError, np.linalg.LinAlgError):
        return None, None
    w = np.asarray(m.omegas_rad_s, dtype=float)
    return (w, np.asarray(m.axes, dtype=float)) if np.all(np.isfinite(w)) and np.all(w > 0) else (None, None)


def _trap_at(shot, time_s):
    """(omegas, axes or None for the lab frame) of the sample's trap at `time_s`: `sample.trap_frequencies`,
    else the rig's trap beams on then; (None, None) when there is none."""
    s = shot.sample
    if s.trap_frequencies_hz:
        w = 2 * np.pi * np.asarray(s.trap_frequencies_hz, dtype=float)
        return (w, None) if np.all(np.isfinite(w)) and np.all(w > 0) else (None, None)
    return _beam_trap(species(shot), gaussian_beams(shot, [time_s])[0])


def _chemical_potential(shot, omegas):
    """Thomas-Fermi mu (J) of the sample's condensate in a trap of these frequencies, or None."""
    from ..physics.expansion import thomas_fermi

    sp, s = species(shot), shot.sample
    a = scattering_length(sp, sample_state(shot))
    if not (a and a > 0 and s.atoms):
        return None
    return thomas_fermi(s.atoms, sp.mass_kg, a, omegas)[0]


def cloud_along_path(shot, time_s, direction) -> CloudAlongPath:
    """The sample along the unit `direction` in the trap at `time_s`:

    sigma_v (m/s), profile ("thomas-fermi", "gaussian" or "point"), size (Thomas-Fermi radius or
    rms width, m; 0 when unknown) and half_length (the edge: R, or THERMAL_EDGE_RMS rms widths; None
    when unknown). Trap frequencies from `sample.trap_frequencies`, else from the rig's trap beams on at
    `time_s`."""
    from ..physics.expansion import thermal_in_trap_width
    from ..physics.scattering import condensate_velocity_rms, thermal_velocity_rms

    sp = species(shot)
    s = shot.sample
    omegas, axes = _trap_at(shot, time_s)
    w_path = None
    if omegas is not None:
        w_path = path_frequency(omegas, axes, direction)
    why = None
    if s.condensed and s.atoms and w_path:
        mu = _chemical_potential(shot, omegas)
        if mu is not None:
            radius = math.sqrt(2 * mu / (sp.mass_kg * w_path**2))
            return CloudAlongPath(float(condensate_velocity_rms(radius, sp.mass_kg)), "thomas-fermi", radius, radius)
    if s.condensed:  # declared a condensate, but no Thomas-Fermi profile here: say why
        a = scattering_length(sp, sample_state(shot))
        why = (NO_ATOM_NUMBER if not s.atoms else NO_SCATTERING_LENGTH if not (a and a > 0)
               else NO_TRAP_ALONG_PATH)
    named = dict(stand_in=why, state=f"{sp.name} |F={s.F}, mF={s.mF:+d}>" if why and s.F is not None and s.mF is not None
                 else sp.name if why else None)
    if s.temperature_k:
        sigma_v = float(thermal_velocity_rms(s.temperature_k, sp.mass_kg))
        if w_path:
            width = float(thermal_in_trap_width(s.temperature_k, sp.mass_kg, w_path))
            return CloudAlongPath(sigma_v, "gaussian", width, THERMAL_EDGE_RMS * width, s.temperature_k, **named)
        return CloudAlongPath(sigma_v, "point", 0.0, None, s.temperature_k, **named)
    return CloudAlongPath(0.0, "point", 0.0, None, **named)


def sheet_distance(shot, act, inc) -> float:
    """Distance (m) of the barrier plane from the atoms along the path."""
    beam = shot.rig.beams[act.args["beam"]]
    d = float(np.dot(np.asarray(beam.position_m, dtype=float), _unit(inc.direction)))
    return d if inc.known_direction else abs(d)  # the push's sense unknown: take it towards the sheet


def _trap_beam_writes(shot, t0, t1):
    """Times in (t0, t1) at which a trap beam's power is written (the flight's piecewise-constant traps)."""
    channels = {b.power_channel for b in trap_beams(shot)}
    cuts = {t for seg in shot.segments if seg.output in channels for t in (seg.t0, seg.t1) if t0 < t < t1}
    return sorted(cuts)


@functools.lru_cache(maxsize=256)
def release_by_content(omegas, pieces, t_end):
    """`scaling_release` keyed on content: the shots of a scan that share the trap and the push (a time-of-flight
    scan) share the integration."""
    return scaling_release(np.array(omegas), [(t, np.array(w)) for t, w in pieces], t_end)


def mean_field_release(shot, push, direction, read_at, until):
    """(MeanFieldRelease, the cloud's path-length scale as a function of the time after the push starts) of a
    condensate released as the push starts (module notes), or (None, None) for a cloud without mean field."""
    s, sp = shot.sample, species(shot)
    if not (s.condensed and s.atoms):
        return None, None
    omegas, axes = _trap_at(shot, trap_before(shot, push.t0))
    mu = _chemical_potential(shot, omegas) if omegas is not None else None
    if mu is None:
        return None, None
    a = np.eye(3) if axes is None else axes
    radii = np.sqrt(2 * mu / (sp.mass_kg * omegas**2))
    cosines = a.T @ _unit(direction)
    # solved up to the sheet's end (at most twice the arrival, or 0.1 s); straight-line flight beyond
    t_end = max(min(until, max(2.0 * read_at, RELEASE_HORIZON_S)), read_at, 1e-6)
    pieces, held, cache = [], set(), {}
    starts = [0.0] + [t - push.t0 for t in _trap_beam_writes(shot, push.t0, push.t0 + t_end)]
    for k, t0 in enumerate(starts):
        t1 = starts[k + 1] if k + 1 < len(starts) else t_end
        wsq = np.zeros(3)
        if not s.trap_frequencies_hz:
            beams = tuple(gaussian_beams(shot, [push.t0 + 0.5 * (t0 + t1)])[0])
            if beams not in cache:
                cache[beams] = _beam_trap(sp, list(beams))
            w1, a1 = cache[beams]
            if w1 is not None:
                # curvature of the trap now along the held trap's axes: a_i . K a_i / m
                wsq = np.einsum("ji,jk,k,lk,li->i", a, a1, w1**2, a1, a)
                held.update(b.name for b in _named_trap_beams(shot, push.t0 + 0.5 * (t0 + t1)))
        pieces.append((t0, wsq))
    sol = release_by_content(tuple(np.ravel(omegas).tolist()),
                             tuple((float(t), tuple(np.ravel(w).tolist())) for t, w in pieces), float(t_end))
    length0 = projected_half_width(radii, cosines)

    def scale(t):
        b, _ = sol.at(t)
        return np.array([projected_half_width(radii * b[:, i], cosines) / length0 for i in range(b.shape[1])])

    _, b_dot = sol.at(read_at)
    half = projected_half_width(radii * b_dot[:, 0], cosines)
    sigma = half * PROJECTED_RMS_PER_HALF_WIDTH
    return MeanFieldRelease(mu, released_energy_per_atom(mu), read_at, half, sigma, 0.5 * sp.mass_kg * sigma**2,
                            tuple(sorted(held)), float(scale(read_at)[0])), scale


def _named_trap_beams(shot, t):
    return [b for b in trap_beams(shot) if value_at(shot, b.power_channel, [t])[0] > 0]


def _time_to(fraction, distance, speed, tau, sigma_v, profile, size, scale):
    """`passage.time_to_fraction` for a cloud whose length along the path grows as scale(t)."""
    grow = None if scale is None else (lambda t: scale(t)[0])
    return time_to_fraction(fraction, distance, speed, tau, sigma_v, profile, size, grow)


def _first_image(shot, t0):
    """The first image action that starts at or after t0, or None."""
    later = [a for a in shot.actions("image") if a.t0 >= t0 - 1e-12]
    return min(later, key=lambda a: a.t0) if later else None


def passage(shot, act, inc, cloud, waist_y, scale=None) -> Passage:
    """Where the cloud is against the sheet: the distance d along the path, the cloud's edge,
    whether they overlap at the push, and the fractions that reach the near edge d - w_y before the
    barrier is on and cross the far edge d + w_y only after it is off (times from the push's start).
    `scale(t)`: the cloud's length along the path over its length at the push (a released condensate)."""
    push = inc.push
    d = sheet_distance(shot, act, inc)
    tau = float(push.args["duration"])
    on, off = act.t0 - push.t0, act.t1 - push.t0

    def size(t):
        return cloud.size * (float(scale(t)[0]) if scale is not None else 1.0)

    out = dict(distance=d, edge=cloud.half_length, on=on, off=off, push_t0=push.t0,
               overlap=cloud.half_length is not None and cloud.half_length + waist_y >= d)
    base = (inc.speed, tau, cloud.sigma_v, cloud.profile)
    out["early"] = float(fraction_reached(on, d - waist_y, *base, size(on)))
    out["late"] = 1.0 - float(fraction_reached(off, d + waist_y, *base, size(off)))
    out["need_off"] = _time_to(1.0 - HINT_FRACTION, d + waist_y, *base, cloud.size, scale)
    out["need_on"] = _time_to(HINT_FRACTION, d - waist_y, *base, cloud.size, scale)
    out["centre_arrival"] = centre_arrival(d, inc.speed, tau)
    # the fraction that sets physics.barrier-too-short also sets its fix: the smallest change that silences it
    # (a 0.5 % margin: a longer sheet changes the release integrated up to its end, and the printed rounding)
    out["cross_by"] = _time_to(1.0 - 0.95 * MISSED_FRACTION, d + waist_y, *base, cloud.size, scale)
    img = _first_image(shot, push.t0)
    if img is not None:
        out.update(image=img, image_at=img.t0 - push.t0)
    out.update(_fall_at_sheet(shot, act, inc, out["centre_arrival"]))
    return Passage(**out)


def _fall_at_sheet(shot, act, inc, arrival: float) -> dict:
    """fall, released_at and sheet_height of Passage: a release after the push that leaves no trap beam on
    lets the cloud fall freely (g t^2 / 2) until its centre reaches the sheet; the sheet's intensity falls off
    across its wide waist w (1/e^2), along q = beam direction x push direction, so atoms that have fallen by dz
    are |dz q_z| from its middle."""
    beam = shot.rig.beams.get(act.args["beam"])
    p, d = _unit(inc.direction), _unit(beam.direction) if beam is not None else None
    if p is None or d is None or not beam.waist_m or not math.isfinite(arrival):
        return {}
    q = np.cross(d, p)
    qz = abs(float(q[2])) / max(float(np.linalg.norm(q)), 1e-300)
    height = beam.waist_m / qz if qz > 1e-9 else math.inf
    hit = inc.push.t0 + arrival
    for rel in sorted(a.t0 for a in shot.actions("release") if inc.push.t0 <= a.t0 < hit):
        if not gaussian_beams(shot, [0.5 * (rel + hit)])[0]:  # nothing holds the atoms after it
            dt = hit - rel
            return dict(fall=0.5 * G_N * dt * dt, released_at=rel - inc.push.t0, sheet_height=height)
    return dict(sheet_height=height)


def centre_arrival(distance, speed, tau) -> float:
    """Time (s after the push starts) at which the cloud's centre reaches `distance` along the path."""
    return time_to_fraction(0.5, distance, speed, tau, 0.0, "point", 0.0)


def _partner(shot, act):
    """(initial (F, mF), partner (F, mF) or None) of the in-barrier drive.

    The initial level is the sample state; the partner is the other state of
    the modulation's `transition`, or by default the other hyperfine level at
    equal mF."""
    s = shot.sample
    initial = (s.F, s.mF)
    tr = act.args.get("transition")
    if tr and len(tr) == 2:
        a, b = (tuple(t) for t in tr)
        if initial == a:
            return initial, b
        if initial == b:
            return initial, a
        return initial, None
    i = species(shot).nuclear_spin
    other = i + 0.5 if abs(s.F - (i - 0.5)) < 1e-9 else i - 0.5
    return initial, (int(round(other)), s.mF)


def _drive_model(shot, act, sp, beam, waist_y, speed, f_mod, eps, power) -> InBarrierDrive | None:
    """In-barrier coupling: rabi_peak, partner offset / shift, detuning, or why it is absent; `f_mod`, `eps` and
    `power` as the hardware plays them (`states.barrier_played`)."""
    from ..physics.drive import two_photon_rabi_from_modulated_beam
    from ..physics.optical import modulated_peak_intensity
    from ..physics.zeeman import transition_frequency

    if not act.args.get("mod_depth") or not eps or shot.sample.F is None or shot.sample.mF is None:
        return None
    initial, partner = _partner(shot, act)
    out = dict(initial=initial, partner=partner, depth=float(eps))
    if partner is None:
        return InBarrierDrive(**out, unsupported="not_in_transition")
    if partner[1] != initial[1]:
        return InBarrierDrive(**out, unsupported="changes_mf")
    i = sp.nuclear_spin
    try:
        # the refusals of seqgen.physics (optical, drive, zeeman), in their order, as data
        problem = (LevelProblem(BAD_DEPTH, depth=float(eps)) if not 0 <= float(eps) <= 1
                   else LevelProblem(NO_PARTNER, None, initial[1], sp.name, i) if abs(float(initial[1])) > i - 0.5 + 1e-9
                   else level_problem(sp, *initial) or level_problem(sp, *partner))
        if problem:
            return InBarrierDrive(**out, unsupported="no_coupling", problem=problem)
        i_peak = float(modulated_peak_intensity(power, beam.waist_m, waist_y, eps))
        d = two_photon_rabi_from_modulated_beam(i_peak, eps, beam.wavelength_m, m_f=initial[1],
                                                polarization=1.0, atom=sp)
        f = float(transition_frequency(initial[0], initial[1], partner[0], partner[1], shot.rig.bias_field_t or 0.0,
                                       atom=sp))
    except (ValueError, TypeError) as exc:
        return InBarrierDrive(**out, unsupported="no_coupling", problem=unevaluable(sp, initial, exc))
    sign = 1.0 if f > 0 else -1.0
    detuning_hz = (f_mod - abs(f)) if f_mod else 0.0  # modulation above the bare line > 0
    # rotating frame: the partner's internal energy is h (f - sign(f) f_mod) = -sign(f) h detuning
    out.update(rabi_peak=d.rabi_rad_s, transition_hz=abs(f), detuning_hz=detuning_hz,
               shift_j=sign * d.differential_light_shift_j, offset_j=-sign * sc.h * detuning_hz,
               light_shift_hz=d.differential_light_shift_hz, assumed_resonant=not f_mod)
    # the local line moves from the bare one (outside) to bare + differential light shift (at the peak)
    lo, hi = detuning_hz, detuning_hz - d.differential_light_shift_hz
    nearest = 0.0 if lo * hi <= 0 else min(abs(lo), abs(hi))
    out["far_off"] = 2 * math.pi * nearest * waist_y / speed > FAR_OFF_RESONANCE
    return InBarrierDrive(**out)


@per_shot_cache(lambda shot, act: ("barrier", act.index, act.t0))
def analyse(shot, act) -> BarrierPrediction | None:
    """Cached analysis of one barrier action (see the module docstring), or None."""
    from ..physics.scattering import average_over_momentum, transmission

    sp = species(shot)
    beam = shot.rig.beams.get(act.args["beam"])
    if sp is None or shot.sample is None or beam is None or not beam.waist_m:
        return None
    waist_y = beam.waist_y_m or beam.waist_m
    inc = incident_velocity(shot, act)
    if inc is None or not inc.speed > 0 or _unit(inc.direction) is None:
        return None
    v = inc.speed
    cloud = cloud_along_path(shot, trap_before(shot, inc.push.t0), _unit(inc.direction))
    arrival = centre_arrival(sheet_distance(shot, act, inc), v, float(inc.push.args["duration"]))
    try:
        release, scale = mean_field_release(shot, inc.push, inc.direction, arrival if math.isfinite(arrival) else 0.0,
                                            act.t1 - inc.push.t0)
    except RuntimeError:  # the scaling equations did not integrate: the in-trap spread alone
        release, scale = None, None
    sigma = math.hypot(cloud.sigma_v, release.sigma_v) if release else cloud.sigma_v
    m = sp.mass_kg
    # the sheet as played (calibration, DAC codes, limits), not as written; its modulation likewise
    f_mod, eps, power, _ = barrier_played(shot, act)
    v0 = barrier_height(sp, beam.wavelength_m, power, beam.waist_m, waist_y)
    e_mean = 0.5 * m * (v**2 + sigma**2)
    rep = dict(speed=v, signed=inc.signed, incident=inc, sigma_v=sigma, release=release,
               V0=v0, E_mean=e_mean, waist_y=waist_y, expect=act.args.get("expect", "any"))
    if v0 <= 0:
        rep["attractive"] = True  # red-detuned sheet: a well, not a barrier
    rep["cloud"] = cloud
    rep["passage"] = passage(shot, act, inc, cloud, waist_y, scale)
    drive = _drive_model(shot, act, sp, beam, waist_y, v, f_mod, eps, power)
    rep["drive"] = drive
    v_max = v + 6.0 * sigma
    e_top = max(0.5 * m * v_max**2, abs(v0))
    if drive and drive.rabi_peak is not None and not drive.far_off:
        e_top += abs(drive.offset_j) + abs(drive.shift_j)
    x = sheet_grid(waist_y, math.sqrt(2 * m * e_top) / sc.hbar)
    profile = gaussian_profile(waist_y)
    tiny = 1e-6 * 0.5 * m * v**2  # a node at v ~ 0: keep the energy positive

    def scalar(energies):
        return transmission(x, lambda xx: v0 * profile(xx), np.maximum(energies, tiny), m).T

    try:
        avg = average_over_momentum(scalar, v, sigma, m, n_points=N_VELOCITIES)
    except ValueError as exc:  # barrier too opaque for double precision: nothing gets through
        avg = None
        rep["opaque"] = str(exc)
    # a probability: keep the quadrature's round-off (1 + 1e-16) out of the atom counts
    rep["T"] = min(max(float(avg.mean_transmission), 0.0), 1.0) if avg else 0.0
    rep["T_spread"] = avg.transmission_spread if avg else 0.0
    if drive and drive.rabi_peak is not None:
        rep["free_flight_rotation"] = free_flight_rotation(drive.rabi_peak, waist_y, v)
        none = dict(rotation=0.0, rotation_spread=0.0, precession=0.0, alignment=0.0, precession_time=0.0,
                    alignment_time=0.0)
        if drive.far_off or rep["T"] == 0.0:
            rep.update(none)
        else:
            seen = []

            def spinor(energies):
                r = spin_rotation(x, profile, v0, drive.rabi_peak, np.maximum(energies, tiny), m,
                                  partner_shift_j=drive.shift_j, partner_offset_j=drive.offset_j)
                seen.append(r)
                return r.probability, r.angle

            try:
                sav = average_over_momentum(spinor, v, sigma, m, n_points=N_VELOCITIES)
                rep["rotation"], rep["rotation_spread"] = sav.mean_rotation, sav.rotation_spread
                clock = seen[-1].clock
                for name, angles in (("precession", clock.precession_angle), ("alignment", clock.alignment_angle)):
                    rep[name] = transmitted_weighted_mean(sav.weights, clock.probability, angles)
                    rep[name + "_time"] = rep[name] / drive.rabi_peak
            except ValueError:  # the partner channel is closed and opaque: no transfer
                rep.update(none)
    atoms = shot.sample.atoms
    if atoms:
        rep["N_T"] = max(atoms * rep["T"], 0.0)
        rep["N_R"] = max(atoms * (1.0 - rep["T"]), 0.0)
    rep["floor"] = shot.sample.detection_floor if shot.sample.detection_floor is not None else DEFAULT_DETECTION_FLOOR
    return BarrierPrediction(**rep)
