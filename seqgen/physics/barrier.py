"""A thin repulsive light sheet: its height, profile, the grid it is solved on, and the spin rotation that an
intensity-modulated sheet drives in atoms that cross it (SI units; vectorised where the argument allows).

Dipole potential per intensity from `optical.dipole_potential_per_intensity` (Adv. At. Mol. Opt. Phys. 42, 95
(2000)); stationary 1D two-component scattering and the Larmor clock from `scattering` (Phys. Rev. B 27, 6178
(1983))."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

GRID_HALF_WIDTH = 3.5  # grid [-3.5 w_y, 3.5 w_y]: exp(-2 * 3.5^2) = 2e-11 of V0 at its ends
CELLS_PER_WAVELENGTH = 40  # midpoint cells per shortest local wavelength (T to about 1e-4)
MIN_CELLS, MAX_CELLS = 128, 8192


def barrier_height(species, wavelength_m: float, power_w: float, waist_m: float, waist_y_m: float) -> float:
    """Peak potential (J, > 0 repulsive) of an elliptical Gaussian sheet:
    V0 = (U/I) 2P/(pi w w_y), U/I from `seqgen.physics.optical.dipole_potential_per_intensity`
    (Adv. At. Mol. Opt. Phys. 42, 95 (2000)), 2P/(pi w w_y) from `seqgen.physics.optical.peak_intensity`."""
    from .optical import dipole_potential_per_intensity, peak_intensity

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
    from .scattering import larmor_clock, spinor_transmission

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



# --------------------------------------------------------------------------- mean-field release

# Interaction energy per atom of a Thomas-Fermi condensate in a harmonic trap, in units of mu: the integral of
# (g/2) n^2 over that of n for n ~ 1 - r^2 (Rev. Mod. Phys. 71, 463 (1999)).
RELEASED_FRACTION_OF_MU = 2.0 / 7.0
# A Thomas-Fermi velocity ellipsoid (n(v) ~ 1 - sum v_i^2 / V_i^2) projected on a line is (1 - v^2/S^2)^2 with
# S^2 = sum c_i^2 V_i^2 (c the line's direction cosines); its rms is S / sqrt(7) (the integral of
# v^2 (1 - v^2)^2 over that of (1 - v^2)^2 on [-1, 1] is 1/7).
PROJECTED_RMS_PER_HALF_WIDTH = 1.0 / math.sqrt(7.0)


def released_energy_per_atom(mu_j: float) -> float:
    """Interaction energy per atom (J) of a Thomas-Fermi condensate at chemical potential mu, all of it kinetic
    once the trap is off: (2/7) mu (Rev. Mod. Phys. 71, 463 (1999))."""
    return RELEASED_FRACTION_OF_MU * float(mu_j)


@dataclass(frozen=True)
class ScalingRelease:
    """The Castin-Dum scaling solution: `times` (s from the release), b (3, n) and db/dt (3, n, 1/s) per
    principal axis of the trap the condensate was held in."""

    times: np.ndarray
    b: np.ndarray
    b_dot: np.ndarray

    def at(self, t):
        """(b, db/dt) at times t (s, >= 0); beyond the last time straight-line flight (b' held)."""
        t = np.atleast_1d(np.asarray(t, dtype=float))
        last = self.times[-1]
        b = np.stack([np.interp(np.minimum(t, last), self.times, row) for row in self.b])
        bd = np.stack([np.interp(np.minimum(t, last), self.times, row) for row in self.b_dot])
        extra = np.maximum(t - last, 0.0)
        return b + bd * extra, bd


def scaling_release(omegas0_rad_s, pieces, t_end_s: float, n_times: int = 401) -> ScalingRelease:
    """Scaling factors of a Thomas-Fermi condensate released at t = 0 from a harmonic trap of principal
    frequencies omegas0 into the piecewise-constant trap `pieces` ((t_start, omega^2 per axis) in time order,
    the first at t = 0; omega^2 = 0 for no confinement along that axis):

        b_i'' = omega0_i^2 / (b_i b_1 b_2 b_3) - omega_i(t)^2 b_i,  b_i(0) = 1, b_i'(0) = 0

    (Phys. Rev. Lett. 77, 5315 (1996)). An atom that starts at x_i moves with velocity x_i b_i'(t) about the
    centre of mass, so the velocity distribution is the trap's Thomas-Fermi ellipsoid with half-widths
    R_i |b_i'(t)|; after a full release lim b_i' gives the asymptotic velocities."""
    from scipy.integrate import solve_ivp

    w0sq = np.asarray(omegas0_rad_s, dtype=float).reshape(3) ** 2
    t_end = max(float(t_end_s), 0.0)
    starts = [float(p[0]) for p in pieces] + [math.inf]
    times = np.linspace(0.0, t_end, max(int(n_times), 2))
    y = np.r_[np.ones(3), np.zeros(3)]
    out = np.empty((6, times.size))
    out[:, 0] = y
    for k, (t0, wsq) in enumerate(pieces):
        t1 = min(starts[k + 1], t_end)
        if t1 <= t0:
            continue
        wsq = np.asarray(wsq, dtype=float).reshape(3)

        def rhs(_t, z, wsq=wsq):
            b = z[:3]
            return np.concatenate([z[3:], w0sq / (b * np.prod(b)) - wsq * b])

        inside = (times > t0) & (times < t1)
        sol = solve_ivp(rhs, (t0, t1), y, method="DOP853", t_eval=np.r_[times[inside], t1],
                        rtol=1e-9, atol=1e-12)
        if not sol.success:
            raise RuntimeError(f"scaling-equation integration failed: {sol.message}")
        out[:, inside] = sol.y[:, :-1]
        y = sol.y[:, -1]
        out[:, times == t1] = y[:, None]
    return ScalingRelease(times, out[:3], out[3:])


def projected_half_width(half_widths, direction_cosines) -> float:
    """Half-width S = sqrt(sum c_i^2 X_i^2) of a Thomas-Fermi ellipsoid of half-widths X_i (positions or
    velocities) projected on the line with direction cosines c_i (its line density is (1 - s^2/S^2)^2)."""
    c = np.asarray(direction_cosines, dtype=float).reshape(3)
    return float(np.sqrt(np.sum(c**2 * np.asarray(half_widths, dtype=float).reshape(3) ** 2)))


# --------------------------------------------------------------------------- Larmor clock of the crossing


def transmitted_weighted_mean(weights, probability, values) -> float:
    """Mean of `values` over the incident distribution (quadrature `weights`) weighted by the transmitted
    probability: sum w P a / sum w P (0 when nothing is transmitted)."""
    wp = np.asarray(weights, dtype=float) * np.asarray(probability, dtype=float)
    norm = float(np.sum(wp))
    return float(np.sum(wp * np.asarray(values, dtype=float)) / norm) if norm > 0 else 0.0
