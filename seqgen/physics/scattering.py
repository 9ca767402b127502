"""Stationary 1D scattering of a matter wave off a barrier, scalar and two-component.

Plain functions in SI units (J, m, kg, s, rad/s), independent of the rest of
seqgen.  Modules: this one (potentials, scalar transmission, adaptive `solve`,
closed forms, momentum averages), `spinor` (two components, spin analysis;
re-exported here) and `transfer_matrix` (the shared numerics and the grid
refinement).  The solver is a transfer-matrix method with piecewise-constant cells:
inside a cell of width d with constant potential V the exact solution is
propagated by

    (psi, psi'/k0)(x + d) = [[cos qd, k0 sin(qd)/q], [-q sin(qd)/k0, cos qd]] (psi, psi'/k0)(x),
    q^2 = 2 m (E - V) / hbar^2,

whose entries are entire functions of q^2: they are evaluated in real arithmetic
(cos/cosh, sin/sinh) and E = V in a cell is just the removable limit
sin(qd)/q -> d, so no complex shift is needed.  k0 is a per-energy wave number
that keeps the entries dimensionless.  The product over cells is a pairwise
tree reduction (log2(cells) Python steps) of stacked matrices, vectorised over
energies.  For two components the local 2x2 potential matrix of each cell is
diagonalised once (it does not depend on energy) and the 4x4 cell matrix is
assembled from its eigen-projectors.  (Piecewise-constant transfer matrices for
arbitrary barriers: J. Appl. Phys. 61, 1497 (1987), from memory.)

Conventions
-----------
* Scalar: for x < x_min, psi = exp(i k_L x) + r exp(-i k_L x); for x > x_max,
  psi = t exp(i k_R x), with absolute x (so a barrier on [0, a] gives the
  textbook t = exp(-i k a) / D).  T = (k_R / k_L) |t|^2, R = |r|^2.
* Spinor, basis (up, down), Hamiltonian
      H = -hbar^2/(2m) d^2/dx^2 + [[V_up - hbar delta/2, hbar Omega/2],
                                   [hbar Omega/2,        V_down + hbar delta/2]],
  i.e. H_spin = (hbar/2) Omega_vec . sigma with
  Omega_vec = (Omega, 0, (V_up - V_down)/hbar - delta); the Bloch vector precesses
  right-handed about Omega_vec.  Outside the grid both components have V = 0
  and no coupling.  Amplitudes are flux-normalised (equal to the plain ones
  since both asymptotes are zero); t[..., i, j] is the amplitude transmitted
  into component i for unit flux incident from the left in component j.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.constants import hbar, k as k_B

# The two-component functions live in `spinor`; re-exported so callers keep importing them from here.
from .spinor import (LarmorClock, SpinorScatteringResult, bloch_vector, is_weak_probe, larmor_clock,
                     rotation_per_rabi_frequency, solve_spinor, spin_rotation_angles, spinor_transmission,
                     transmitted_spin)
from .transfer_matrix import (PROBE_PER_CELL, aligned_counts, amplitudes, as_energies, chain_product, cos_and_sinc,
                              edges_and_cells, energy_blocks, jumps, refine)

__all__ = [
    "ScatteringResult",
    "SpinorScatteringResult",
    "LarmorClock",
    "MomentumAverage",
    "gaussian_sheet_potential",
    "rectangular_potential",
    "poeschl_teller_potential",
    "tabulated_potential",
    "transmission",
    "solve",
    "spinor_transmission",
    "solve_spinor",
    "rectangular_barrier_amplitude_exact",
    "rectangular_barrier_transmission_exact",
    "poeschl_teller_transmission_exact",
    "bloch_vector",
    "transmitted_spin",
    "spin_rotation_angles",
    "larmor_clock",
    "rotation_per_rabi_frequency",
    "is_weak_probe",
    "average_over_momentum",
    "thermal_velocity_rms",
    "condensate_velocity_rms",
    "THOMAS_FERMI_MOMENTUM_WIDTH",
]

# --------------------------------------------------------------------------
# Potentials
# --------------------------------------------------------------------------

def gaussian_sheet_potential(x, V0, waist):
    """Light-sheet barrier V0 exp(-2 x^2 / w^2) (w = 1/e^2 intensity radius).

    The dipole potential follows the intensity profile of a Gaussian beam
    (Adv. At. Mol. Opt. Phys. 42, 95 (2000)).
    """
    x = np.asarray(x, dtype=float)
    return V0 * np.exp(-2.0 * x**2 / waist**2)


def rectangular_potential(x, V0, width, center=0.0):
    """V0 for |x - center| < width/2, else 0."""
    x = np.asarray(x, dtype=float)
    return np.where(np.abs(x - center) < 0.5 * width, V0, 0.0)


def poeschl_teller_potential(x, V0, a):
    """V0 / cosh^2(x / a) (Quantum Mechanics: Non-relativistic Theory, Course of
    Theoretical Physics vol. 3, section 25, problem 4)."""
    x = np.asarray(x, dtype=float)
    # 1/cosh^2 = 4 e^{-2|u|} / (1 + e^{-2|u|})^2 never overflows.
    e = np.exp(-2.0 * np.abs(x / a))
    return V0 * 4.0 * e / (1.0 + e) ** 2


def tabulated_potential(x_table, V_table, outside=(0.0, 0.0)):
    """Callable linear interpolation of a user table; `outside` = values beyond its ends."""
    xt = np.asarray(x_table, dtype=float)
    vt = np.asarray(V_table, dtype=float)
    if xt.ndim != 1 or xt.shape != vt.shape or np.any(np.diff(xt) <= 0):
        raise ValueError("x_table must be strictly increasing and match V_table")

    def V(x):
        return np.interp(np.asarray(x, dtype=float), xt, vt, left=outside[0], right=outside[1])

    return V



# --------------------------------------------------------------------------
# Scalar scattering
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class ScatteringResult:
    """Scalar scattering versus energy.

    t, r: complex amplitudes (conventions in the module docstring); T, R:
    probabilities; error_estimate: estimated absolute error of T (Richardson
    on the last two grids, only from `solve`, else None).
    """

    energies: np.ndarray
    t: np.ndarray
    r: np.ndarray
    T: np.ndarray
    R: np.ndarray
    error_estimate: np.ndarray | None = None
    n_cells: int = 0
    converged: bool = True

    @property
    def phase_t(self):
        return np.angle(self.t)

    @property
    def phase_r(self):
        return np.angle(self.r)

    @property
    def unitarity_error(self):
        """|R + T - 1| (zero up to rounding: the cell model conserves current exactly)."""
        return np.abs(self.R + self.T - 1.0)



def transmission(x, potential, energies_J, mass_kg, *, v_left=0.0, v_right=0.0):
    """Transmission and reflection of a matter wave off V(x) on a grid.

    x: cell edges (m).  potential (J): callable V(x) (sampled at cell
    midpoints), one value per cell, one value per grid point (cell = mean of
    its ends) or a scalar.  energies_J: kinetic energy far left (any shape);
    v_left, v_right: constant potentials beyond the grid (J).  Every energy
    must exceed both.  Vectorised over energies.
    """
    x, Vc = edges_and_cells(x, potential)
    E, Ef = as_energies(energies_J)
    if np.any(Ef <= max(v_left, v_right)):
        raise ValueError("every energy must exceed the asymptotic potentials (open channels)")
    m = float(mass_kg)
    d = np.diff(x)
    kL = np.sqrt(2.0 * m * (Ef - v_left)) / hbar
    kR = np.sqrt(2.0 * m * (Ef - v_right)) / hbar
    t = np.empty(Ef.size, dtype=complex)
    r = np.empty(Ef.size, dtype=complex)
    scale = 2.0 * m / hbar**2
    for sl in energy_blocks(Vc.size, Ef.size):
        k0 = kL[sl]
        q2 = scale * (Ef[sl][None, :] - Vc[:, None])          # (N, B)
        c, s = cos_and_sinc(q2, d[:, None], check_total=True)
        M = np.empty(q2.shape + (2, 2))
        M[..., 0, 0] = c
        M[..., 1, 1] = c
        M[..., 0, 1] = k0 * s
        M[..., 1, 0] = -(q2 * s) / k0
        P = chain_product(M)
        tf, rf, _, _ = amplitudes(P, kL[sl, None], kR[sl, None], x[0], x[-1], k0)
        # Flux-normalised -> plain-wave amplitude: t_plain = t_flux sqrt(k_L/k_R).
        t[sl] = tf[:, 0, 0] * np.sqrt(kL[sl] / kR[sl])
        r[sl] = rf[:, 0, 0]
    T = (kR / kL) * np.abs(t) ** 2
    R = np.abs(r) ** 2
    shp = E.shape
    return ScatteringResult(E, t.reshape(shp), r.reshape(shp), T.reshape(shp), R.reshape(shp), None, Vc.size, True)



def solve(potential, x_range, energies_J, mass_kg, *, rtol=1e-6, n_cells=64, max_cells=2**16,
          v_left=0.0, v_right=0.0):
    """`transmission` on a grid over x_range = (x_min, x_max), refined until the estimated
    relative error of T is below rtol / 3; potential: callable V(x) in J.

    Jumps of V (steps, the edges of a rectangle) are located first by bisection
    on a probe grid 16x finer than the first grid, and made cell edges: a cell
    straddling a jump is only first order in the cell width and its error does
    not shrink regularly, which fooled a comparison of successive nested grids
    (per-cent errors on a rectangle reported as converged).  Between jumps the
    cells are uniform and midpoint-sampled, second order; each piece grows from c
    to 2c - 1 cells, so successive grids are not nested.  error_estimate:
    Richardson on the last two grids, |T_fine - T_coarse| / (r^2 - 1), r the
    smallest ratio of cell counts.  converged is False when the next grid would
    pass max_cells.  Not located: kinks (a jump of dV/dx only; they stay second
    order) and a step up and down again inside one probe interval,
    (x_max - x_min) / (16 n_cells).
    """
    if not callable(potential):
        raise TypeError("solve needs a callable potential (use tabulated_potential for tables)")
    x0, x1 = map(float, x_range)
    cuts = jumps((potential,), x0, x1, PROBE_PER_CELL * n_cells)

    def run(x):
        return transmission(x, potential, energies_J, mass_kg, v_left=v_left, v_right=v_right)

    res, err, n, ok = refine(run, lambda r: r.T, aligned_counts(x0, x1, cuts, n_cells), rtol,
                             max_cells)
    return ScatteringResult(res.energies, res.t, res.r, res.T, res.R, err, n, ok)


# --------------------------------------------------------------------------
# Closed forms
# --------------------------------------------------------------------------

def rectangular_barrier_amplitude_exact(E, V0, width, mass_kg):
    """Complex t of a rectangular barrier V0 on [0, a] (psi = t e^{ikx} for x > a).

    t = e^{-ika} / [cos(qa) - i (q^2 + k^2)/(2k) sin(qa)/q],  q^2 = 2m(E - V0)/hbar^2,
    which is the textbook result written with functions entire in q^2 (below the
    barrier cos -> cosh(kappa a), sin(qa)/q -> sinh(kappa a)/kappa).
    """
    E = np.asarray(E, dtype=float)
    k = np.sqrt(2.0 * mass_kg * E) / hbar
    q2 = 2.0 * mass_kg * (E - V0) / hbar**2
    c, s = cos_and_sinc(q2, width)
    D = c - 0.5j * (q2 + k**2) / k * s
    return np.exp(-1j * k * width) / D


def rectangular_barrier_transmission_exact(E, V0, width, mass_kg):
    """T = [1 + V0^2 sinh^2(kappa a) / (4 E (V0 - E))]^-1 below the barrier,
    [1 + V0^2 sin^2(q a) / (4 E (E - V0))]^-1 above, [1 + m V0 a^2 / (2 hbar^2)]^-1 at E = V0
    (any quantum mechanics text).  Evaluated as 1/|D|^2 of the amplitude form.
    """
    E = np.asarray(E, dtype=float)
    k = np.sqrt(2.0 * mass_kg * E) / hbar
    q2 = 2.0 * mass_kg * (E - V0) / hbar**2
    c, s = cos_and_sinc(q2, width)
    # |D|^2 = c^2 + ((q^2 + k^2)/(2k))^2 s^2 = 1 + ((q^2 - k^2)/(2k))^2 s^2 since c^2 + q^2 s^2 = 1.
    return 1.0 / (1.0 + (0.5 * (q2 - k**2) / k * s) ** 2)


def poeschl_teller_transmission_exact(E, V0, a, mass_kg):
    """Transmission through V0 / cosh^2(x/a) (Quantum Mechanics: Non-relativistic
    Theory, Course of Theoretical Physics vol. 3, section 25, problem 4):

        T = sinh^2(pi k a) / [sinh^2(pi k a) + cosh^2((pi/2) sqrt(8 m V0 a^2/hbar^2 - 1))]

    with cosh^2 -> cos^2((pi/2) sqrt(1 - 8 m V0 a^2/hbar^2)) when the root is imaginary.
    """
    E = np.asarray(E, dtype=float)
    k = np.sqrt(2.0 * mass_kg * E) / hbar
    g = 8.0 * mass_kg * V0 * a**2 / hbar**2 - 1.0
    if g >= 0:
        ch2 = np.cosh(0.5 * np.pi * np.sqrt(g)) ** 2
    else:
        ch2 = np.cos(0.5 * np.pi * np.sqrt(-g)) ** 2
    # Divide through by sinh^2 to avoid inf/inf at large k a.
    x = np.pi * k * a
    inv_sh2 = np.where(x < 350.0, 1.0 / np.sinh(np.minimum(x, 350.0)) ** 2, 0.0)
    return 1.0 / (1.0 + ch2 * inv_sh2)


# --------------------------------------------------------------------------
# Averaging over the incident momentum distribution
# --------------------------------------------------------------------------

@dataclass(frozen=True)
class MomentumAverage:
    """Gaussian-velocity average: mean and spread (std over the distribution) of T,
    T-weighted mean and spread of the rotation angle (None if no angle given)."""

    mean_transmission: float
    transmission_spread: float
    mean_rotation: float | None
    rotation_spread: float | None
    velocities: np.ndarray
    weights: np.ndarray


def average_over_momentum(result_fn: Callable, mean_velocity, velocity_rms, mass_kg, n_points=32):
    """Average over a Gaussian incident velocity distribution N(mean_velocity, velocity_rms^2) (m/s).

    Gauss-Hermite quadrature (Handbook of Mathematical Functions, NBS AMS 55
    (1964), 25.4.46, from memory; exact for polynomials of degree < 2 n_points):
    v_i = v0 + sqrt(2) sigma x_i, weights w_i / sqrt(pi).  result_fn(energies_J)
    returns T (array), a `ScatteringResult`, or a tuple (T, rotation_angle).
    Energies are m v^2 / 2 with |v|: nodes at negative velocity are taken as
    the same barrier hit from the other side (exact for symmetric barriers).
    Mean rotation = sum w T angle / sum w T.
    """
    if mean_velocity <= 0 or velocity_rms < 0:
        raise ValueError("need mean_velocity > 0 and velocity_rms >= 0")
    x, w = np.polynomial.hermite.hermgauss(int(n_points))
    v = mean_velocity + np.sqrt(2.0) * velocity_rms * x
    w = w / np.sqrt(np.pi)
    out = result_fn(0.5 * mass_kg * v**2)
    angle = None
    if isinstance(out, tuple):
        out, angle = out
    T = np.asarray(out.T if isinstance(out, ScatteringResult) else out, dtype=float)
    mean_T = float(np.sum(w * T))
    spread_T = float(np.sqrt(max(np.sum(w * T**2) - mean_T**2, 0.0)))
    mean_a = spread_a = None
    if angle is not None:
        angle = np.asarray(angle, dtype=float)
        wt = w * T
        norm = np.sum(wt)
        mean_a = float(np.sum(wt * angle) / norm)
        spread_a = float(np.sqrt(max(np.sum(wt * angle**2) / norm - mean_a**2, 0.0)))
    return MomentumAverage(mean_T, spread_T, mean_a, spread_a, v, w)


def thermal_velocity_rms(temperature_K, mass_kg):
    """1D Maxwell-Boltzmann velocity spread sqrt(k_B T / m) (m/s)."""
    return np.sqrt(k_B * np.asarray(temperature_K, dtype=float) / mass_kg)


# Gaussian-equivalent momentum width of a Thomas-Fermi condensate along an axis,
# in units of hbar / R (R = Thomas-Fermi radius along that axis).  The axial
# momentum distribution is the Fourier transform of sqrt(1 - r^2/R^2)
# integrated over the transverse momenta, n(k) ~ int_0^1 c^3 J1(k R c)^2 dc / k^2;
# its rms diverges logarithmically (sharp Thomas-Fermi edge), so we use the
# Gaussian with the same FWHM: HWHM = 1.88647 / R, sigma = FWHM / 2.35482.
# (A Gaussian of the same area and peak gives 1.625, i.e. about sqrt(21/8).)
THOMAS_FERMI_MOMENTUM_WIDTH = 1.60222


def condensate_velocity_rms(thomas_fermi_radius_m, mass_kg):
    """Velocity spread of a Thomas-Fermi condensate along an axis (m/s).

    Model: Gaussian with the FWHM of the Thomas-Fermi momentum distribution,
    sigma_v = 1.602 hbar / (m R) (see THOMAS_FERMI_MOMENTUM_WIDTH); the
    Heisenberg scale hbar / (2 m R) is the order of magnitude.  Interaction
    energy released in time of flight is not included.
    """
    return THOMAS_FERMI_MOMENTUM_WIDTH * hbar / (mass_kg * np.asarray(thomas_fermi_radius_m, dtype=float))
