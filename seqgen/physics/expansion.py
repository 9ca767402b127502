"""Release from a trap: ballistic thermal clouds, Thomas-Fermi condensates, free fall.

SI units: m, s, K, kg, J, rad/s.
"""

from __future__ import annotations

from bisect import bisect_right

import numpy as np
from scipy import constants as sc

G_N = 9.80665  # standard gravity, m/s^2, exact (SI Brochure)


def thermal_width(sigma0_m, temperature_K, mass_kg, t):
    """rms width after time of flight t of a thermal (Maxwell-Boltzmann) cloud:
    sigma(t)^2 = sigma_0^2 + k_B T t^2 / m (textbook ballistic expansion). Vectorised."""
    return np.sqrt(np.asarray(sigma0_m, dtype=float) ** 2
                   + sc.k * np.asarray(temperature_K, dtype=float) * np.asarray(t, dtype=float) ** 2 / mass_kg)


def thermal_in_trap_width(temperature_K, mass_kg, omega):
    """rms width sqrt(k_B T / (m omega^2)) of a thermal cloud in a harmonic trap (equipartition)."""
    return np.sqrt(sc.k * np.asarray(temperature_K, dtype=float) / (mass_kg * np.asarray(omega, dtype=float) ** 2))


def thermal_moments_after(X, V, C, omega, dt):
    """Phase-space moments (<x^2> m^2, <v^2> m^2/s^2, <x v> m^2/s) of a non-interacting cloud along one axis
    after dt in a harmonic trap of angular frequency omega (0: free flight), from X, V, C: each atom moves as
    x = x0 cos(w t) + v0 sin(w t) / w, v = -x0 w sin(w t) + v0 cos(w t) (harmonic motion, Mechanics, 3rd ed.,
    Pergamon (1976), section 21), so the moments transform linearly. Vectorised over axes."""
    X, V, C, w = (np.asarray(a, dtype=float) for a in (X, V, C, omega))
    t = np.asarray(dt, dtype=float)
    free = w <= 0
    ws = np.where(free, 1.0, w)
    c, s = np.cos(ws * t), np.sin(ws * t)
    x2 = np.where(free, X + 2 * C * t + V * t * t, X * c * c + V * s * s / ws**2 + 2 * C * c * s / ws)
    v2 = np.where(free, V, X * ws**2 * s * s + V * c * c - 2 * C * ws * s * c)
    xv = np.where(free, C + V * t, -X * ws * s * c + V * s * c / ws + C * (c * c - s * s))
    return x2, v2, xv


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
    return free_scaling(omegas_xyz, np.ones(3), np.zeros(3), t_array, rtol=rtol)  # at rest at the release


def condensate_tof_radii(radii_m, omegas_xyz, t_array) -> np.ndarray:
    """Thomas-Fermi radii (3, N) after time of flight: R_j(t) = lambda_j(t) R_j(0)."""
    return np.asarray(radii_m, dtype=float).reshape((3,) + (1,) * np.ndim(t_array)) * condensate_expansion(omegas_xyz, t_array)


def free_fall_position(z0, v0, t):
    """z(t) = z0 + v0 t - g_n t^2 / 2 (z up), m."""
    t = np.asarray(t, dtype=float)
    return np.asarray(z0, dtype=float) + np.asarray(v0, dtype=float) * t - 0.5 * G_N * t**2


# --------------------------------------------------------------------------- a condensate in a changing trap
# Scaling solution of a Thomas-Fermi condensate in a harmonic trap whose frequencies change in time:
# R_j(t) = b_j(t) R_j(0), b_j'' = omega_j(0)^2 / (b_j b_x b_y b_z) - omega_j(t)^2 b_j, with b = 1, b' = 0 in the
# trap omega(0) the condensate was at rest in (Y. Castin and R. Dum, Phys. Rev. Lett. 77, 5315 (1996);
# Yu. Kagan, E. L. Surkov and G. V. Shlyapnikov, Phys. Rev. A 54, R1753 (1996)).


