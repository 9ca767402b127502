"""Stationary 1D scattering of a two-component (spinor) matter wave, and spin analysis.

Transfer matrices as in `seqgen.physics.scattering` (conventions there), 4x4
per cell: the local 2x2 potential matrix of each cell is diagonalised once (it
does not depend on energy) and the cell matrix is assembled from its
eigen-projectors.  Basis (up, down), Hamiltonian

    H = -hbar^2/(2m) d^2/dx^2 + [[V_up - hbar delta/2, hbar Omega/2],
                                 [hbar Omega/2,        V_down + hbar delta/2]],

i.e. H_spin = (hbar/2) Omega_vec . sigma, Omega_vec = (Omega, 0, (V_up - V_down)/hbar - delta).
Every public name is also importable from `seqgen.physics.scattering`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.constants import hbar

from .transfer_matrix import (PROBE_PER_CELL, aligned_counts, amplitudes, as_energies, chain_product, cos_and_sinc,
                              edges_and_cells, energy_blocks, jumps, refine)

__all__ = [
    "SpinorScatteringResult",
    "LarmorClock",
    "spinor_transmission",
    "solve_spinor",
    "bloch_vector",
    "transmitted_spin",
    "spin_rotation_angles",
    "larmor_clock",
    "rotation_per_rabi_frequency",
    "is_weak_probe",
]


@dataclass(frozen=True)
class SpinorScatteringResult:
    """Two-component scattering versus energy (basis (up, down)).

    t, r: (..., 2, 2) amplitudes for incidence from the left, column = incident
    component; t_right, r_right: same for incidence from the right.
    error_estimate: Richardson estimate of the error of t (from `solve_spinor`).
    """

    energies: np.ndarray
    t: np.ndarray
    r: np.ndarray
    t_right: np.ndarray
    r_right: np.ndarray
    error_estimate: np.ndarray | None = None
    n_cells: int = 0
    converged: bool = True

    @property
    def T(self):
        """Total transmitted probability for each incident component, (..., 2)."""
        return np.sum(np.abs(self.t) ** 2, axis=-2)

    @property
    def R(self):
        return np.sum(np.abs(self.r) ** 2, axis=-2)

    @property
    def unitarity_error(self):
        """max |S^H S - 1| of the 4x4 S-matrix [[r, t_right], [t, r_right]]."""
        S = np.concatenate([np.concatenate([self.r, self.t_right], axis=-1),
                            np.concatenate([self.t, self.r_right], axis=-1)], axis=-2)
        G = np.conj(np.swapaxes(S, -1, -2)) @ S - np.eye(4)
        return np.max(np.abs(G), axis=(-2, -1))


def _cell_values(x, f):
    return edges_and_cells(x, f)[1]


def spinor_transmission(x, v_up, v_down, omega_rabi, delta, energies_J, mass_kg):
    """Two-component transmission through a region with spin-dependent potentials and coupling.

    x: cell edges (m).  v_up, v_down (J), omega_rabi (Rabi frequency, rad/s,
    coupling hbar Omega/2), delta (detuning, rad/s): each callable of x,
    per-cell array, per-point array or scalar.  All vanish outside the grid.
    Each cell is solved exactly in the eigenbasis of its 2x2 potential matrix.
    Vectorised over energies (> 0, J).
    """
    x = np.asarray(x, dtype=float)
    vu, vd = _cell_values(x, v_up), _cell_values(x, v_down)
    om, de = _cell_values(x, omega_rabi), _cell_values(x, delta)
    E, Ef = as_energies(energies_J)
    if np.any(Ef <= 0):
        raise ValueError("energies must be positive (both asymptotic channels open)")
    m = float(mass_kg)
    d = np.diff(x)
    N = d.size

    W = np.empty((N, 2, 2))
    W[:, 0, 0] = vu - 0.5 * hbar * de
    W[:, 1, 1] = vd + 0.5 * hbar * de
    W[:, 0, 1] = W[:, 1, 0] = 0.5 * hbar * om
    wscale = max(float(np.max(np.abs(W))), np.finfo(float).tiny)
    w, U = np.linalg.eigh(W / wscale)                          # energy-independent
    w = w * wscale                                             # (N, 2)
    # Projector on the first eigenvector, entries (N, 1) to broadcast over energies.
    p00 = (U[:, 0, 0] ** 2)[:, None]
    p11 = (U[:, 1, 0] ** 2)[:, None]
    p01 = (U[:, 0, 0] * U[:, 1, 0])[:, None]

    k = np.sqrt(2.0 * m * Ef) / hbar
    kk = np.stack([k, k], axis=-1)
    scale = 2.0 * m / hbar**2
    shp = E.shape
    t = np.empty((Ef.size, 2, 2), dtype=complex)
    r, tr, rr = np.empty_like(t), np.empty_like(t), np.empty_like(t)
    for sl in energy_blocks(N, Ef.size):
        k0 = k[sl]
        q2 = scale * (Ef[sl][None, :, None] - w[:, None, :])  # (N, B, 2)
        c, s = cos_and_sinc(q2, d[:, None, None], check_total=True)
        qs = q2 * s
        # Block f0 P0 + f1 P1 with P1 = 1 - P0 (real symmetric): three distinct
        # entries, each written as a sum of like-signed terms where possible.
        M = np.empty((N, k0.size, 4, 4))
        blocks = ((c, 1.0, ((0, 0), (2, 2))), (s, k0, ((0, 2),)), (qs, -1.0 / k0, ((2, 0),)))
        for f, fac, corners in blocks:
            f0, f1 = f[..., 0] * fac, f[..., 1] * fac
            e00 = f0 * p00 + f1 * p11
            e11 = f0 * p11 + f1 * p00
            e01 = (f0 - f1) * p01
            for i, j in corners:
                M[..., i, j] = e00
                M[..., i + 1, j + 1] = e11
                M[..., i, j + 1] = e01
                M[..., i + 1, j] = e01
        P = chain_product(M)
        t[sl], r[sl], tr[sl], rr[sl] = amplitudes(P, kk[sl], kk[sl], x[0], x[-1], k0)
    return SpinorScatteringResult(E, t.reshape(shp + (2, 2)), r.reshape(shp + (2, 2)),
                                  tr.reshape(shp + (2, 2)), rr.reshape(shp + (2, 2)), None, N, True)


def solve_spinor(v_up, v_down, omega_rabi, delta, x_range, energies_J, mass_kg, *, rtol=1e-6,
                 n_cells=64, max_cells=2**15):
    """`spinor_transmission` on a grid over x_range, refined until the estimated error of
    every amplitude t_ij is below rtol / 3 relative to max|t|.  As in `scattering.solve`:
    the jumps of every callable profile are cell edges, successive grids (c -> 2c - 1
    cells per piece between jumps) are not nested, error_estimate is Richardson |t_fine - t_coarse| / (r^2 - 1)
    and converged is False when max_cells is reached first.  Profiles as in
    `spinor_transmission` (callables or scalars).
    """
    x0, x1 = map(float, x_range)
    cuts = jumps((v_up, v_down, omega_rabi, delta), x0, x1, PROBE_PER_CELL * n_cells)

    def run(x):
        return spinor_transmission(x, v_up, v_down, omega_rabi, delta, energies_J, mass_kg)

    def metric(res):
        # Relative to the largest amplitude of each energy so tiny off-diagonal
        # amplitudes do not stall the refinement.
        return res.t / np.max(np.abs(res.t), axis=(-2, -1), keepdims=True)

    res, err, n, ok = refine(run, metric, aligned_counts(x0, x1, cuts, n_cells), rtol, max_cells)
    err = err * np.max(np.abs(res.t), axis=(-2, -1), keepdims=True)
    return SpinorScatteringResult(res.energies, res.t, res.r, res.t_right, res.r_right, err, n, ok)


# --------------------------------------------------------------------------
# Spin analysis: Bloch vectors, rotation angles, Larmor clock
# --------------------------------------------------------------------------

def bloch_vector(spinor):
    """Unit Bloch vector (<sigma_x>, <sigma_y>, <sigma_z>) of spinor(s) (..., 2) = (up, down)."""
    psi = np.asarray(spinor, dtype=complex)
    a, b = psi[..., 0], psi[..., 1]
    ab = np.conj(a) * b
    norm = np.abs(a) ** 2 + np.abs(b) ** 2
    return np.stack([2.0 * ab.real, 2.0 * ab.imag, np.abs(a) ** 2 - np.abs(b) ** 2], axis=-1) / norm[..., None]


def transmitted_spin(t_matrix, spin_in):
    """(transmitted probability, Bloch vector) for a normalised incident spinor spin_in (2,)."""
    chi = np.asarray(spin_in, dtype=complex)
    chi = chi / np.linalg.norm(chi)
    out = np.asarray(t_matrix) @ chi
    return np.sum(np.abs(out) ** 2, axis=-1), bloch_vector(out)


def spin_rotation_angles(bloch_in, bloch_out, axis):
    """(precession, alignment) angles (rad) of the spin about `axis`.

    precession: right-handed rotation about axis of the component perpendicular
    to it, from bloch_in to bloch_out.  alignment: change of elevation towards
    -axis, the low-energy direction of H = (hbar/2) omega axis.sigma
    (omega > 0); positive when the transmitted spin turns towards lower energy.
    """
    n = np.asarray(axis, dtype=float)
    n = n / np.linalg.norm(n)
    s_in = np.asarray(bloch_in, dtype=float)
    s_out = np.asarray(bloch_out, dtype=float)
    p_in = s_in - np.sum(s_in * n, axis=-1, keepdims=True) * n
    p_out = s_out - np.sum(s_out * n, axis=-1, keepdims=True) * n
    prec = np.arctan2(np.sum(np.cross(p_in, p_out) * n, axis=-1), np.sum(p_in * p_out, axis=-1))
    elev_in = np.arcsin(np.clip(-np.sum(s_in * n, axis=-1), -1.0, 1.0))
    elev_out = np.arcsin(np.clip(-np.sum(s_out * n, axis=-1), -1.0, 1.0))
    return prec, elev_out - elev_in


@dataclass(frozen=True)
class LarmorClock:
    """Transmitted spin and Larmor-clock readings (angles in rad, times in s)."""

    probability: np.ndarray
    bloch: np.ndarray
    precession_angle: np.ndarray
    alignment_angle: np.ndarray
    precession_time: np.ndarray
    alignment_time: np.ndarray


def larmor_clock(t_matrix, spin_in, axis, omega_rad_s):
    """Larmor clock of transmitted particles (Sov. J. Nucl. Phys. 4, 182 (1967); Phys. Rev. B 27, 6178 (1983)).

    The field region acts as H = (hbar/2) omega axis.sigma; with spin_in
    perpendicular to axis, in the weak-field limit
        precession_angle = omega tau_y,  tau_y = -hbar d(arg t)/dV0,
        alignment_angle  = omega tau_z,  tau_z = -hbar d(ln|t|)/dV0,
    with t the spin-independent amplitude and V0 the barrier height.  Returns
    times = angle / omega (for a Rabi coupling use omega = Omega).
    """
    p, s = transmitted_spin(t_matrix, spin_in)
    s_in = bloch_vector(np.asarray(spin_in, dtype=complex))
    prec, align = spin_rotation_angles(np.broadcast_to(s_in, s.shape), s, axis)
    return LarmorClock(p, s, prec, align, prec / omega_rad_s, align / omega_rad_s)


def rotation_per_rabi_frequency(angle_rad, omega_rabi_rad_s):
    """Rotation angle per unit Rabi frequency (s): the effective interaction time."""
    return np.asarray(angle_rad) / omega_rabi_rad_s


def is_weak_probe(angle_rad, threshold=0.1):
    """True where |rotation| < threshold (rad): the coupling only probes the dwell time,
    linear response holds (common practice, no source)."""
    return np.abs(np.asarray(angle_rad)) < threshold
