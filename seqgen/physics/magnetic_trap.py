"""Magnetic traps for ground-state atoms: quadrupole and Ioffe-type harmonic traps.

Moments are in J/T with the package-wide sign convention (``seqgen.physics``):
moment = -dE/dB (-g_F m_F mu_B at low field, ``atoms.magnetic_moment_first_order``,
``zeeman.magnetic_moment``), so a low-field seeker, the state a field minimum
holds, has moment < 0 and the potential energy U = -moment |B| = |moment| |B|.
Field gradients are in T/m (1 G/cm = 0.01 T/m), curvatures in T/m^2
(1 G/cm^2 = 1 T/m^2), fields in T (1 G = 1e-4 T).
"""

from __future__ import annotations

import numpy as np
from scipy import constants as _sc

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
    """U = -moment b' sqrt(x^2 + y^2 + 4 z^2) (+ m g_n r_axis if ``mass_kg`` is given), J.

    moment = -dE/dB (< 0 for a low-field seeker, which this potential confines).
    Gravity acts along -``gravity_axis`` (default z, the coil axis).
    """
    p = np.asarray(points_xyz, dtype=float)
    u = -moment_j_t * quadrupole_field_magnitude(gradient_t_m, p)
    if mass_kg is not None:
        u = u + mass_kg * G_N * p[..., gravity_axis]
    return u


def levitation_gradient(mass_kg: float, moment_j_t: float) -> float:
    """Vertical gradient of |B| (T/m) whose force balances gravity: m g_n / |moment|.

    The force moment d|B|/dz equals +m g_n, so for a low-field seeker
    (moment = -dE/dB < 0, the only kind a field-magnitude gradient can hold)
    |B| must grow downwards at m g_n / |moment|; the value returned is that
    magnitude, -m g_n / moment > 0. For a quadrupole with vertical coil axis
    this is the axial gradient 2 b'. Divide by GAUSS_PER_CM for G/cm.
    """
    if not moment_j_t < 0:
        raise ValueError("only a low-field seeker (moment = -dE/dB < 0) can be levitated by a field-magnitude gradient")
    return -mass_kg * G_N / moment_j_t


def harmonic_trap_frequency(moment_j_t: float, curvature_t_m2: float, mass_kg: float) -> float:
    """omega = sqrt(-moment B'' / m) (rad/s) for |B| = B0 + B'' z^2 / 2 along one axis (moment = -dE/dB)."""
    k = -moment_j_t * curvature_t_m2
    if not k > 0:
        raise ValueError("-moment * B'' must be positive for a confining harmonic trap (moment = -dE/dB)")
    return float(np.sqrt(k / mass_kg))


