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

