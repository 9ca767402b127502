"""Centre-of-mass kicks from magnetic gradients and light; Stern-Gerlach separation;
where a released cloud is, and how large, at an image.

SI units: J/T, T/m, s, kg, m, m/s, K. One axis (z) for the kicks; the image-plane
geometry works on 3-vectors (z up, gravity along -z).

Sign convention for magnetic forces (the package-wide one, see
``seqgen.physics``): the moment is mu = -dE/dB (as in
seqgen.physics.zeeman.magnetic_moment), so the force is
F_z = -dE/dz = -(dE/dB)(dB/dz) = mu dB/dz, with dB/dz the gradient of the
field magnitude along z. A low-field seeker (mu < 0) is pushed towards weaker field.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .imaging import scattering_rate
from .zeeman import magnetic_moment

__all__ = [
    "gradient_kick_velocity",
    "MagneticPush",
    "magnetic_push",
    "recoil_velocity",
    "OpticalKick",
    "optical_kick",
    "time_to_reach",
    "stern_gerlach_separation",
    "components_resolved",
    "pulse_displacement",
    "linear_trap_rms_widths",
    "image_plane_basis",
]


def _out(a):
    a = np.asarray(a, dtype=float)
    return float(a) if a.ndim == 0 else a


def gradient_kick_velocity(moment_J_per_T, gradient_T_per_m, duration_s, mass_kg):
    """Velocity change (m/s) from a gradient pulse: dv = mu b' t / m (constant moment and gradient)."""
    return _out(np.asarray(moment_J_per_T, dtype=float) * np.asarray(gradient_T_per_m, dtype=float)
                * np.asarray(duration_s, dtype=float) / np.asarray(mass_kg, dtype=float))


@dataclass(frozen=True)
class MagneticPush:
    """Result of magnetic_push (SI): the state's moment -dE/dB (J/T) and the signed velocity change (m/s)."""

    moment: float | np.ndarray
    velocity: float | np.ndarray


def magnetic_push(F, mF, gradient_T_per_m, duration_s, bias_T=0.0, *, mass_kg=None, atom=None,
                  nuclear_spin=None, hyperfine_splitting_hz=None, g_j=None, g_i=None) -> MagneticPush:
    """Kick of a ground state |F, mF> by a magnetic gradient pulse: moment and velocity change.

    moment = -dE/dB of |F, mF> at the field ``bias_T`` from the Breit-Rabi
    formula (Phys. Rev. 38, 2082 (1931); ``zeeman.magnetic_moment``; at
    B = 0 this is the first-order -g_F m_F mu_B), taken as constant over the
    pulse; velocity dv = moment b' tau / m (force = moment x gradient of |B|,
    dv = F t / m, textbook; ``gradient_kick_velocity``). A positive b' means
    |B| grows along the push axis, so a low-field seeker (moment < 0) gets
    dv < 0: it is pushed towards weaker field. Atomic data as keywords or
    through ``atom`` (e.g. an atoms.Species, which also gives ``mass_kg``).
    F, mF, gradient, duration and bias broadcast against each other.
    Raises ValueError for a state that is not a ground level.
    """
    if mass_kg is None:
        mass_kg = getattr(atom, "mass_kg", None)
    if mass_kg is None:
        raise TypeError("missing mass_kg (pass it as a keyword or via atom=)")
    mu = magnetic_moment(F, mF, bias_T, nuclear_spin=nuclear_spin, hyperfine_splitting_hz=hyperfine_splitting_hz,
                         g_j=g_j, g_i=g_i, atom=atom)
    return MagneticPush(moment=mu, velocity=gradient_kick_velocity(mu, gradient_T_per_m, duration_s, mass_kg))


def recoil_velocity(wavelength_m, mass_kg):
    """Single-photon recoil velocity v_rec = h / (m lambda) (m/s); lambda is the vacuum wavelength."""
    return _out(sc.h / (np.asarray(mass_kg, dtype=float) * np.asarray(wavelength_m, dtype=float)))


