"""Magnetic traps for ground-state atoms: quadrupole and Ioffe-type harmonic traps.

Moments are in J/T with the sign convention of ``atoms``: Zeeman energy
E = +mu |B|, mu = g_F m_F mu_B, so mu > 0 is a low-field seeker. Field
gradients are in T/m (1 G/cm = 0.01 T/m), curvatures in T/m^2
(1 G/cm^2 = 1 T/m^2), fields in T (1 G = 1e-4 T).
"""

from __future__ import annotations

import numpy as np

G_N = 9.80665  # standard gravity, m/s^2, exact (SI Brochure)
GAUSS = 1e-4  # T
GAUSS_PER_CM = 0.01  # T/m
GAUSS_PER_CM2 = 1.0  # T/m^2


def quadrupole_field_magnitude(gradient_t_m: float, points_xyz) -> np.ndarray:
    """|B| (T) of a linear quadrupole with its strong axis along z.

    B = b' (x, y, -2 z) satisfies div B = 0, so |B| = b' sqrt(x^2 + y^2 + 4 z^2):
    ``gradient_t_m`` = b' is the radial (weak-axis) gradient; the axial one is 2 b'.
    """
    p = np.asarray(points_xyz, dtype=float)
    return abs(gradient_t_m) * np.sqrt(p[..., 0] ** 2 + p[..., 1] ** 2 + 4 * p[..., 2] ** 2)


def quadrupole_potential(moment_j_t: float, gradient_t_m: float, points_xyz, mass_kg: float | None = None,
                         gravity_axis: int = 2) -> np.ndarray:
    """U = mu b' sqrt(x^2 + y^2 + 4 z^2) (+ m g_n r_axis if ``mass_kg`` is given), J.

    Gravity acts along -``gravity_axis`` (default z, the coil axis).
    """
    p = np.asarray(points_xyz, dtype=float)
    u = moment_j_t * quadrupole_field_magnitude(gradient_t_m, p)
    if mass_kg is not None:
        u = u + mass_kg * G_N * p[..., gravity_axis]
    return u


def levitation_gradient(mass_kg: float, moment_j_t: float) -> float:
    """Vertical gradient of |B| (T/m) whose force balances gravity: d|B|/dz = m g_n / mu.

    For a quadrupole with vertical coil axis this is the axial gradient 2 b'.
    Divide by GAUSS_PER_CM for G/cm. Needs a low-field seeker (mu > 0).
    """
    if not moment_j_t > 0:
        raise ValueError("only a low-field seeker (mu > 0) can be levitated by a field-magnitude gradient")
    return mass_kg * G_N / moment_j_t


def harmonic_trap_frequency(moment_j_t: float, curvature_t_m2: float, mass_kg: float) -> float:
    """omega = sqrt(mu B'' / m) (rad/s) for |B| = B0 + B'' z^2 / 2 along one axis."""
    k = moment_j_t * curvature_t_m2
    if not k > 0:
        raise ValueError("mu * B'' must be positive for a confining harmonic trap")
    return float(np.sqrt(k / mass_kg))


def ioffe_pritchard_frequencies(moment_j_t: float, gradient_t_m: float, curvature_t_m2: float,
                                bias_t: float, mass_kg: float) -> tuple[float, float]:
    """(radial, axial) angular frequencies of an Ioffe-Pritchard trap, rad/s.

    Near the axis |B| ~ B0 + (B'^2/(2 B0) - B''/4) rho^2 + B'' z^2 / 2, so
    omega_rho = sqrt(mu/m (B'^2/B0 - B''/2)), omega_z = sqrt(mu B''/m)
    (Phys. Rev. Lett. 51, 1336 (1983)) (from memory). ``bias_t`` = B0 > 0.
    """
    if not bias_t > 0:
        raise ValueError("bias field B0 must be positive")
    radial_curv = gradient_t_m**2 / bias_t - curvature_t_m2 / 2
    return (harmonic_trap_frequency(moment_j_t, radial_curv, mass_kg),
            harmonic_trap_frequency(moment_j_t, curvature_t_m2, mass_kg))


def gravity_sag(omega_vertical_rad_s: float) -> float:
    """Sag (m) of a harmonic trap's minimum below the field minimum: g_n / omega^2."""
    return G_N / omega_vertical_rad_s**2
