"""Release from a trap: ballistic thermal clouds, Thomas-Fermi condensates, free fall.

SI units: m, s, K, kg, J, rad/s.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as sc
from scipy.integrate import solve_ivp

G_N = 9.80665  # standard gravity, m/s^2, exact (SI Brochure)


def thermal_width(sigma0_m, temperature_K, mass_kg, t):
    """rms width after time of flight t of a thermal (Maxwell-Boltzmann) cloud:
    sigma(t)^2 = sigma_0^2 + k_B T t^2 / m (textbook ballistic expansion). Vectorised."""
    return np.sqrt(np.asarray(sigma0_m, dtype=float) ** 2
                   + sc.k * np.asarray(temperature_K, dtype=float) * np.asarray(t, dtype=float) ** 2 / mass_kg)


def thermal_in_trap_width(temperature_K, mass_kg, omega):
    """rms width sqrt(k_B T / (m omega^2)) of a thermal cloud in a harmonic trap (equipartition)."""
    return np.sqrt(sc.k * np.asarray(temperature_K, dtype=float) / (mass_kg * np.asarray(omega, dtype=float) ** 2))


def thomas_fermi(number: float, mass_kg: float, scattering_length_m: float, omegas_xyz) -> tuple[float, np.ndarray]:
    """Chemical potential (J) and Thomas-Fermi radii (m, per axis) of a trapped condensate.

    mu = (hbar omega_bar / 2) (15 N a / a_ho)^(2/5), a_ho = sqrt(hbar / (m omega_bar)),
    omega_bar = (omega_x omega_y omega_z)^(1/3); R_j = sqrt(2 mu / (m omega_j^2))
    ("Bose-Einstein Condensation in Dilute Gases", Cambridge University Press,
    2nd ed. (2008), Thomas-Fermi chapter). Needs a > 0.
    """
    w = np.asarray(omegas_xyz, dtype=float).reshape(3)
    if not scattering_length_m > 0:
        raise ValueError("Thomas-Fermi condensate needs a positive scattering length")
    wbar = float(np.prod(w) ** (1 / 3))
    a_ho = np.sqrt(sc.hbar / (mass_kg * wbar))
    mu = 0.5 * sc.hbar * wbar * (15 * number * scattering_length_m / a_ho) ** 0.4
    return float(mu), np.sqrt(2 * mu / (mass_kg * w**2))


def condensate_expansion(omegas_xyz, t_array, rtol: float = 1e-10) -> np.ndarray:
    """Scaling factors lambda_j(t), shape (3, N), of a Thomas-Fermi condensate released at t = 0.

    Integrates lambda_j'' = omega_j^2 / (lambda_j lambda_x lambda_y lambda_z) with
    lambda = 1, lambda' = 0 at release (Phys. Rev. Lett. 77, 5315 (1996)); the
    radii are R_j(t) = lambda_j(t) R_j(0). Times need not be sorted; t >= 0.
    """
    w = np.asarray(omegas_xyz, dtype=float).reshape(3)
    t = np.asarray(t_array, dtype=float)
    flat = t.ravel()
    if np.any(flat < 0) or np.any(w <= 0):
        raise ValueError("need t >= 0 and positive trap frequencies")
    scale = float(w.max())  # dimensionless time omega_max t
    wsq = (w / scale) ** 2

    def rhs(tau, y):
        lam = y[:3]
        return np.concatenate([y[3:], wsq / (lam * np.prod(lam))])

    order = np.argsort(flat)
    tau = flat[order] * scale
    out = np.ones((3, flat.size))
    if flat.size and tau[-1] > 0:
        sol = solve_ivp(rhs, (0.0, tau[-1]), np.r_[np.ones(3), np.zeros(3)], method="DOP853",
                        t_eval=tau, rtol=rtol, atol=rtol * 1e-2)
        if not sol.success:
            raise RuntimeError(f"scaling-equation integration failed: {sol.message}")
        out[:, order] = sol.y[:3]
    return out.reshape((3,) + t.shape)


def condensate_tof_radii(radii_m, omegas_xyz, t_array) -> np.ndarray:
    """Thomas-Fermi radii (3, N) after time of flight: R_j(t) = lambda_j(t) R_j(0)."""
    return np.asarray(radii_m, dtype=float).reshape((3,) + (1,) * np.ndim(t_array)) * condensate_expansion(omegas_xyz, t_array)


def free_fall_position(z0, v0, t):
    """z(t) = z0 + v0 t - g_n t^2 / 2 (z up), m."""
    t = np.asarray(t, dtype=float)
    return np.asarray(z0, dtype=float) + np.asarray(v0, dtype=float) * t - 0.5 * G_N * t**2
