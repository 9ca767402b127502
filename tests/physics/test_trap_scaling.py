"""A Thomas-Fermi condensate in a trap that changes in time, and the extent of an ellipsoidal cloud along a
direction (seqgen.physics.expansion: trap_scaling, free_scaling, scaling_equilibrium, ellipsoid_half_extent,
ellipsoid_plane_semi_major), against closed forms derived here or published:

- scaling equations b_j'' = omega_j(0)^2 / (b_j b_x b_y b_z) - omega_j(t)^2 b_j (Y. Castin and R. Dum, Phys. Rev.
  Lett. 77, 5315 (1996); Yu. Kagan, E. L. Surkov and G. V. Shlyapnikov, Phys. Rev. A 54, R1753 (1996));
- the cigar asymptotics of the first (b_perp = sqrt(1 + tau^2), b_z = 1 + eps^2 (tau arctan tau - ln sqrt(1 +
  tau^2)), tau = omega_perp t, eps = omega_z / omega_perp);
- the monopole (breathing) frequency sqrt(5) omega of a condensate in an isotropic trap (S. Stringari, Phys. Rev.
  Lett. 77, 2360 (1996), from memory);
- Thomas-Fermi radii R_j = sqrt(2 mu / m) / omega_j with mu = (hbar omega_bar / 2) (15 N a / a_ho)^(2/5)
  (Bose-Einstein Condensation in Dilute Gases, Cambridge University Press, 2nd ed. (2008));
- the support function of an ellipsoid, checked against a direct maximum over its surface.
"""

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate
from scipy.spatial.transform import Rotation

from seqgen.physics import expansion as ex

A0 = sc.physical_constants["Bohr radius"][0]
M_RB87 = 86.909180531 * sc.physical_constants["atomic mass constant"][0]  # AME2020 (from memory)


def _off(times):
    """Trap frequencies that are zero at every time: the trap switched off."""
    return np.zeros((len(times), 3))


def test_isotropic_release_conserves_the_energy_integral():
    # b'' = w^2 / b^4 (isotropic, trap off); times b' and integrated: b'^2 / 2 + w^2 / (3 b^3) = w^2 / 3 from
    # b(0) = 1, b'(0) = 0 (derived here), so b' tends to w sqrt(2/3)
    w = 2 * math.pi * 120.0
    t = np.linspace(0.0, 40e-3, 81)
    b, db = ex.trap_scaling([w] * 3, t, _off(t))
    energy = 0.5 * db ** 2 + w ** 2 / (3 * b ** 3)
    assert energy == pytest.approx(np.full_like(energy, w ** 2 / 3), rel=1e-8)
    assert db[:, -1] == pytest.approx(np.full(3, w * math.sqrt(2 / 3)), rel=2e-3)
    # the same b(t) by quadrature: t(b) = int_1^b dx / sqrt(2/3 w^2 (1 - x^-3))
    for k in (10, 40, 80):
        tb = integrate.quad(lambda x: 1 / math.sqrt(2 / 3 * w ** 2 * (1 - x ** -3)), 1.0, b[0, k], limit=200)[0]
        assert tb == pytest.approx(t[k], rel=1e-6)


def test_release_with_a_velocity_follows_its_energy_integral():
    # a condensate released while breathing: b(0) = 0.8, b'(0) = -50 /s; b'^2 / 2 + w^2 / (3 b^3) = E is
    # conserved, so it first contracts to b_min = (w^2 / (3 E))^(1/3), then expands (derived here)
    w = 2 * math.pi * 100.0
    b0, v0 = 0.8, -50.0
    energy = 0.5 * v0 ** 2 + w ** 2 / (3 * b0 ** 3)
    b_min = (w ** 2 / (3 * energy)) ** (1 / 3)

    def speed(x):
        return math.sqrt(max(2 * (energy - w ** 2 / (3 * x ** 3)), 0.0))

    t_min = integrate.quad(lambda x: 1 / speed(x), b_min, b0, limit=400)[0]
    t_out = t_min + integrate.quad(lambda x: 1 / speed(x), b_min, 2.0, limit=400)[0]
    got = ex.free_scaling([w] * 3, [b0] * 3, [v0] * 3, np.array([t_min, t_out]))
    assert got[:, 0] == pytest.approx(np.full(3, b_min), rel=1e-5)
    assert got[:, 1] == pytest.approx(np.full(3, 2.0), rel=1e-6)