def scaling_equilibrium(omega0_xyz, omegas_xyz) -> np.ndarray:
    """Scaling factors b_j of a condensate at rest in the trap omegas, relative to its rest in omega0.

    b_j'' = 0 gives omega_j^2 b_j^2 = omega0_j^2 / (b_x b_y b_z), so b_j = (omega0_j / omega_j) (omega_bar /
    omega0_bar)^(3/5): the Thomas-Fermi radius R_j = sqrt(2 mu / m) / omega_j with mu ~ omega_bar^(6/5)
    (Phys. Rev. Lett. 77, 5315 (1996)). Broadcasts over leading axes; the last holds x, y, z."""
    w0 = np.asarray(omega0_xyz, dtype=float)
    w = np.asarray(omegas_xyz, dtype=float)
    gm = np.prod(w, axis=-1, keepdims=True) / np.prod(w0, axis=-1, keepdims=True)
    return (w0 / w) * gm ** 0.2


def trap_scaling(omega0_xyz, times, omegas, b0=(1.0, 1.0, 1.0), db0=(0.0, 0.0, 0.0), rtol: float = 1e-10):
    """Scaling factors b_j and their rates b_j' (1/s), each shape (3, n), at `times` (n, sorted, s) of a
    condensate at rest in the trap omega0_xyz (rad/s) that then sees the trap frequencies `omegas` ((n, 3)
    rad/s, linear between the times; 0 is no trap): b_j'' = omega0_j^2 / (b_j b_x b_y b_z) - omega_j(t)^2 b_j
    from b = b0, b' = db0 at times[0] (Phys. Rev. Lett. 77, 5315 (1996); Phys. Rev. A 54, R1753 (1996))."""
    from scipy.integrate import odeint

    w0 = np.asarray(omega0_xyz, dtype=float).reshape(3)
    t = np.asarray(times, dtype=float).reshape(-1)
    w = np.asarray(omegas, dtype=float).reshape(t.size, 3)
    if np.any(w0 <= 0) or np.any(w < 0) or not (np.all(np.isfinite(w)) and np.all(np.isfinite(t))):
        raise ValueError("need positive initial trap frequencies and finite, non-negative ones later")
    if t.size > 1 and np.any(np.diff(t) < 0):
        raise ValueError("times must be sorted")
    scale = float(max(w0.max(), w.max()))  # dimensionless time scale x t
    tau = (t - t[0]) * scale
    w0sq, wsq = (w0 / scale) ** 2, (w / scale) ** 2
    if t.size < 2 or tau[-1] <= 0:
        y0 = np.r_[np.asarray(b0, dtype=float).reshape(3), np.asarray(db0, dtype=float).reshape(3)]
        return np.repeat(y0[:3, None], t.size, axis=1), np.repeat(y0[3:, None], t.size, axis=1)
    # plain floats in the right-hand side: six numbers per call, where numpy's per-call cost would dominate
    tl, wl = tau.tolist(), wsq.tolist()
    sl = (np.diff(wsq, axis=0) / np.maximum(np.diff(tau), 1e-300)[:, None]).tolist()
    a0, a1, a2 = w0sq.tolist()
    last = len(tl) - 2

    def rhs(y, s):
        k = min(max(bisect_right(tl, s) - 1, 0), last)
        d = min(max(s, tl[0]), tl[-1]) - tl[k]
        c0, c1, c2 = (wl[k][j] + sl[k][j] * d for j in range(3))
        x0, x1, x2, v0, v1, v2 = y
        p = x0 * x1 * x2
        return [v0, v1, v2, a0 / (x0 * p) - c0 * x0, a1 / (x1 * p) - c1 * x1, a2 / (x2 * p) - c2 * x2]

    y0 = np.r_[np.asarray(b0, dtype=float).reshape(3), np.asarray(db0, dtype=float).reshape(3) / scale]
    out, info = odeint(rhs, y0, tau, rtol=rtol, atol=rtol * 1e-2, tcrit=tau, mxstep=10 ** 6, full_output=True)
    if info["message"] != "Integration successful." or not np.all(np.isfinite(out)):
        raise RuntimeError(f"scaling-equation integration failed: {info['message']}")
    return out[:, :3].T, out[:, 3:].T * scale