@dataclass(frozen=True)
class OpticalKick:
    """Result of optical_kick (SI).

    photons: mean number scattered; velocity: mean velocity change along the beam;
    rms_velocity_along / rms_velocity_transverse: per-axis RMS spread added by
    the recoil random walk; heating_j: mean kinetic energy added to the spread
    (not counting the directed push).
    """

    scattering_rate: float
    photons: float
    recoil_velocity: float
    velocity: float
    rms_velocity_along: float
    rms_velocity_transverse: float
    heating_j: float


def optical_kick(gamma_rad_s, saturation, detuning_rad_s, duration_s, wavelength_m, mass_kg) -> OpticalKick:
    """Push from a resonant (or near-resonant) beam of one direction.

    Rate R = (Gamma/2) s / (1 + s + 4 Delta^2/Gamma^2) (steady state), photons N = R t,
    mean push N v_rec with v_rec = h/(m lambda) (Doppler shift during the push neglected:
    see imaging.doppler_shift_linewidths). Random walk: absorbed-photon number
    assumed Poissonian (variance N, exact for s << 1), emission isotropic
    (per-axis variance v_rec^2/3 per photon), so
      Var v_along = N v_rec^2 (1 + 1/3), Var v_transverse = N v_rec^2 / 3,
    and the heating (1/2) m (sum of variances) = N m v_rec^2 = 2 N E_rec,
    i.e. 2 E_rec per scattered photon as in Adv. At. Mol. Opt. Phys. 42, 95 (2000).
    """
    rate = float(scattering_rate(gamma_rad_s, saturation, detuning_rad_s))
    n = rate * float(duration_s)
    v_rec = float(recoil_velocity(wavelength_m, mass_kg))
    var_along = n * v_rec**2 * (4.0 / 3.0)
    var_trans = n * v_rec**2 / 3.0
    heating = 0.5 * float(mass_kg) * (var_along + 2 * var_trans)
    return OpticalKick(scattering_rate=rate, photons=n, recoil_velocity=v_rec, velocity=n * v_rec,
                       rms_velocity_along=float(np.sqrt(var_along)), rms_velocity_transverse=float(np.sqrt(var_trans)),
                       heating_j=float(heating))


def time_to_reach(distance, velocity, acceleration=0.0):
    """Earliest t >= 0 (s) with distance = v t + a t^2 / 2 (signed, one axis); inf if never.

    Roots written as t = 2 d / (v +/- sqrt(v^2 + 2 a d)) (no cancellation when a -> 0).
    Vectorised.
    """
    d, v, a = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (distance, velocity, acceleration)))
    disc = v * v + 2 * a * d
    with np.errstate(divide="ignore", invalid="ignore"):
        root = np.sqrt(disc)
        candidates = np.stack([2 * d / (v + root), 2 * d / (v - root)])
    candidates = np.where(np.isfinite(candidates) & (candidates >= 0), candidates, np.inf)
    t = np.min(candidates, axis=0)
    t = np.where(disc < 0, np.inf, t)
    t = np.where(d == 0, 0.0, t)
    return _out(t)


def stern_gerlach_separation(moment1, moment2, gradient, pulse_duration, time_of_flight_after, mass):
    """Relative displacement (m) of two spin components at imaging, state 1 minus state 2.

    A gradient pulse of length tau gives relative acceleration da = (mu1 - mu2) b'/m
    (force = mu b', mu = -dE/dB); displacement = da tau^2/2 during the pulse plus
    the drift da tau t_tof during the free flight t_tof after it. Common forces
    (gravity, common kicks) cancel in the difference.
    """
    da = (np.asarray(moment1, dtype=float) - np.asarray(moment2, dtype=float)) * np.asarray(gradient, dtype=float) \
        / np.asarray(mass, dtype=float)
    tau = np.asarray(pulse_duration, dtype=float)
    return _out(da * tau * (0.5 * tau + np.asarray(time_of_flight_after, dtype=float)))