def test_cigar_release_matches_the_castin_dum_asymptotics():
    # Phys. Rev. Lett. 77, 5315 (1996): for eps = omega_z / omega_perp << 1, b_perp = sqrt(1 + tau^2) + O(eps^2),
    # b_z = 1 + eps^2 (tau arctan tau - ln sqrt(1 + tau^2)) + O(eps^4)
    w_perp = 2 * math.pi * 400.0
    tau = np.linspace(0.0, 40.0, 41)
    for eps in (0.01, 0.02):
        t = tau / w_perp
        b, _ = ex.trap_scaling([w_perp, w_perp, eps * w_perp], t, _off(t))
        assert np.all(np.abs(b[0] / np.sqrt(1 + tau ** 2) - 1) < eps ** 2)
        bz = 1 + eps ** 2 * (tau * np.arctan(tau) - np.log(np.sqrt(1 + tau ** 2)))
        assert np.all(np.abs(b[2] - bz) < eps ** 4 * (1 + tau ** 2))
        # free_scaling from rest is the same solution
        assert ex.free_scaling([w_perp, w_perp, eps * w_perp], np.ones(3), np.zeros(3), t) == pytest.approx(b, rel=1e-8)


def test_held_condensate_stays_at_rest_and_breathes_at_sqrt5_omega_after_a_small_step():
    w = 2 * math.pi * 200.0
    t = np.linspace(0.0, 20e-3, 401)
    b, db = ex.trap_scaling([w] * 3, t, np.full((t.size, 3), w))
    assert b == pytest.approx(np.ones_like(b), abs=1e-9) and db == pytest.approx(np.zeros_like(db), abs=1e-6)
    # a 0.5 % step of the frequency: small oscillation of b about the new equilibrium at the monopole frequency
    # sqrt(5) w (Phys. Rev. Lett. 77, 2360 (1996), from memory); its energy, b'^2 / 2 + w1^2 b^2 / 2 + w^2 / (3 b^3),
    # is conserved in the constant trap (derived here)
    w1 = 1.005 * w
    b, db = ex.trap_scaling([w] * 3, t, np.full((t.size, 3), w1))
    energy = 0.5 * db[0] ** 2 + 0.5 * w1 ** 2 * b[0] ** 2 + w ** 2 / (3 * b[0] ** 3)
    assert energy == pytest.approx(np.full_like(energy, energy[0]), rel=1e-9)
    ups = t[1:][(np.diff(np.sign(db[0])) > 0)]  # each minimum of b: one per period
    period = float(np.mean(np.diff(ups)))
    assert period == pytest.approx(2 * math.pi / (math.sqrt(5) * w1), rel=2e-2)


def _tf_radii(n, a, omegas):
    """Thomas-Fermi radii by the textbook formulas, written out here."""
    wbar = float(np.prod(omegas) ** (1 / 3))
    a_ho = math.sqrt(sc.hbar / (M_RB87 * wbar))
    mu = 0.5 * sc.hbar * wbar * (15 * n * a / a_ho) ** 0.4
    return np.sqrt(2 * mu / M_RB87) / np.asarray(omegas)


