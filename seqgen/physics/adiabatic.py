"""Excitation of atoms by a change of harmonic trap frequency.

Angular frequencies in rad/s, times in s, energies in J, temperatures in K.
Callables ``omega_of_t`` take a time (scalar or array) and return omega.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import constants as sc


def adiabaticity_profile(t, omega_t, axis: int = -1) -> np.ndarray:
    """|d omega/dt| / omega^2 at each sample (second-order finite differences)."""
    t = np.asarray(t, dtype=float)
    omega_t = np.asarray(omega_t, dtype=float)
    return np.abs(np.gradient(omega_t, t, axis=axis, edge_order=2)) / omega_t**2


def adiabaticity_parameter(t, omega_t, axis: int = -1):
    """max over samples of |d omega/dt| / omega^2.

    A ramp is effectively adiabatic when this is << 1 (common practice, no
    source). ``omega_t`` may hold several traces stacked on other axes.
    """
    return np.max(adiabaticity_profile(t, omega_t, axis=axis), axis=axis)


@dataclass(frozen=True)
class RampExcitation:
    """Result of a single-oscillator ramp.

    ``energy_ratio`` = E / E_adiabatic in the final trap (1 = no excitation).
    ``breathing_amplitude`` = (b_max - b_min) / (2 b_eq) of the width's
    oscillation that follows in the final trap, b_eq = sqrt(omega_0/omega_f).
    """

    energy_ratio: float
    breathing_amplitude: float
    b: float
    b_dot: float


def _finite(x: float, what: str) -> float:
    x = float(x)
    if not np.isfinite(x) or x <= 0:
        raise ValueError(f"{what} must be finite and positive, got {x}")
    return x


def ermakov_final_energy_ratio(omega_of_t: Callable, t0: float, t1: float, rtol: float = 1e-10, *,
                               omega_initial: float | None = None, squared: bool = False) -> RampExcitation:
    """Final energy over adiabatic energy after a frequency ramp of a harmonic trap.

    Integrates the Ermakov equation b'' + omega(t)^2 b = omega_0^2 / b^3
    (J. Math. Phys. 10, 1458 (1969)) with DOP853 from b = 1, b' = 0 (an
    eigenstate or thermal state of the trap omega_0 = omega(t0), or
    ``omega_initial`` for a sudden change at t0). Then
    E/E_ad = (b'^2 + omega_f^2 b^2 + omega_0^2 / b^2) / (2 omega_0 omega_f),
    the same for every eigenstate of the initial trap, hence also for a
    thermal gas. In the final trap the width oscillates between
    b_pm = b_eq sqrt(r +- sqrt(r^2 - 1)), r = E/E_ad.
    With ``squared=True`` the callable returns omega^2 (may be negative:
    expulsive intervals).
    """
    from scipy.integrate import solve_ivp

    if not t1 > t0:
        raise ValueError("need t1 > t0")

    def w2(t):
        v = float(omega_of_t(t))
        return v if squared else v * v

    w0sq = w2(t0) if omega_initial is None else float(omega_initial) ** 2
    w0 = np.sqrt(_finite(w0sq, "initial omega^2"))
    wf = np.sqrt(_finite(w2(t1), "final omega^2"))

    # dimensionless time tau = omega_0 (t - t0) keeps the state of order 1
    def rhs(tau, y):
        b, bd = y
        return (bd, 1.0 / b**3 - w2(t0 + tau / w0) / w0sq * b)

    sol = solve_ivp(rhs, (0.0, (t1 - t0) * w0), [1.0, 0.0], method="DOP853", rtol=rtol, atol=rtol * 1e-2)
    if not sol.success:
        raise RuntimeError(f"Ermakov integration failed: {sol.message}")
    b, bd_tau = sol.y[:, -1]
    bd = bd_tau * w0
    ratio = (bd**2 + wf**2 * b**2 + w0sq / b**2) / (2 * w0 * wf)
    ratio = max(ratio, 1.0)  # r >= 1 exactly; round-off only
    s = np.sqrt(ratio**2 - 1)
    amp = (np.sqrt(ratio + s) - np.sqrt(ratio - s)) / 2
    return RampExcitation(energy_ratio=float(ratio), breathing_amplitude=float(amp), b=float(b), b_dot=float(bd))


def sudden_energy_ratio(omega0, omega1):
    """E/E_ad after a sudden change of a harmonic trap from omega0 to omega1 (per axis, vectorised).

    Derivation: in the trap omega0 any eigenstate or thermal state has half its energy E0 kinetic and half
    potential (virial theorem). A sudden change keeps positions and velocities: the kinetic part stays E0/2,
    the potential part m omega^2 <x^2>/2 becomes (omega1/omega0)^2 E0/2, so E = E0 (omega0^2 + omega1^2) /
    (2 omega0^2). An adiabatic change keeps the action E/omega (Mechanics, 3rd ed., Pergamon (1976), sect. 49,
    from memory): E_ad = E0 omega1/omega0. Hence E/E_ad = (omega0^2 + omega1^2) / (2 omega0 omega1), the
    Ermakov ratio of ermakov_final_energy_ratio with b = 1, b' = 0 at the change.
    """
    w0 = np.asarray(omega0, dtype=float)
    w1 = np.asarray(omega1, dtype=float)
    return (w0**2 + w1**2) / (2 * w0 * w1)


# --- Thomas-Fermi condensate ----------------------------------------------

def _tf_rhs_factory(omegas_sq_of_t: Callable, w0sq: np.ndarray, t0: float, tscale: float):
    def rhs(tau, y):
        lam, lamd = y[:3], y[3:]
        w2 = np.asarray(omegas_sq_of_t(t0 + tau / tscale), dtype=float) / tscale**2
        return np.concatenate([lamd, (w0sq / tscale**2) / (lam * np.prod(lam)) - w2 * lam])
    return rhs


def tf_equilibrium_scaling(omegas_initial, omegas_final) -> np.ndarray:
    """Equilibrium lambda_j of a Thomas-Fermi condensate moved from trap omegas_initial to omegas_final.

    From lambda_j^2 prod(lambda) = (omega_j0/omega_jf)^2:
    lambda_j = r_j (r_x r_y r_z)^(-1/5), r_j = omega_j0/omega_jf; equivalently
    R_j ~ omega_bar^(3/5)/omega_j (Thomas-Fermi radii,
    "Bose-Einstein Condensation in Dilute Gases", Cambridge University Press (2008)).
    """
    r = np.asarray(omegas_initial, dtype=float) / np.asarray(omegas_final, dtype=float)
    return r * np.prod(r) ** (-0.2)


def _tf_energy(lam, lamd, w0sq, wsq):
    """Energy per atom in units of the initial chemical potential mu_0 (scaling ansatz).

    Flow + trap energy (1/7)(lambda'^2 + omega^2 lambda^2)/omega_0^2 per axis and
    interaction (2/7)/prod(lambda); 5/7 at t0 as for any Thomas-Fermi ground state.
    """
    return float(np.sum((lamd**2 + wsq * lam**2) / w0sq) / 7 + (2 / 7) / np.prod(lam))


def _tf_stiffness(lam_eq, w0sq, wsq):
    """Mass and stiffness matrices of the scaling Lagrangian at lam_eq (same units as _tf_energy)."""
    mass = np.diag(2 / (7 * w0sq))
    p = np.prod(lam_eq)
    k = (2 / 7) / p * (1 / np.outer(lam_eq, lam_eq) + np.diag(1 / lam_eq**2)) + np.diag(2 * wsq / (7 * w0sq))
    return mass, k


def tf_mode_frequencies(omegas) -> np.ndarray:
    """Small-oscillation frequencies (rad/s, ascending) of a Thomas-Fermi condensate in the
    scaling ansatz, i.e. the monopole/quadrupole modes of Phys. Rev. Lett. 77, 2360 (1996)
    (isotropic trap: sqrt(5) omega and sqrt(2) omega twice)."""
    w = np.asarray(omegas, dtype=float)
    mass, k = _tf_stiffness(np.ones(3), w**2, w**2)
    lam = np.linalg.eigvals(np.linalg.solve(mass, k)).real
    return np.sort(np.sqrt(lam))


@dataclass(frozen=True)
class CondensateRampExcitation:
    """Result of a Thomas-Fermi condensate ramp.

    ``lambdas``/``lambda_dots`` at the end; ``equilibrium`` the final-trap
    equilibrium scaling; ``breathing_amplitude`` per axis = the largest
    |lambda_j - lambda_eq,j| / lambda_eq,j reached afterwards in the final trap,
    from its linear normal modes; ``excitation_fraction`` = (E - E_eq)/E_eq in
    the final trap.
    """

    lambdas: np.ndarray
    lambda_dots: np.ndarray
    equilibrium: np.ndarray
    breathing_amplitude: np.ndarray
    excitation_fraction: float


def condensate_ramp_excitation(omegas_of_t: Callable, t0: float, t1: float, rtol: float = 1e-10) -> CondensateRampExcitation:
    """Ramp of a Thomas-Fermi condensate through the scaling equations of
    Phys. Rev. Lett. 77, 5315 (1996):
    lambda_j'' = omega_j(0)^2 / (lambda_j lambda_x lambda_y lambda_z) - omega_j(t)^2 lambda_j,
    from lambda = 1, lambda' = 0 at t0. ``omegas_of_t(t)`` returns the three
    angular frequencies (rad/s).
    """
    from scipy.integrate import solve_ivp

    if not t1 > t0:
        raise ValueError("need t1 > t0")
    w0 = np.asarray(omegas_of_t(t0), dtype=float).reshape(3)
    wf = np.asarray(omegas_of_t(t1), dtype=float).reshape(3)
    if np.any(w0 <= 0) or np.any(wf <= 0):
        raise ValueError("trap frequencies must be positive at both ends")
    tscale = float(w0.max())
    rhs = _tf_rhs_factory(lambda t: np.asarray(omegas_of_t(t), dtype=float) ** 2, w0**2, t0, tscale)
    sol = solve_ivp(rhs, (0.0, (t1 - t0) * tscale), np.r_[np.ones(3), np.zeros(3)], method="DOP853",
                    rtol=rtol, atol=rtol * 1e-2)
    if not sol.success:
        raise RuntimeError(f"scaling-equation integration failed: {sol.message}")
    lam, lamd = sol.y[:3, -1], sol.y[3:, -1] * tscale
    w0sq, wfsq = w0**2, wf**2
    eq = tf_equilibrium_scaling(w0, wf)
    e = _tf_energy(lam, lamd, w0sq, wfsq)
    e_eq = _tf_energy(eq, np.zeros(3), w0sq, wfsq)
    # normal modes of the final trap: K v = Omega^2 M v
    mass, k = _tf_stiffness(eq, w0sq, wfsq)
    m_half = np.sqrt(np.diag(mass))
    om2, q = np.linalg.eigh(k / np.outer(m_half, m_half))
    modes = q / m_half[:, None]  # columns: mode shapes in lambda space, M-orthonormal
    a = modes.T @ mass @ (lam - eq)
    adot = modes.T @ mass @ lamd
    amp = np.sqrt(a**2 + adot**2 / om2)
    envelope = np.abs(modes) @ amp
    return CondensateRampExcitation(lambdas=lam, lambda_dots=lamd, equilibrium=eq,
                                    breathing_amplitude=envelope / eq,
                                    excitation_fraction=max(0.0, (e - e_eq) / e_eq))


# --- shortcut to adiabaticity ---------------------------------------------

@dataclass(frozen=True)
class ShortcutRamp:
    """Frictionless decompression/compression omega_0 -> omega_f in time T
    (Phys. Rev. Lett. 104, 063002 (2010)):
    b(s) = 1 + (gamma - 1)(10 s^3 - 15 s^4 + 6 s^5), s = t/T, gamma = sqrt(omega_0/omega_f),
    omega(t)^2 = omega_0^2 / b^4 - b''/b. Before t = 0 omega = omega_0, after T omega_f.

    Call it (or ``omega``) for omega(t); where omega^2 < 0 (expulsive, short T)
    that gives NaN: use ``omega_squared`` with
    ermakov_final_energy_ratio(..., squared=True).
    """

    omega0: float
    omegaf: float
    duration: float

    def __post_init__(self):
        if not (self.omega0 > 0 and self.omegaf > 0 and self.duration > 0):
            raise ValueError("omega0, omegaf and T must be positive")

    def b(self, t) -> np.ndarray:
        s = np.clip(np.asarray(t, dtype=float) / self.duration, 0.0, 1.0)
        gamma = np.sqrt(self.omega0 / self.omegaf)
        return 1 + (gamma - 1) * (10 * s**3 - 15 * s**4 + 6 * s**5)

    def omega_squared(self, t):
        s = np.clip(np.asarray(t, dtype=float) / self.duration, 0.0, 1.0)
        gamma = np.sqrt(self.omega0 / self.omegaf)
        b = self.b(t)
        bdd = (gamma - 1) * (60 * s - 180 * s**2 + 120 * s**3) / self.duration**2
        out = self.omega0**2 / b**4 - bdd / b
        return float(out) if out.ndim == 0 else out

    def omega(self, t):
        w2 = np.asarray(self.omega_squared(t))
        with np.errstate(invalid="ignore"):
            out = np.where(w2 >= 0, np.sqrt(np.abs(w2)), np.nan)
        return float(out) if out.ndim == 0 else out

    __call__ = omega

    @property
    def min_omega_squared(self) -> float:
        return float(np.min(self.omega_squared(np.linspace(0, self.duration, 2001))))


def shortcut_ramp_omega(omega0: float, omegaf: float, T: float) -> ShortcutRamp:
    """omega(t) of the frictionless ramp of Phys. Rev. Lett. 104, 063002 (2010); see ShortcutRamp."""
    return ShortcutRamp(float(omega0), float(omegaf), float(T))


def depth_to_temperature_ratio(depth_J, temperature_K):
    """eta = U / (k_B T). Evaporation typically runs at eta ~ 6-10 (common practice, no source)."""
    return np.asarray(depth_J, dtype=float) / (sc.k * np.asarray(temperature_K, dtype=float))