def ioffe_pritchard_frequencies(moment_j_t: float, gradient_t_m: float, curvature_t_m2: float,
                                bias_t: float, mass_kg: float) -> tuple[float, float]:
    """(radial, axial) angular frequencies of an Ioffe-Pritchard trap, rad/s.

    Near the axis |B| ~ B0 + (B'^2/(2 B0) - B''/4) rho^2 + B'' z^2 / 2, so with
    |moment| = -moment (a low-field seeker, moment = -dE/dB < 0)
    omega_rho = sqrt(|moment|/m (B'^2/B0 - B''/2)), omega_z = sqrt(|moment| B''/m)
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


# --------------------------------------------------------------------------- traps of magnetic trap stages
#
# The functions below (used by the `magnetic_hold` checks) take the magnetic
# moment as  moment = -dE/dB  (J/T), the convention of
# seqgen.physics.zeeman.magnetic_moment: a low-field seeker, which a field
# minimum can hold, has a NEGATIVE moment; its potential energy in a field of
# magnitude |B| is U = -moment |B| = |moment| |B|. (The functions above use
# the same convention, that of the whole package: see seqgen.physics.)

HBAR = _sc.hbar  # J s (CODATA, scipy.constants)
K_B = _sc.k  # J/K


def _unit_rows(axes) -> np.ndarray:
    n = np.atleast_2d(np.asarray(axes, dtype=float))
    norm = np.linalg.norm(n, axis=-1, keepdims=True)
    if np.any(norm == 0) or not np.all(np.isfinite(n)):
        raise ValueError("every coil axis must be a finite, non-zero vector")
    return n / norm


def quadrupole_field_matrix(axial_gradients_t_m, axes) -> np.ndarray:
    """Field matrix M (T/m, 3 x 3) of concentric linear quadrupoles: B(r) = M r.

    A quadrupole with unit axis n and axial gradient G (the gradient of |B|
    along its axis, the strong one) has B = (G/2) (r - 3 (r.n) n): for n = z this
    is b' (x, y, -2 z) with b' = G/2 as in ``quadrupole_field_magnitude``
    (div B = 0 and curl B = 0, so M is symmetric and traceless). Fields of
    several coils add; their zeros are taken to coincide. ``axial_gradients_t_m``
    has one entry per coil (signed: a reversed current reverses the field),
    ``axes`` one 3-vector per coil.
    """
    g = np.atleast_1d(np.asarray(axial_gradients_t_m, dtype=float))
    n = _unit_rows(axes)
    if n.shape[0] != g.shape[0]:
        raise ValueError("one axis per gradient")
    eye = np.eye(3)
    return np.einsum("k,kij->ij", g / 2, eye[None] - 3 * n[:, :, None] * n[:, None, :])


def holding_gradient(field_matrix, vertical=(0.0, 0.0, 1.0)) -> float:
    """Weight per unit |moment| that the linear field B = M r holds against gravity: 1 / |M^-1 up| (T/m).

    U(r) = |moment| |M r| + m g_n (r . up) is positively homogeneous in r, so it
    has its minimum at the field zero, rather than falling without bound along
    some direction, exactly when U >= 0 everywhere; with s = M r this is
    m g_n |M^-1 up| <= |moment| (M symmetric). For one quadrupole with a
    vertical axis the result is the axial gradient G, with a horizontal axis
    G/2: the levitation condition |moment| G >= m g_n (see ``levitation_gradient``).
    A singular M (a direction without field gradient) holds nothing: 0.
    """
    m = np.asarray(field_matrix, dtype=float)
    up = _unit_rows(vertical)[0]
    scale = float(np.max(np.abs(m))) if m.size else 0.0
    if scale == 0 or not np.isfinite(scale):
        return 0.0
    if np.linalg.cond(m / scale) > 1e12:
        return 0.0
    return float(1.0 / np.linalg.norm(np.linalg.solve(m, up)))


def gravity_support(moment_j_t, holding_gradient_t_m, mass_kg):
    """Magnetic force over weight, -moment G_hold / (m g_n): above 1 the trap holds (moment = -dE/dB).

    Zero or negative for a state with no moment or a high-field seeker, which a
    field minimum cannot hold at all."""
    return np.asarray(-np.asarray(moment_j_t, dtype=float) * np.asarray(holding_gradient_t_m, dtype=float)
                      / (np.asarray(mass_kg, dtype=float) * G_N))[()]


def linear_trap_size(temperature_k, moment_j_t, gradient_t_m):
    """1/e length l = k_B T / (|moment| b') (m) of a thermal cloud in a linear potential |moment| b' |x|.

    The Boltzmann factor exp(-|moment| b' |x| / k_B T) falls by e over l; for a
    quadrupole take b' the weakest gradient (G/2 across the axis)."""
    return np.asarray(K_B * np.asarray(temperature_k, dtype=float)
                      / (np.abs(np.asarray(moment_j_t, dtype=float)) * np.abs(np.asarray(gradient_t_m, dtype=float))))[()]


def majorana_hole_radius(moment_j_t, gradient_t_m, speed_m_s):
    """Radius r0 = sqrt(hbar v / (|moment| b')) (m) around a quadrupole's zero inside which spins flip.

    There the Larmor frequency |moment| b' r / hbar drops below the rate v / r at
    which the field direction turns for an atom passing at speed v
    (Phys. Rev. Lett. 74, 3352 (1995)) (from memory)."""
    return np.sqrt(HBAR * np.asarray(speed_m_s, dtype=float)
                   / (np.abs(np.asarray(moment_j_t, dtype=float)) * np.abs(np.asarray(gradient_t_m, dtype=float))))[()]


def majorana_lifetime(mass_kg, cloud_size_m):
    """Order-of-magnitude lifetime tau = m l^2 / hbar (s) of a cloud of size l against Majorana spin flips in a
    quadrupole trap (loss rate ~ hbar / (m l^2), Phys. Rev. Lett. 74, 3352 (1995)) (from memory).

    The rate is the flux v / l^3 of atoms through the hole of area r0^2, with
    r0^2 = hbar v / (|moment| b') and |moment| b' l ~ k_B T ~ m v^2; the numerical
    prefactor is of order one, so treat the result as a scale, not a prediction."""
    return np.asarray(np.asarray(mass_kg, dtype=float) * np.asarray(cloud_size_m, dtype=float) ** 2 / HBAR)[()]


def field_rotation_rate(gradient_t_m, bias_t, speed_m_s):
    """Largest rate (rad/s) at which the direction of B = (b' x, 0, B0) turns for an atom crossing x = 0 at speed v.

    The angle is atan(b' x / B0), its time derivative b' v / B0 / (1 + (b' x / B0)^2),
    largest on the axis: b' v / B0. Spins follow the field adiabatically while the
    Larmor frequency stays well above it."""
    return np.asarray(np.abs(np.asarray(gradient_t_m, dtype=float)) * np.asarray(speed_m_s, dtype=float)
                      / np.abs(np.asarray(bias_t, dtype=float)))[()]


def harmonic_sag(omega_radial_rad_s: float, omega_axial_rad_s: float, axis, vertical=(0.0, 0.0, 1.0)) -> float:
    """Distance (m) by which gravity pulls a cylindrical harmonic trap's minimum down.

    The restoring matrix is m (omega_z^2 n n^T + omega_rho^2 (1 - n n^T)); the
    displacement g_n K^-1 up has length g_n sqrt(c^2 / omega_z^4 + (1 - c^2) / omega_rho^4),
    c = n . up. For a horizontal axis: g_n / omega_rho^2 (``gravity_sag``)."""
    n = _unit_rows(axis)[0]
    up = _unit_rows(vertical)[0]
    c2 = float(np.dot(n, up)) ** 2
    return float(G_N * np.sqrt(c2 / omega_axial_rad_s ** 4 + (1 - c2) / omega_radial_rad_s ** 4))


def trappable_states(atom, field_t: float = 0.0, min_moment_j_t: float = 0.01 * _sc.physical_constants["Bohr magneton"][0]) -> list:
    """The ground |F, mF> (integer F) of `atom` that a field minimum holds at |B| = field_t: moment -dE/dB
    (Breit-Rabi, ``zeeman.magnetic_moment``) below -min_moment (default 0.01 mu_B). Only low-field seekers
    are held because a static field has no maximum in free space (Phys. Rev. Lett. 51, 1336 (1983))."""
    from .zeeman import ground_states, magnetic_moment

    out = []
    for F, mF in ground_states(atom.nuclear_spin):
        if abs(F - round(F)) > 1e-9:
            continue
        if float(magnetic_moment(int(F), int(mF), abs(field_t), atom=atom)) < -min_moment_j_t:
            out.append((int(F), int(mF)))
    return out


def linear_trap_cloud(field_matrix, moment_j_t, mass_kg, temperature_k, vertical=(0.0, 0.0, 1.0), points: int = 81):
    """(mean position (3,) m, covariance (3, 3) m^2) of a thermal cloud in a linear magnetic trap with gravity:
    the Boltzmann density exp(-(|moment| |M r| + m g_n r.up) / k_B T), integrated on a grid.

    Without gravity the density is isotropic in u = |moment| M r / k_B T with <u_i^2> = 4 (see
    ``kinematics.linear_trap_rms_widths``); gravity pulls the cloud below the field zero and stretches it along
    the vertical, by a factor that grows as the support (force over weight) approaches 1: the cloud's decay
    length below the zero is k_B T / (|moment| G_v - m g_n) instead of k_B T / (|moment| G_v). The grid spans
    30 decay lengths on each side of every principal axis of M (the gravity-shortened one below). ValueError when
    gravity wins (support <= 1): no bound cloud."""
    m = np.asarray(field_matrix, dtype=float)
    up = _unit_rows(vertical)[0]
    mu = abs(float(moment_j_t))
    kt = K_B * float(temperature_k)
    hold = holding_gradient(m)
    weight = float(mass_kg) * G_N
    if not (mu > 0 and kt > 0) or mu * hold <= weight:
        raise ValueError("gravity is not held: no bound thermal cloud")
    eig, vec = np.linalg.eigh(m)
    g = np.abs(eig)
    # decay length along each principal axis; along the direction gravity pulls, shortened by the weight
    tilt = np.abs(vec.T @ up) * weight
    reach = 30.0 * kt / np.maximum(mu * g - tilt, mu * g * (1 - weight / (mu * hold)))
    axes_1d = [np.linspace(-r, r, points) for r in reach]
    a, b, c = np.meshgrid(*axes_1d, indexing="ij")
    pts = (a[..., None] * vec[:, 0] + b[..., None] * vec[:, 1] + c[..., None] * vec[:, 2]).reshape(-1, 3)
    u = (mu * np.linalg.norm(pts @ m.T, axis=1) + weight * (pts @ up)) / kt
    w = np.exp(-(u - u.min()))
    w /= w.sum()
    mean = w @ pts
    d = pts - mean
    return mean, (d * w[:, None]).T @ d