def test_slow_trap_change_leaves_the_thomas_fermi_radii_of_the_new_trap():
    # R_j ~ omega_bar^(3/5) / omega_j: the scaling factors at rest in the new trap are the ratio of the Thomas-Fermi
    # radii (textbook formulas above); a ramp over many trap periods reaches them
    n, a = 2e5, 100.4 * A0  # Rb87 |1,-1> (Phys. Rev. Lett. 88, 093201 (2002), from memory)
    w_a = 2 * math.pi * np.array([60.0, 90.0, 120.0])
    w_b = 2 * math.pi * np.array([30.0, 140.0, 150.0])
    want = _tf_radii(n, a, w_b) / _tf_radii(n, a, w_a)
    assert ex.scaling_equilibrium(w_a, w_b) == pytest.approx(want, rel=1e-12)
    duration = 0.4  # s: 12 periods of the slowest final axis, 72 of the fastest
    t = np.linspace(0.0, duration, 200)
    s = t / duration
    smooth = s * s * (3 - 2 * s)  # a smooth step, zero slope at both ends
    omegas = w_a + (w_b - w_a) * smooth[:, None]
    b, db = ex.trap_scaling(w_a, t, omegas, rtol=1e-9)
    assert b[:, -1] == pytest.approx(want, rel=3e-3)
    assert np.all(np.abs(db[:, -1]) < 3e-3 * w_b * want)
    # an isotropic trap: R ~ omega^(-2/5)
    assert ex.scaling_equilibrium([w_a[0]] * 3, [2 * w_a[0]] * 3) == pytest.approx(np.full(3, 2 ** -0.4), rel=1e-12)


def test_scaling_refuses_bad_input():
    with pytest.raises(ValueError):
        ex.trap_scaling([0.0, 1.0, 1.0], [0.0, 1.0], np.ones((2, 3)))
    with pytest.raises(ValueError):
        ex.trap_scaling([1.0] * 3, [1.0, 0.0], np.ones((2, 3)))
    with pytest.raises(ValueError):
        ex.free_scaling([1.0] * 3, np.ones(3), np.zeros(3), [-1.0])
    with pytest.raises(ValueError):
        ex.ellipsoid_half_extent([1.0, 1.0, 1.0], None, [0.0, 0.0, 0.0])


def _surface(radii, axes, n=400):
    """Points on the ellipsoid's surface: x = E diag(R) s over a dense grid of unit vectors s."""
    th, ph = np.meshgrid(np.linspace(0, np.pi, n), np.linspace(0, 2 * np.pi, 2 * n))
    s = np.stack([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)], axis=-1).reshape(-1, 3)
    return (s * radii) @ axes.T


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_half_extent_is_the_maximum_over_the_surface(seed):
    rng = np.random.default_rng(seed)
    radii = rng.uniform(5e-6, 300e-6, 3)
    axes = Rotation.random(random_state=seed).as_matrix()
    pts = _surface(radii, axes)
    for u in rng.normal(size=(5, 3)):
        unit = u / np.linalg.norm(u)
        numeric = float(np.max(pts @ unit))
        got = float(ex.ellipsoid_half_extent(radii, axes, u))
        assert got == pytest.approx(numeric, rel=1e-4)
        assert got >= numeric * (1 - 1e-12)  # the grid never passes the true maximum
    # the semi-major of the projection on a plane: the largest distance of a projected surface point
    plane = Rotation.random(random_state=seed + 10).as_matrix()[:2]
    numeric = float(np.max(np.linalg.norm(pts @ plane.T, axis=1)))
    assert ex.ellipsoid_plane_semi_major(radii, axes, plane) == pytest.approx(numeric, rel=1e-4)


def test_half_extent_along_the_axes_and_a_cigar_across():
    # axis-aligned radii: along x the radius itself; a cigar 270 um long (x) and 13 um thick, along z: 13 um
    radii = np.array([270e-6, 13e-6, 13e-6])
    assert ex.ellipsoid_half_extent(radii, None, [1, 0, 0]) == pytest.approx(270e-6, rel=1e-12)
    assert ex.ellipsoid_half_extent(radii, None, [0, 0, 2]) == pytest.approx(13e-6, rel=1e-12)
    diag = ex.ellipsoid_half_extent(radii, None, [[1, 0, 1], [0, 1, 1]])
    assert diag == pytest.approx([math.sqrt((270e-6 ** 2 + 13e-6 ** 2) / 2), 13e-6], rel=1e-12)
