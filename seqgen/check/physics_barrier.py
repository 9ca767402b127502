"""Physics checks of `barrier` actions: transmission of the kicked cloud through
a thin repulsive light sheet, and the spin rotation that an intensity-modulated
sheet drives in the atoms that cross it.

The model, in one place (every check below reads it from one cached analysis
per barrier action):

* Incident velocity: from the last `push` before the barrier, through the
  push model of `physics_states.push_analysis`: a magnetic push gives
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
  and `modulated_peak_intensity`, shared with `physics_states`).
  Single-particle, stationary 1D scattering (mean-field energy of the cloud
  and the finite length of the pulse are not included), averaged over a
  Gaussian velocity distribution with Gauss-Hermite quadrature.
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

import math
from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from ..findings import make
from .rules import rule
from .physics_traps import _gaussian_beams, _species, per_shot_cache
from ..codes import (
    BARRIER_NO_SIGNAL, BARRIER_ROTATION, BARRIER_TOO_LATE, BARRIER_TOO_SHORT, BARRIER_TRANSMISSION,
    CLOUD_OVERLAPS_BARRIER, DRIVE_TOO_STRONG, NOT_TUNNELLING, ROTATION_UNRESOLVABLE,
)

DEFAULT_DETECTION_FLOOR = 100.0  # atoms per component in one image (common practice, no source)
N_VELOCITIES = 24  # Gauss-Hermite nodes of the velocity average
GRID_HALF_WIDTH = 3.5  # grid [-3.5 w_y, 3.5 w_y]: exp(-2 * 3.5^2) = 2e-11 of V0 at its ends
CELLS_PER_WAVELENGTH = 40  # midpoint cells per shortest local wavelength (T to about 1e-4)
MIN_CELLS, MAX_CELLS = 128, 8192
# beyond |delta| w_y / v = 20 the transit-time Fourier factor of a Gaussian
# coupling, exp(-(delta w_y / v)^2 / 8), is below 1e-21: no transfer at all
FAR_OFF_RESONANCE = 20.0
THERMAL_EDGE_RMS = 2.5  # a thermal cloud's edge along the path: 2.5 rms widths, 98.8 % of it (common practice, no source)
MISSED_FRACTION = 0.10  # a barrier may miss at most 10 % of the cloud (common practice, no source)
HINT_FRACTION = 0.01  # hints aim at 1 % missed
U_NODES = 1601  # velocity offsets -8 .. 8 sigma_v in steps of 0.01 sigma_v for the passage fractions
_U_X = np.linspace(-8.0, 8.0, U_NODES)
_U_W = np.exp(-0.5 * _U_X**2) / np.sum(np.exp(-0.5 * _U_X**2))


# --------------------------------------------------------------------------
# Small documented helpers (tested against closed forms)
# --------------------------------------------------------------------------

def barrier_height(species, wavelength_m: float, power_w: float, waist_m: float, waist_y_m: float) -> float:
    """Peak potential (J, > 0 repulsive) of an elliptical Gaussian sheet:
    V0 = (U/I) 2P/(pi w w_y), U/I from `seqgen.physics.optical.dipole_potential_per_intensity`
    (Adv. At. Mol. Opt. Phys. 42, 95 (2000)), 2P/(pi w w_y) from `seqgen.physics.optical.peak_intensity`."""
    from ..physics.optical import dipole_potential_per_intensity, peak_intensity

    return float(dipole_potential_per_intensity(species, wavelength_m) * peak_intensity(power_w, waist_m, waist_y_m))


def gaussian_profile(waist_y_m: float):
    """exp(-2 x^2 / w_y^2): the intensity profile across the sheet (1/e^2 radius w_y)."""

    def g(x):
        x = np.asarray(x, dtype=float)
        return np.exp(-2.0 * x**2 / waist_y_m**2)

    return g


def sheet_grid(waist_y_m: float, k_max: float, half_width: float = GRID_HALF_WIDTH) -> np.ndarray:
    """Uniform cell edges over [-half_width w_y, half_width w_y] with CELLS_PER_WAVELENGTH
    cells per wavelength 2 pi / k_max (between MIN_CELLS and MAX_CELLS)."""
    span = 2.0 * half_width * waist_y_m
    n = int(math.ceil(CELLS_PER_WAVELENGTH * span * k_max / (2.0 * math.pi)))
    n = min(max(n, MIN_CELLS), MAX_CELLS)
    return np.linspace(-0.5 * span, 0.5 * span, n + 1)


def free_flight_rotation(rabi_peak_rad_s: float, waist_y_m: float, velocity_m_s: float) -> float:
    """Resonant rotation of an atom crossing a Gaussian coupling profile at constant speed:
    theta = int Omega_peak exp(-2 v^2 t^2 / w_y^2) dt = sqrt(pi/2) Omega_peak w_y / v
    (free-flight limit of the Larmor clock, angle = Omega L / v (common practice, no source))."""
    return math.sqrt(math.pi / 2.0) * rabi_peak_rad_s * waist_y_m / velocity_m_s


@dataclass(frozen=True)
class SpinRotation:
    """Per energy: transmitted probability of the incident state, rotation angle (rad)
    between incident and transmitted Bloch vectors, and the Larmor-clock reading."""

    probability: np.ndarray
    angle: np.ndarray
    clock: object  # seqgen.physics.scattering.LarmorClock


def spin_rotation(x_edges, profile, V0_j: float, rabi_peak_rad_s: float, energies_j, mass_kg: float, *,
                  partner_shift_j: float = 0.0, partner_offset_j: float = 0.0) -> SpinRotation:
    """Rotation of the spin of atoms transmitted through a barrier that also drives them.

    Incident state = `down` of the two-component solver; the partner level is
    `up`. Potentials: down V0 g(x), up (V0 + partner_shift) g(x) + partner_offset
    (offset = internal energy in the rotating frame, only inside the grid: for a
    weak coupling confined to the grid that is the same as everywhere, as long as
    |offset| << E); coupling hbar Omega_peak g(x) / 2. Returns angles from the
    incident pole, arctan2(sqrt(s_x^2 + s_y^2), -s_z) (no loss of precision at
    small angles).
    """
    from ..physics.scattering import larmor_clock, spinor_transmission

    g = profile

    def v_up(x):
        return (V0_j + partner_shift_j) * g(x) + partner_offset_j

    def v_down(x):
        return V0_j * g(x)

    def omega(x):
        return rabi_peak_rad_s * g(x)

    res = spinor_transmission(x_edges, v_up, v_down, omega, 0.0, energies_j, mass_kg)
    clock = larmor_clock(res.t, np.array([0.0, 1.0]), (1.0, 0.0, 0.0), rabi_peak_rad_s if rabi_peak_rad_s else 1.0)
    s = clock.bloch
    angle = np.arctan2(np.hypot(s[..., 0], s[..., 1]), -s[..., 2])
    return SpinRotation(np.asarray(clock.probability), angle, clock)


def thomas_fermi_fraction_beyond(u):
    """Fraction of a Thomas-Fermi condensate whose coordinate along one axis exceeds u R (vectorised).

    The density n ~ 1 - x^2/R_x^2 - y^2/R_y^2 - z^2/R_z^2 integrated over the two other axes gives the
    line density (15/(16 R)) (1 - x^2/R^2)^2; its integral from u R to R is
    1/2 - (15/16) (u - 2 u^3/3 + u^5/5) for |u| <= 1 (1 below -1, 0 above 1)."""
    u = np.clip(np.asarray(u, dtype=float), -1.0, 1.0)
    return np.clip(0.5 - (15.0 / 16.0) * (u - 2.0 * u**3 / 3.0 + u**5 / 5.0), 0.0, 1.0)  # no -1e-17 at the edges


def fraction_beyond(y_m, profile: str, size_m: float):
    """Fraction of the cloud whose initial coordinate along the path (from its centre) is >= y (vectorised).

    profile "thomas-fermi": size = Thomas-Fermi radius; "gaussian": size = rms width
    (1/2 erfc(y / (sqrt 2 sigma))); otherwise a point cloud (1 for y <= 0, else 0)."""
    from scipy.special import erfc

    y = np.asarray(y_m, dtype=float)
    if size_m and size_m > 0 and profile == "thomas-fermi":
        return thomas_fermi_fraction_beyond(y / size_m)
    if size_m and size_m > 0 and profile == "gaussian":
        return 0.5 * erfc(y / (math.sqrt(2.0) * size_m))
    return (y <= 0).astype(float)


def push_displacement(t_s, speed_m_s: float, push_duration_s: float):
    """Distance covered t after the push began: uniform acceleration speed/tau from rest for the push
    duration tau, s = speed t^2 / (2 tau), then free flight, s = speed (t - tau/2) (vectorised)."""
    t = np.maximum(np.asarray(t_s, dtype=float), 0.0)
    if push_duration_s <= 0:
        return speed_m_s * t
    return np.where(t < push_duration_s, 0.5 * speed_m_s * t**2 / push_duration_s,
                    speed_m_s * (t - 0.5 * push_duration_s))


def fraction_reached(t_s, distance_m: float, speed_m_s: float, push_duration_s: float, sigma_v_m_s: float,
                     profile: str, size_m: float):
    """Fraction of the cloud that has reached `distance_m` along the path by t after the push began (vectorised).

    An atom starts at x0 (distributed as `fraction_beyond`) with a velocity offset u (Gaussian,
    rms sigma_v, independent of x0) and moves to x0 + s(t) + u t (`push_displacement`). That path is
    convex in t and starts at x0, so the atom has been at `distance_m` by t exactly when
    x0 + max(0, s(t) + u t) >= distance. A point cloud gives the normal tail
    1/2 erfc((d - s) / (sqrt 2 sigma_v t)) in closed form; otherwise the velocity average runs over
    U_NODES points spaced 0.01 sigma_v out to 8 sigma_v (a step in u costs at most 0.4 % of the atoms)."""
    from scipy.special import erfc

    t = np.asarray(t_s, dtype=float)
    s = push_displacement(t, speed_m_s, push_duration_s)
    if not (size_m and size_m > 0) or profile not in ("thomas-fermi", "gaussian"):
        if distance_m <= 0:
            return np.ones_like(s)
        if sigma_v_m_s <= 0:
            return (s >= distance_m).astype(float)
        spread = sigma_v_m_s * t
        with np.errstate(divide="ignore", invalid="ignore"):
            z = np.where(spread > 0, (distance_m - s) / np.where(spread > 0, spread, 1.0), np.inf)
        return np.clip(0.5 * erfc(z / math.sqrt(2.0)), 0.0, 1.0)
    u = sigma_v_m_s * _U_X
    moved = np.maximum(0.0, s[..., None] + u * t[..., None])
    return np.clip(np.sum(_U_W * fraction_beyond(distance_m - moved, profile, size_m), axis=-1), 0.0, 1.0)


def time_to_fraction(fraction: float, distance_m: float, speed_m_s: float, push_duration_s: float,
                     sigma_v_m_s: float, profile: str, size_m: float) -> float:
    """First time after the push began by which `fraction` of the cloud has reached `distance_m`
    (math.inf if it never does, e.g. atoms slower than the spread). Bisection on `fraction_reached`,
    which never decreases with t, to 1e-7 relative."""
    args = (distance_m, speed_m_s, push_duration_s, sigma_v_m_s, profile, size_m)

    def reached(t):
        return float(fraction_reached(t, *args))

    if reached(0.0) >= fraction:
        return 0.0
    hi = max(push_duration_s, 1e-6)
    while reached(hi) < fraction:
        hi *= 2.0
        if hi > 1e4:
            return math.inf
    lo = 0.0
    while hi - lo > 1e-7 * hi:
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if reached(mid) < fraction else (lo, mid)
    return hi


def path_frequency(omegas_rad_s, axes, direction) -> float:
    """Harmonic frequency along a unit direction d: omega_d^2 = sum_j (a_j . d)^2 omega_j^2
    (a_j the principal axes, columns of `axes`; identity for lab-frame frequencies)."""
    d = np.asarray(direction, dtype=float)
    d = d / np.linalg.norm(d)
    a = np.eye(3) if axes is None else np.asarray(axes, dtype=float)
    proj = a.T @ d
    return float(np.sqrt(np.sum(proj**2 * np.asarray(omegas_rad_s, dtype=float) ** 2)))


# --------------------------------------------------------------------------
# Reading the shot
# --------------------------------------------------------------------------

def _barriers(shot):
    return [a for a in shot.phys if a.kind == "barrier"]


def _last_push(shot, act):
    pushes = [a for a in shot.phys if a.kind == "push" and a.t0 <= act.t0]
    return pushes[-1] if pushes else None


def _unit(v):
    a = np.asarray(v, dtype=float)
    n = float(np.linalg.norm(a))
    return a / n if n > 0 and math.isfinite(n) else None


def incident_velocity(shot, act):
    """dict(speed, signed, direction, known_direction, source, push) for the barrier action, or None.

    One push model for every check: `physics_states.push_analysis` (moment
    -dE/dB from the Breit-Rabi formula at the rig's bias field). `signed` > 0:
    pushed towards stronger field. A push that gives the state no force
    (mF = 0, or |moment| below the push checks' threshold) or an optical push
    falls back to the push's `expect_velocity` when it gives one. None when
    the push has a direction (`push_analysis(...)["direction"]`) that leads
    away from the barrier beam's rig `position` (the atoms start at the rig's
    origin): the atoms never arrive (physics.push-away-from-barrier)."""
    from .physics_states import push_analysis

    push = _last_push(shot, act)
    if _species(shot) is None or push is None:
        return None
    args = push.args
    rep = push_analysis(shot, push)
    direction = (rep or {}).get("direction")
    known = direction is not None
    if direction is None:
        direction = shot.rig.coils[args["coil"]].axis if "coil" in args else shot.rig.beams[args["beam"]].direction
    beam = shot.rig.beams.get(act.args.get("beam"))
    if known and beam is not None:
        where = np.asarray(beam.position_m, dtype=float)
        dist = float(np.linalg.norm(where))
        if dist > 0 and math.isfinite(dist) and float(np.dot(direction, where)) < 0:
            return None  # pushed away from the sheet: it meets no atoms
    out = dict(direction=direction, known_direction=known, push=push)
    if rep and rep.get("kind") == "magnetic" and not rep["no_force"] and rep["velocity"] != 0:
        signed = rep["velocity"]
        way = "towards stronger field" if rep["moment"] > 0 else "towards weaker field"
        if "direction" in rep:
            way += ", along [" + ", ".join(f"{x + 0.0:.3g}" for x in rep["direction"]) + "]"
        s = shot.sample
        return dict(out, speed=abs(signed), signed=signed,
                    source=f"push by '{args['coil']}' on |F={s.F}, mF={s.mF}>, {way}")
    if args.get("expect_velocity"):
        v = float(args["expect_velocity"])
        return dict(out, speed=abs(v), signed=v, source="expect_velocity of the push")
    return None


def _before(t):
    """Just before t: a write at the push's own start (a trap beam switched off) is not yet the trap."""
    return t - 1e-9 * max(1.0, abs(t))


def cloud_along_path(shot, time_s, direction):
    """The sample along the unit `direction` in the trap at `time_s`: dict with

    sigma_v (m/s), text, profile ("thomas-fermi", "gaussian" or "point"), size (Thomas-Fermi radius or
    rms width, m; 0 when unknown) and half_length (the edge: R, or THERMAL_EDGE_RMS rms widths; None
    when unknown). Trap frequencies from `sample.trap_frequencies`, else from the rig's trap beams on at
    `time_s`."""
    from ..physics.expansion import thermal_in_trap_width, thomas_fermi
    from ..physics.optical import find_trap_minimum
    from ..physics.scattering import condensate_velocity_rms, thermal_velocity_rms

    sp = _species(shot)
    s = shot.sample
    omegas = axes = None
    if s.trap_frequencies_hz:
        omegas = 2 * np.pi * np.asarray(s.trap_frequencies_hz, dtype=float)
    else:
        beams = _gaussian_beams(shot, [time_s])[0]
        if beams:
            try:
                m = find_trap_minimum(sp, beams)
                omegas, axes = m.omegas_rad_s, m.axes
            except (ValueError, RuntimeError, np.linalg.LinAlgError):
                omegas = None
    w_path = None
    if omegas is not None and np.all(np.isfinite(omegas)) and np.all(np.asarray(omegas) > 0):
        w_path = path_frequency(omegas, axes, direction)
    if s.condensed and s.atoms and w_path:
        a = sp.scattering_lengths_m.get(f"F={s.F},mF={s.mF}", next(iter(sp.scattering_lengths_m.values()), None))
        if a and a > 0:
            mu, _ = thomas_fermi(s.atoms, sp.mass_kg, a, omegas)
            radius = math.sqrt(2 * mu / (sp.mass_kg * w_path**2))
            return dict(sigma_v=float(condensate_velocity_rms(radius, sp.mass_kg)), profile="thomas-fermi",
                        size=radius, half_length=radius,
                        text=f"condensate, Thomas-Fermi radius {radius * 1e6:.4g} um along the path")
    if s.temperature_k:
        sigma_v = float(thermal_velocity_rms(s.temperature_k, sp.mass_kg))
        text = f"thermal, T = {s.temperature_k * 1e9:.4g} nK"
        if w_path:
            width = float(thermal_in_trap_width(s.temperature_k, sp.mass_kg, w_path))
            return dict(sigma_v=sigma_v, profile="gaussian", size=width, half_length=THERMAL_EDGE_RMS * width,
                        text=f"{text}, rms width {width * 1e6:.4g} um along the path")
        return dict(sigma_v=sigma_v, profile="point", size=0.0, half_length=None,
                    text=f"{text}, size along the path unknown (no trap)")
    return dict(sigma_v=0.0, profile="point", size=0.0, half_length=None,
                text="no spread known (sample without temperature or trap)")


def velocity_spread(shot, time_s, direction):
    """(sigma_v m/s, description) of the sample along `direction` at `time_s` (see `cloud_along_path`)."""
    c = cloud_along_path(shot, time_s, direction)
    return c["sigma_v"], c["text"]


def passage(shot, act, inc, cloud, waist_y):
    """Where the cloud is against the sheet: dict with the distance d along the path, the cloud's edge,
    whether they overlap at the push, and the fractions that reach the near edge d - w_y before the
    barrier is on and cross the far edge d + w_y only after it is off (times from the push's start)."""
    push = inc["push"]
    beam = shot.rig.beams[act.args["beam"]]
    d = float(np.dot(np.asarray(beam.position_m, dtype=float), _unit(inc["direction"])))
    if not inc["known_direction"]:
        d = abs(d)  # the push's sense is unknown: take it towards the sheet
    tau = float(push.args["duration"])
    args = (inc["speed"], tau, cloud["sigma_v"], cloud["profile"], cloud["size"])
    on, off = act.t0 - push.t0, act.t1 - push.t0
    out = dict(distance=d, edge=cloud["half_length"], on=on, off=off, push_t0=push.t0,
               overlap=cloud["half_length"] is not None and cloud["half_length"] + waist_y >= d)
    out["early"] = float(fraction_reached(on, d - waist_y, *args))
    out["late"] = 1.0 - float(fraction_reached(off, d + waist_y, *args))
    out["need_off"] = time_to_fraction(1.0 - HINT_FRACTION, d + waist_y, *args)
    out["need_on"] = time_to_fraction(HINT_FRACTION, d - waist_y, *args)
    out["centre_arrival"] = time_to_fraction(0.5, d, inc["speed"], tau, 0.0, "point", 0.0)
    return out


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
    i = _species(shot).nuclear_spin
    other = i + 0.5 if abs(s.F - (i - 0.5)) < 1e-9 else i - 0.5
    return initial, (int(round(other)), s.mF)


def _drive_model(shot, act, sp, beam, waist_y, speed):
    """In-barrier coupling: dict with rabi_peak, partner offset / shift, detuning, or a reason it is absent."""
    from ..physics.drive import two_photon_rabi_from_modulated_beam
    from ..physics.optical import modulated_peak_intensity
    from ..physics.zeeman import transition_frequency

    eps = act.args.get("mod_depth")
    if not eps or shot.sample.F is None or shot.sample.mF is None:
        return None
    initial, partner = _partner(shot, act)
    out = dict(initial=initial, partner=partner, depth=float(eps))
    if partner is None:
        out["reason"] = (f"the sample state |F={initial[0]}, mF={initial[1]}> is not in the modulation's transition: "
                         "the drive does not act on it; rotation not computed")
        return out
    if partner[1] != initial[1]:
        out["reason"] = (f"transition {initial} -> {partner} changes mF: a modulated beam along the quantisation "
                         "axis couples equal mF only; rotation not computed")
        return out
    try:
        i_peak = float(modulated_peak_intensity(act.args["power"], beam.waist_m, waist_y, eps))
        d = two_photon_rabi_from_modulated_beam(i_peak, eps, beam.wavelength_m, m_f=initial[1],
                                                polarization=1.0, atom=sp)
        f = float(transition_frequency(initial[0], initial[1], partner[0], partner[1], shot.rig.bias_field_t or 0.0,
                                       atom=sp))
    except (ValueError, TypeError) as exc:
        out["reason"] = f"no coupling in the drive model: {exc}"
        return out
    sign = 1.0 if f > 0 else -1.0
    f_mod = act.args.get("mod_frequency")
    detuning_hz = (f_mod - abs(f)) if f_mod else 0.0  # modulation above the bare line > 0
    # rotating frame: the partner's internal energy is h (f - sign(f) f_mod) = -sign(f) h detuning
    out.update(rabi_peak=d.rabi_rad_s, transition_hz=abs(f), detuning_hz=detuning_hz,
               shift_j=sign * d.differential_light_shift_j, offset_j=-sign * sc.h * detuning_hz,
               light_shift_hz=d.differential_light_shift_hz, assumed_resonant=not f_mod)
    # the local line moves from the bare one (outside) to bare + differential light shift (at the peak)
    lo, hi = detuning_hz, detuning_hz - d.differential_light_shift_hz
    nearest = 0.0 if lo * hi <= 0 else min(abs(lo), abs(hi))
    out["far_off"] = 2 * math.pi * nearest * waist_y / speed > FAR_OFF_RESONANCE
    return out


@per_shot_cache(lambda shot, act: ("barrier", act.index, act.t0))
def analyse(shot, act):
    """Cached analysis of one barrier action (see the module docstring), or None."""
    from ..physics.scattering import average_over_momentum, transmission

    sp = _species(shot)
    beam = shot.rig.beams.get(act.args["beam"])
    if sp is None or shot.sample is None or beam is None or not beam.waist_m:
        return None
    waist_y = beam.waist_y_m or beam.waist_m
    inc = incident_velocity(shot, act)
    if inc is None or not inc["speed"] > 0 or _unit(inc["direction"]) is None:
        return None
    v = inc["speed"]
    cloud = cloud_along_path(shot, _before(inc["push"].t0), _unit(inc["direction"]))
    sigma, spread_kind = cloud["sigma_v"], cloud["text"]
    m = sp.mass_kg
    v0 = barrier_height(sp, beam.wavelength_m, act.args["power"], beam.waist_m, waist_y)
    e_mean = 0.5 * m * (v**2 + sigma**2)
    rep = dict(speed=v, signed=inc["signed"], velocity_source=inc["source"], sigma_v=sigma, spread_kind=spread_kind,
               V0=v0, E_mean=e_mean, waist_y=waist_y, expect=act.args.get("expect", "any"))
    if v0 <= 0:
        rep["attractive"] = True  # red-detuned sheet: a well, not a barrier
    rep["cloud"] = cloud
    rep["passage"] = passage(shot, act, inc, cloud, waist_y)
    drive = _drive_model(shot, act, sp, beam, waist_y, v)
    rep["drive"] = drive
    v_max = v + 6.0 * sigma
    e_top = max(0.5 * m * v_max**2, abs(v0))
    if drive and "rabi_peak" in drive and not drive["far_off"]:
        e_top += abs(drive["offset_j"]) + abs(drive["shift_j"])
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
    if drive and "rabi_peak" in drive:
        rep["free_flight_rotation"] = free_flight_rotation(drive["rabi_peak"], waist_y, v)
        if drive["far_off"] or rep["T"] == 0.0:
            rep["rotation"], rep["rotation_spread"] = 0.0, 0.0
        else:
            def spinor(energies):
                r = spin_rotation(x, profile, v0, drive["rabi_peak"], np.maximum(energies, tiny), m,
                                  partner_shift_j=drive["shift_j"], partner_offset_j=drive["offset_j"])
                return r.probability, r.angle

            try:
                sav = average_over_momentum(spinor, v, sigma, m, n_points=N_VELOCITIES)
                rep["rotation"], rep["rotation_spread"] = sav.mean_rotation, sav.rotation_spread
            except ValueError:  # the partner channel is closed and opaque: no transfer
                rep["rotation"], rep["rotation_spread"] = 0.0, 0.0
    atoms = shot.sample.atoms
    if atoms:
        rep["N_T"] = max(atoms * rep["T"], 0.0)
        rep["N_R"] = max(atoms * (1.0 - rep["T"]), 0.0)
    rep["floor"] = shot.sample.detection_floor if shot.sample.detection_floor is not None else DEFAULT_DETECTION_FLOOR
    return rep


def _hz_text(f_hz: float) -> str:
    a = abs(f_hz)
    if a >= 1e6:
        return f"{f_hz / 1e6:.6g} MHz"
    if a >= 1e3:
        return f"{f_hz / 1e3:.5g} kHz"
    return f"{f_hz:.4g} Hz"


def _energy_text(e_j: float) -> str:
    t = e_j / sc.k
    temp = f"{t * 1e9:.4g} nK" if abs(t) < 1e-6 else f"{t * 1e6:.4g} uK"
    return f"h x {e_j / sc.h / 1e3:.4g} kHz ({temp} x k_B)"


def _each(shot):
    if _species(shot) is None or shot.sample is None:
        return
    for act in _barriers(shot):
        rep = analyse(shot, act)
        if rep is not None:
            yield act, rep


# --------------------------------------------------------------------------
# Checks
# --------------------------------------------------------------------------

_SRC_SCATTER = ("optical dipole potential, Adv. At. Mol. Opt. Phys. 42, 95 (2000); 1D transmission by transfer "
                "matrices checked against the rectangular and Poeschl-Teller closed forms (Quantum Mechanics: "
                "Non-Relativistic Theory, 3rd ed., Pergamon (1977), section 25); Thomas-Fermi radius "
                "(Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge University Press (2008))")


@rule(BARRIER_TRANSMISSION, stage="physics")
def barrier_transmission(shot):
    for act, rep in _each(shot):
        if rep.get("attractive"):
            msg = f"'{act.args['beam']}' is red-detuned for {shot.sample.species}: a well, not a barrier; T = {rep['T']:.3g}"
        else:
            msg = (f"transmitted fraction {rep['T']:.3g} (spread {rep['T_spread']:.2g} over the momentum distribution); "
                   f"V0 = {_energy_text(rep['V0'])}, mean kinetic energy {_energy_text(rep['E_mean'])}, "
                   f"v = {rep['speed'] * 1e3:.4g} mm/s +/- {rep['sigma_v'] * 1e3:.2g} mm/s ({rep['spread_kind']})")
        yield make(BARRIER_TRANSMISSION, msg, act.pos, block=act.block, time_s=act.t0,
                   data={"transmission": rep["T"], "transmission_spread": rep["T_spread"], "V0_J": rep["V0"],
                         "mean_kinetic_energy_J": rep["E_mean"], "velocity_m_s": rep["speed"],
                         "velocity_spread_m_s": rep["sigma_v"]})


def _um(x_m: float) -> str:
    return f"{x_m * 1e6:.4g} um" if abs(x_m) < 1e-2 else f"{x_m * 1e3:.4g} mm"


def _ms(t_s: float) -> str:
    return f"{t_s * 1e3:.4g} ms" if math.isfinite(t_s) else "never"


def _pct(x: float) -> str:
    return f"{100 * x:.3g} %"


_SRC_PASSAGE = ("uniform acceleration during the push, then free flight (textbook); Thomas-Fermi radius and "
                "profile (Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge University Press (2008)); "
                "thermal width sqrt(k_B T / (m omega^2)) by equipartition (textbook); the rig file's barrier "
                "position and waist")


@rule(CLOUD_OVERLAPS_BARRIER, stage="physics")
def cloud_overlaps_barrier(shot):
    for act, rep in _each(shot):
        ps, cloud = rep["passage"], rep["cloud"]
        if not ps["overlap"]:
            continue
        edge = ps["edge"] + rep["waist_y"]
        what = ("Thomas-Fermi radius" if cloud["profile"] == "thomas-fermi"
                else f"edge ({THERMAL_EDGE_RMS:g} rms widths)")
        yield make(CLOUD_OVERLAPS_BARRIER, f"the cloud's {what} along the path at the push, {_um(ps['edge'])}, "
                   f"reaches barrier '{act.args['beam']}' {_um(ps['distance'])} from the atoms (sheet 1/e^2 half-width "
                   f"{_um(rep['waist_y'])} included): part of the cloud is in or beyond the sheet before it moves, outside "
                   f"the transmission model", act.pos, block=act.block, time_s=act.t0,
                   hint=f"put the sheet farther than {_um(1.5 * edge)} from the atoms (rig file: the beam's position), "
                        "or shorten the cloud along the path (a tighter trap there at the push, fewer atoms)",
                   data={"cloud_edge_m": ps["edge"], "barrier_distance_m": ps["distance"]})


@rule(BARRIER_TOO_SHORT, stage="physics")
def barrier_too_short(shot):
    for act, rep in _each(shot):
        ps = rep["passage"]
        if ps["late"] <= MISSED_FRACTION:
            continue
        need = ps["need_off"] - ps["on"]
        hint = (f"keep the barrier on for at least {_ms(need)} (99 % of the cloud across)" if math.isfinite(need)
                else "part of the cloud never reaches the sheet: push harder")
        yield make(BARRIER_TOO_SHORT, f"barrier '{act.args['beam']}' is off {_ms(ps['off'])} after the push "
                   f"starts, but {_pct(ps['late'])} of the cloud crosses the sheet {_um(ps['distance'])} away only later "
                   f"(v = {rep['speed'] * 1e3:.4g} mm/s, {rep['spread_kind']}): those atoms pass unhindered",
                   act.pos, block=act.block, time_s=act.t1, hint=hint,
                   data={"missed_fraction": ps["late"], "barrier_off_s": ps["off"], "needed_off_s": ps["need_off"]})


@rule(BARRIER_TOO_LATE, stage="physics")
def barrier_too_late(shot):
    for act, rep in _each(shot):
        ps = rep["passage"]
        if ps["overlap"] or ps["early"] <= MISSED_FRACTION:
            continue  # an overlapping cloud is physics.cloud-overlaps-barrier's
        yield make(BARRIER_TOO_LATE, f"barrier '{act.args['beam']}' comes on {_ms(ps['on'])} after the push "
                   f"starts, when {_pct(ps['early'])} of the cloud has already reached the sheet {_um(ps['distance'])} "
                   f"away (v = {rep['speed'] * 1e3:.4g} mm/s)", act.pos, block=act.block, time_s=act.t0,
                   hint=f"start the barrier no later than {_ms(ps['need_on'])} after the push starts",
                   data={"early_fraction": ps["early"], "barrier_on_s": ps["on"], "needed_on_s": ps["need_on"]})


@rule(BARRIER_NO_SIGNAL, stage="physics")
def barrier_no_signal(shot):
    for act, rep in _each(shot):
        if "N_T" not in rep:
            continue
        floor = rep["floor"]
        side = None
        if rep["N_T"] < floor:
            side, n, fix = "transmitted", rep["N_T"], "lower the sheet power or kick harder"
        elif rep["N_R"] < floor and rep["expect"] != "over_barrier":
            side, n, fix = "reflected", rep["N_R"], "raise the sheet power or kick less"
        if side:
            yield make(BARRIER_NO_SIGNAL, f"only {n:.3g} {side} atoms predicted (transmitted fraction "
                       f"{rep['T']:.3g} of {shot.sample.atoms:.3g}); detection floor {floor:g} atoms", act.pos,
                       block=act.block, time_s=act.t0, hint=fix, data={"atoms": n, "floor": floor})


@rule(NOT_TUNNELLING, stage="physics")
def not_tunnelling(shot):
    for act, rep in _each(shot):
        e, v0, want = rep["E_mean"], rep["V0"], rep["expect"]
        if want == "tunnelling" and v0 <= 0:
            yield make(NOT_TUNNELLING, f"expect: tunnelling, but '{act.args['beam']}' is red-detuned for "
                       f"{shot.sample.species}: it makes a well ({_energy_text(v0)}), not a barrier", act.pos,
                       block=act.block, time_s=act.t0, hint="use a beam blue of the D lines for a barrier",
                       data={"E_J": e, "V0_J": v0})
        elif want == "tunnelling" and e >= v0:
            yield make(NOT_TUNNELLING, f"expect: tunnelling, but the mean kinetic energy {_energy_text(e)} "
                       f"is above the barrier top {_energy_text(v0)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"raise the sheet power above {act.args['power'] * e / v0 * 1e3:.3g} mW or kick less",
                       data={"E_J": e, "V0_J": v0})
        elif want == "over_barrier" and e < v0:
            yield make(NOT_TUNNELLING, f"expect: over_barrier, but the mean kinetic energy {_energy_text(e)} "
                       f"is below the barrier top {_energy_text(v0)}", act.pos, block=act.block, time_s=act.t0,
                       hint=f"lower the sheet power below {act.args['power'] * e / v0 * 1e3:.3g} mW or kick harder",
                       data={"E_J": e, "V0_J": v0})


_SRC_DRIVE = ("modulated-beam Raman coupling via the vector light shift, Adv. At. Mol. Opt. Phys. 42, 95 (2000); "
              "two-component scattering and Larmor clock, Sov. J. Nucl. Phys. 4, 182 (1967), Phys. Rev. B 27, 6178 (1983); "
              "Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)")


def _rotation_text(rep):
    d = rep["drive"]
    txt = (f"rotation of the transmitted spin {rep['rotation']:.3g} rad (spread {rep['rotation_spread']:.2g}) on "
           f"|F={d['initial'][0]}, mF={d['initial'][1]}> -> |F={d['partner'][0]}, mF={d['partner'][1]}>; peak Rabi frequency "
           f"2 pi x {d['rabi_peak'] / (2 * math.pi):.4g} Hz (circular polarisation assumed), "
           f"detuning {_hz_text(d['detuning_hz'])} from the bare line")
    if d["far_off"]:
        txt += " (far off resonance for the transit time: no transfer)"
    return txt + (" (no modulation frequency: taken on resonance)" if d["assumed_resonant"] else "")


def _with_rotation(shot):
    for act, rep in _each(shot):
        if rep.get("drive") and "rotation" in rep:
            yield act, rep


@rule(BARRIER_ROTATION, stage="physics")
def barrier_rotation(shot):
    for act, rep in _each(shot):
        d = rep.get("drive")
        if not d:
            continue
        if "reason" in d:
            yield make(BARRIER_ROTATION, d["reason"], act.pos, block=act.block, time_s=act.t0)
            continue
        yield make(BARRIER_ROTATION, _rotation_text(rep), act.pos, block=act.block, time_s=act.t0,
                   data={"rotation_rad": rep["rotation"], "rotation_spread_rad": rep["rotation_spread"],
                         "rabi_peak_rad_s": d["rabi_peak"], "detuning_hz": d["detuning_hz"]})


@rule(DRIVE_TOO_STRONG, stage="physics")
def drive_too_strong(shot):
    lim = shot.limits.weak_probe_angle
    for act, rep in _with_rotation(shot):
        if rep["rotation"] > lim:
            yield make(DRIVE_TOO_STRONG, f"the modulated barrier rotates the transmitted spin by "
                       f"{rep['rotation']:.3g} rad, above the weak-probe limit {lim:g} rad", act.pos, block=act.block,
                       time_s=act.t0, hint=f"lower the modulation depth to about {rep['drive']['depth'] * lim / rep['rotation'] * 0.8:.2g}",
                       data={"rotation_rad": rep["rotation"], "limit_rad": lim})


@rule(ROTATION_UNRESOLVABLE, stage="physics")
def rotation_unresolvable(shot):
    for act, rep in _with_rotation(shot):
        n = rep.get("N_T")
        if not n:
            continue
        noise = 1.0 / math.sqrt(max(n, 1.0))
        if rep["rotation"] < noise:
            d = rep["drive"]
            off = abs(d["detuning_hz"]) * 2 * math.pi * rep["waist_y"] / rep["speed"] > 3.0
            hint = (f"tune the modulation to the line at {d['transition_hz'] / 1e9:.7g} GHz"
                    if off else "raise the modulation depth, or transmit more atoms")
            yield make(ROTATION_UNRESOLVABLE, f"rotation {rep['rotation']:.3g} rad of the transmitted spin is below "
                       f"the shot noise {noise:.3g} rad of {n:.3g} transmitted atoms (detuning "
                       f"{_hz_text(d['detuning_hz'])})", act.pos, block=act.block, time_s=act.t0, hint=hint,
                       data={"rotation_rad": rep["rotation"], "noise_rad": noise})


# --------------------------------------------------------------------------
# `seqgen show --physics`
# --------------------------------------------------------------------------

def report(shot) -> list[dict]:
    rows = []
    for act, rep in _each(shot):
        items = [f"incident {rep['speed'] * 1e3:.4g} mm/s ({rep['velocity_source']}), "
                 f"spread {rep['sigma_v'] * 1e3:.2g} mm/s ({rep['spread_kind']})",
                 f"barrier V0 {_energy_text(rep['V0'])}, mean kinetic energy {_energy_text(rep['E_mean'])}",
                 f"transmitted fraction {rep['T']:.3g} (spread {rep['T_spread']:.2g})"]
        if "N_T" in rep:
            items.append(f"transmitted atoms {rep['N_T']:.3g}, reflected {rep['N_R']:.3g} (floor {rep['floor']:g})")
        ps = rep["passage"]
        edge = f", cloud edge {_um(ps['edge'])}" if ps["edge"] is not None else ""
        items.append(f"sheet {_um(ps['distance'])} from the atoms along the path{edge}; on {_ms(ps['on'])} to "
                     f"{_ms(ps['off'])} after the push starts; cloud centre there after {_ms(ps['centre_arrival'])}; "
                     f"{_pct(ps['early'])} of the cloud arrives before it is on, {_pct(ps['late'])} after it is off")
        d = rep.get("drive")
        if d and "reason" in d:
            items.append(d["reason"])
        elif d and "rotation" in rep:
            items.append(_rotation_text(rep))
            items.append(f"free-flight rotation (no barrier) {rep['free_flight_rotation']:.3g} rad")
            if rep.get("N_T"):
                items.append(f"shot-noise angle 1/sqrt(N_T) {1 / math.sqrt(max(rep['N_T'], 1.0)):.3g} rad")
        rows.append({"block": act.block, "kind": "barrier", "time_s": act.t0, "items": items})
    return rows