def free_scaling(omega0_xyz, b0, db0, t_array, rtol: float = 1e-10) -> np.ndarray:
    """Scaling factors b_j(t), shape (3, N), a time t >= 0 after the trap is switched off, of a condensate
    with b = b0, b' = db0 (1/s) at the switch-off (at rest in omega0_xyz when b = 1): b_j'' = omega0_j^2 /
    (b_j b_x b_y b_z) (Phys. Rev. Lett. 77, 5315 (1996)). Times need not be sorted."""
    from scipy.integrate import solve_ivp

    w0 = np.asarray(omega0_xyz, dtype=float).reshape(3)
    t = np.asarray(t_array, dtype=float)
    flat = t.ravel()
    if np.any(flat < 0) or np.any(w0 <= 0):
        raise ValueError("need t >= 0 and positive trap frequencies")
    scale = float(w0.max())
    wsq = (w0 / scale) ** 2

    def rhs(s, y):
        lam = y[:3]
        return np.concatenate([y[3:], wsq / (lam * np.prod(lam))])

    order = np.argsort(flat)
    tau = flat[order] * scale
    y0 = np.r_[np.asarray(b0, dtype=float).reshape(3), np.asarray(db0, dtype=float).reshape(3) / scale]
    out = np.repeat(y0[:3, None], flat.size, axis=1)
    if flat.size and tau[-1] > 0:
        sol = solve_ivp(rhs, (0.0, tau[-1]), y0, method="DOP853", t_eval=tau, rtol=rtol, atol=rtol * 1e-2)
        if not sol.success:
            raise RuntimeError(f"scaling-equation integration failed: {sol.message}")
        out[:, order] = sol.y[:3]
    return out.reshape((3,) + t.shape)


# --------------------------------------------------------------------------- extents of an ellipsoid


def ellipsoid_half_extent(radii, axes, direction):
    """Half-extent (m) along `direction` of an ellipsoid with semi-axes `radii` along the columns of `axes`
    (a rotation; None for x, y, z): sqrt(sum_j (R_j e_j . u)^2) for the unit vector u (the support function
    of an ellipsoid, h(u) = |A u| for the shape matrix A = sum_j R_j e_j e_j^T; textbook convex geometry).
    `direction` may be (..., 3) and need not be normalised."""
    r = np.asarray(radii, dtype=float).reshape(3)
    e = np.eye(3) if axes is None else np.asarray(axes, dtype=float).reshape(3, 3)
    u = np.asarray(direction, dtype=float)
    norm = np.linalg.norm(u, axis=-1, keepdims=True)
    if np.any(norm == 0):
        raise ValueError("direction must not be zero")
    return np.linalg.norm((u / norm) @ e * r, axis=-1)


def ellipsoid_plane_semi_major(radii, axes, plane_basis) -> float:
    """Largest half-extent (m) in the plane spanned by the two orthonormal rows of `plane_basis` of the
    ellipsoid of `ellipsoid_half_extent`: the projected ellipse's semi-major axis, sqrt of the largest
    eigenvalue of P S P^T with S = sum_j R_j^2 e_j e_j^T (orthogonal projection of an ellipsoid)."""
    r = np.asarray(radii, dtype=float).reshape(3)
    e = np.eye(3) if axes is None else np.asarray(axes, dtype=float).reshape(3, 3)
    p = np.asarray(plane_basis, dtype=float).reshape(2, 3)
    s = (e * r ** 2) @ e.T
    return float(np.sqrt(max(float(np.linalg.eigvalsh(p @ s @ p.T)[-1]), 0.0)))