def components_resolved(separation, sigma1, sigma2, n_sigma=3.0):
    """True where |separation| >= n_sigma * sqrt(sigma1^2 + sigma2^2)
    (rule of thumb: at least three combined RMS widths, common practice, no source;
    the combined width is the RMS of the difference of the two positions).
    """
    combined = np.sqrt(np.asarray(sigma1, dtype=float) ** 2 + np.asarray(sigma2, dtype=float) ** 2)
    # 1e-12 slack: a separation of exactly n_sigma widths counts despite rounding
    out = np.abs(np.asarray(separation, dtype=float)) >= float(n_sigma) * combined * (1 - 1e-12)
    return bool(out) if out.ndim == 0 else out



def pulse_displacement(acceleration, t_start, t_end, t):
    """Displacement (m) at time t of an atom at rest, accelerated uniformly by ``acceleration`` from t_start
    to t_end and free afterwards (textbook kinematics): 0 before t_start, a (t - t_start)^2 / 2 during the
    pulse, a tau (tau / 2 + t - t_end) after it, tau = t_end - t_start. Vectorised over every argument (for
    vectors give the acceleration a trailing axis of 3 and the times a matching trailing axis of 1).
    """
    a = np.asarray(acceleration, dtype=float)
    t0, t1, t = (np.asarray(x, dtype=float) for x in (t_start, t_end, t))
    under = np.clip(np.minimum(t, t1) - t0, 0.0, None)  # time spent under the force so far
    after = np.clip(t - np.maximum(t1, t0), 0.0, None)  # free flight since the pulse ended
    return _out(a * under * (0.5 * under + after))


def linear_trap_rms_widths(temperature_K, moment_J_per_T, gradients_T_per_m):
    """rms widths (m) along the principal axes of a thermal cloud in a linear trap U = |mu| |M r|.

    ``gradients_T_per_m``: the gradients of |B| along the principal axes, i.e. the |eigenvalues| of the
    field matrix M (for one quadrupole of axial gradient G: G/2, G/2, G). The Boltzmann density
    exp(-|mu| |M r| / k_B T) is isotropic in u = |mu| M r / k_B T, and for exp(-|u|) in three dimensions
    <|u|^2> = 4!/2! = 12, so <u_i^2> = 4 and sigma_i = 2 k_B T / (|mu| g_i): twice the 1/e Boltzmann length
    l_i = k_B T / (|mu| g_i) along that axis (derived here from the Boltzmann factor, textbook statistical
    mechanics). Gravity's tilt m g z is left out: it shifts and skews the cloud by of order l / (support - 1).
    Broadcasts; the gradients' last axis holds the principal axes.
    """
    g = np.abs(np.asarray(gradients_T_per_m, dtype=float))
    mu = np.abs(np.asarray(moment_J_per_T, dtype=float))
    temp = np.asarray(temperature_K, dtype=float)
    if g.ndim:
        mu, temp = mu[..., None], temp[..., None]
    with np.errstate(divide="ignore"):
        return _out(2.0 * sc.k * temp / (mu * g))


def image_plane_basis(line_of_sight, vertical=(0.0, 0.0, 1.0)):
    """(e_h, e_v, n): unit vectors of a camera that looks along ``line_of_sight``.

    n is the unit line of sight, e_v the part of ``vertical`` perpendicular to it (the image's "up"),
    e_h = n x e_v the image's "right" (forward x up, as seen by the camera; so e_h x e_v = -n). For a camera
    that looks straight along the
    vertical the image has no "up": e_v is then built from the x axis (or y) instead; callers that care
    test |n . vertical|. Raises ValueError for a line of sight that is zero or not finite.
    """
    n = np.asarray(line_of_sight, dtype=float).reshape(3)
    norm = float(np.linalg.norm(n))
    if not (norm > 0 and np.isfinite(norm)):
        raise ValueError("the line of sight must be a finite, non-zero vector")
    n = n / norm
    up = np.asarray(vertical, dtype=float).reshape(3)
    up = up / np.linalg.norm(up)
    for ref in (up, np.array([1.0, 0.0, 0.0]), np.array([0.0, 1.0, 0.0])):
        v = ref - np.dot(ref, n) * n
        if np.linalg.norm(v) > 1e-6:
            break
    e_v = v / np.linalg.norm(v)
    return np.cross(n, e_v), e_v, n
