"""Passage of a pushed cloud along a straight path: which fraction of it has reached a plane by a time, from
its initial profile along the path (Thomas-Fermi or Gaussian), the push's uniform acceleration then free
flight, and a Gaussian spread of velocities (SI units, vectorised).

Thomas-Fermi profile: Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge University Press (2008);
uniform acceleration and free flight (textbook); harmonic frequency along a direction from the principal
frequencies (textbook)."""

from __future__ import annotations

import math

import numpy as np

U_NODES = 1601  # velocity offsets -8 .. 8 sigma_v in steps of 0.01 sigma_v for the passage fractions
_U_X = np.linspace(-8.0, 8.0, U_NODES)
_U_W = np.exp(-0.5 * _U_X**2) / np.sum(np.exp(-0.5 * _U_X**2))


def thomas_fermi_fraction_beyond(u):
    """Fraction of a Thomas-Fermi condensate whose coordinate along one axis exceeds u R (vectorised).

    The density n ~ 1 - x^2/R_x^2 - y^2/R_y^2 - z^2/R_z^2 integrated over the two other axes gives the
    line density (15/(16 R)) (1 - x^2/R^2)^2; its integral from u R to R is
    1/2 - (15/16) (u - 2 u^3/3 + u^5/5) for |u| <= 1 (1 below -1, 0 above 1)."""
    u = np.clip(np.asarray(u, dtype=float), -1.0, 1.0)
    u2 = u * u  # the polynomial in Horner form: u**3 and u**5 go through pow, ten times slower
    return np.clip(0.5 - (15.0 / 16.0) * (u * (1.0 - u2 * (2.0 / 3.0 - u2 / 5.0))), 0.0, 1.0)  # no -1e-17 at the edges


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
                     sigma_v_m_s: float, profile: str, size_m: float, size_scale=None) -> float:
    """First time after the push began by which `fraction` of the cloud has reached `distance_m`
    (math.inf if it never does, e.g. atoms slower than the spread). Bisection on `fraction_reached`,
    which never decreases with t, to 1e-7 relative. `size_scale(t)`: the cloud's length along the path grows
    as size_m x size_scale(t) (an expanding condensate), else it keeps size_m."""
    args = (distance_m, speed_m_s, push_duration_s, sigma_v_m_s, profile)

    def reached(t):
        size = size_m if size_scale is None else size_m * float(size_scale(t))
        return float(fraction_reached(t, *args, size))

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
