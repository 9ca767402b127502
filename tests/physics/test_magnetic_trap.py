"""Magnetic trap stages (seqgen/physics/magnetic_trap.py, the functions behind `magnetic_hold`):
levitation, holding gradients, Ioffe-Pritchard frequencies and sag, Majorana-loss scales.

Checked against scipy.constants (CODATA), standard gravity g_n = 9.80665 m/s^2 (exact, SI
Brochure), published closed forms and independent numerical solutions; the source is named
beside each check. Convention: moment = -dE/dB, negative for a low-field seeker.
"""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import optimize

from seqgen.physics import magnetic_trap as mt

MU_B = sc.physical_constants["Bohr magneton"][0]
U = sc.physical_constants["atomic mass constant"][0]
G_N = 9.80665  # exact (3rd CGPM, 1901; SI Brochure)
M_NA23 = 22.989769282 * U  # AME2020, Chinese Physics C 45, 030003 (2021) (from memory)
M_RB87 = 86.909180531 * U  # AME2020 (from memory)
LFS_HALF = -MU_B / 2  # |F=1, mF=-1> of Na-23 or Rb-87 to first order: g_F m_F = +1/2, moment = -mu_B/2
G_CM = 0.01  # T/m per G/cm


def _axial_quadrupole(gradient, axis=(0, 0, 1)):
    return mt.quadrupole_field_matrix([gradient], [axis])


def test_levitation_gradient_rb87_and_na23_lower_stretched_state():
    # Rb-87 |1,-1>: about 30.5 G/cm (from memory); Na-23 |1,-1>: m g / (mu_B / 2), about 8.07 G/cm
    # (computed here from scipy.constants and the AME2020 mass)
    rb = mt.levitation_gradient(M_RB87, LFS_HALF) / G_CM
    na = mt.levitation_gradient(M_NA23, LFS_HALF) / G_CM
    assert rb == pytest.approx(30.5, abs=0.1)
    assert na == pytest.approx(M_NA23 * G_N / (MU_B / 2) / G_CM, rel=1e-12)
    assert na == pytest.approx(8.07, abs=0.01)
    # a vertical quadrupole at exactly that axial gradient balances gravity: force / weight = 1
    matrix = _axial_quadrupole(na * G_CM)
    assert mt.gravity_support(LFS_HALF, mt.holding_gradient(matrix), M_NA23) == pytest.approx(1.0, rel=1e-12)


def test_horizontal_quadrupole_needs_twice_the_gradient():
    # div B = 0: |B| grows at G along the axis and G/2 across it (Maxwell), so a coil pair with a
    # horizontal axis must give twice the levitation gradient along its axis: ~16.1 G/cm for Na-23 |1,-1>
    lev = mt.levitation_gradient(M_NA23, LFS_HALF)
    assert mt.holding_gradient(_axial_quadrupole(1.0, (1, 0, 0))) == pytest.approx(0.5, rel=1e-12)
    assert mt.holding_gradient(_axial_quadrupole(1.0, (0, 0, 1))) == pytest.approx(1.0, rel=1e-12)
    need = 2 * lev / G_CM
    assert need == pytest.approx(16.1, abs=0.05)
    horizontal = _axial_quadrupole(need * G_CM, (0, 1, 0))
    assert mt.gravity_support(LFS_HALF, mt.holding_gradient(horizontal), M_NA23) == pytest.approx(1.0, rel=1e-12)


def test_field_matrix_is_a_vacuum_field_and_matches_the_quadrupole_magnitude():
    # Maxwell in vacuum: div B = trace M = 0, curl B = 0 <=> M symmetric
    rng = np.random.default_rng(7)
    axes = rng.normal(size=(3, 3))
    m = mt.quadrupole_field_matrix([0.3, -0.1, 0.2], axes)
    assert np.trace(m) == pytest.approx(0.0, abs=1e-15)
    assert np.allclose(m, m.T, atol=1e-15)
    # one coil along z: |M r| is b' sqrt(x^2 + y^2 + 4 z^2) with b' = G/2
    pts = rng.normal(size=(50, 3)) * 1e-3
    single = _axial_quadrupole(0.4)
    assert np.allclose(np.linalg.norm(pts @ single.T, axis=1), mt.quadrupole_field_magnitude(0.2, pts), rtol=1e-12)


def test_holding_gradient_against_brute_force_minimisation():
    # independent check of 1/|M^-1 up|: U(r) = k |M r| + m g z on the unit sphere (U is homogeneous) must
    # stay >= 0 just above the threshold and dip below 0 just below it (numerical minimisation)
    rng = np.random.default_rng(11)
    m = mt.quadrupole_field_matrix([0.25, 0.12], [(0.3, 0.1, 1.0), (1.0, -0.4, 0.2)])
    weight = 1.0
    k_star = weight / mt.holding_gradient(m)

    def worst(k):
        def u(angles):
            th, ph = angles
            r = np.array([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)])
            return k * np.linalg.norm(m @ r) + weight * r[2]

        starts = rng.uniform([0, 0], [np.pi, 2 * np.pi], size=(40, 2))
        return min(optimize.minimize(u, s, method="Nelder-Mead", options={"xatol": 1e-10, "fatol": 1e-14}).fun
                   for s in starts)

    assert worst(1.01 * k_star) > 0
    assert worst(0.99 * k_star) < 0


def test_singular_field_holds_nothing():
    # two equal and opposite coils cancel: no gradient, no trap
    m = mt.quadrupole_field_matrix([0.2, -0.2], [(0, 0, 1), (0, 0, 1)])
    assert mt.holding_gradient(m) == 0.0
    assert mt.holding_gradient(np.zeros((3, 3))) == 0.0


def test_high_field_seeker_and_mf0_get_no_support():
    # force = moment grad|B|: a high-field seeker (moment > 0) is pulled to stronger field, mF = 0 not at all
    g = mt.holding_gradient(_axial_quadrupole(0.5))
    assert mt.gravity_support(+MU_B / 2, g, M_NA23) < 0
    assert mt.gravity_support(0.0, g, M_NA23) == 0.0
    with pytest.raises(ValueError):
        mt.levitation_gradient(M_NA23, +MU_B / 2)


def test_ioffe_pritchard_frequencies_published_form_and_field_expansion():
    # omega_rho = sqrt(mu/m (B'^2/B0 - B''/2)), omega_z = sqrt(mu B''/m) (Phys. Rev. Lett. 51, 1336 (1983)),
    # with |mu| = mu_B/2; and against finite differences of the exact Ioffe-Pritchard field
    # B = B0 z + B'(x, -y, 0) + (B''/2)(-x z, -y z, z^2 - (x^2 + y^2)/2) (the field of that paper expanded to second
    # order; div B = curl B = 0 checked by hand)
    b0, b1, b2 = 0.5e-4, 1.5, 100.0  # 0.5 G, 150 G/cm, 100 G/cm^2
    mu = MU_B / 2
    w_rho, w_z = mt.ioffe_pritchard_frequencies(LFS_HALF, b1, b2, b0, M_NA23)
    assert w_rho == pytest.approx(np.sqrt(mu / M_NA23 * (b1 ** 2 / b0 - b2 / 2)), rel=1e-12)
    assert w_z == pytest.approx(np.sqrt(mu * b2 / M_NA23), rel=1e-12)

    def bmag(x, y, z):
        return np.sqrt((b1 * x - b2 * x * z / 2) ** 2 + (-b1 * y - b2 * y * z / 2) ** 2
                       + (b0 + b2 / 2 * (z ** 2 - (x ** 2 + y ** 2) / 2)) ** 2)

    h = 2e-8
    curv_x = (bmag(h, 0, 0) - 2 * bmag(0, 0, 0) + bmag(-h, 0, 0)) / h ** 2
    hz = 1e-5
    curv_z = (bmag(0, 0, hz) - 2 * bmag(0, 0, 0) + bmag(0, 0, -hz)) / hz ** 2
    assert w_rho == pytest.approx(np.sqrt(mu * curv_x / M_NA23), rel=1e-3)
    assert w_z == pytest.approx(np.sqrt(mu * curv_z / M_NA23), rel=1e-4)


def test_harmonic_sag_against_numerical_minimum():
    # the minimum of m/2 (w_z^2 (r.n)^2 + w_rho^2 |r - (r.n) n|^2) + m g z, found numerically
    w_rho, w_z = 2 * np.pi * 150.0, 2 * np.pi * 15.0
    for axis in ((1, 0, 0), (0, 0, 1), (1, 0, 1)):
        n = np.asarray(axis, float) / np.linalg.norm(axis)

        def u(s_um):  # in micrometres, so the minimiser works near unit scale
            r = s_um * 1e-6
            a = r @ n
            return 1e12 * (0.5 * (w_z ** 2 * a ** 2 + w_rho ** 2 * (r @ r - a ** 2)) + G_N * r[2])

        r_min = optimize.minimize(u, np.zeros(3), method="Powell", options={"xtol": 1e-10, "ftol": 1e-16}).x * 1e-6
        assert mt.harmonic_sag(w_rho, w_z, axis) == pytest.approx(np.linalg.norm(r_min), rel=1e-5)
    # horizontal axis: force balance m omega_rho^2 z = m g gives the sag g / omega_rho^2
    assert mt.harmonic_sag(w_rho, w_z, (1, 0, 0)) == pytest.approx(G_N / w_rho**2, rel=1e-12)
    assert mt.gravity_sag(w_rho) == pytest.approx(G_N / w_rho**2, rel=1e-12)


def test_majorana_hole_radius_is_where_larmor_meets_field_rotation():
    # Phys. Rev. Lett. 74, 3352 (1995) (from memory): spins flip where the Larmor frequency |mu| b' r / hbar
    # falls below the rate v / r at which the field direction turns for an atom passing at speed v
    b1, v = 0.1, 0.05
    r0 = mt.majorana_hole_radius(LFS_HALF, b1, v)
    assert (MU_B / 2) * b1 * r0 / sc.hbar == pytest.approx(v / r0, rel=1e-12)


def test_majorana_lifetime_hand_formula():
    # loss rate ~ hbar / (m l^2) (Phys. Rev. Lett. 74, 3352 (1995)) (from memory), l = k_B T / (|mu| b')
    temp, b1 = 1.1e-6, 0.10
    size = mt.linear_trap_size(temp, LFS_HALF, b1)
    assert size == pytest.approx(sc.k * temp / (MU_B / 2 * b1), rel=1e-12)
    assert mt.majorana_lifetime(M_NA23, size) == pytest.approx(M_NA23 * size ** 2 / sc.hbar, rel=1e-12)
    # scale: cold clouds are lost fast (~0.4 s at 1.1 uK, 10 G/cm), hot ones hardly (lifetime grows as T^2)
    assert 0.1 < mt.majorana_lifetime(M_NA23, size) < 1.0
    hot = mt.majorana_lifetime(M_NA23, mt.linear_trap_size(100 * temp, LFS_HALF, b1))
    hot_size = sc.k * 100 * temp / (MU_B / 2 * b1)
    assert hot == pytest.approx(M_NA23 * hot_size**2 / sc.hbar, rel=1e-12)
    assert hot == pytest.approx(1e4 * M_NA23 * size**2 / sc.hbar, rel=1e-12)


def test_linear_trap_size_is_the_boltzmann_length():
    # Boltzmann factor exp(-U / k_B T) with U = |mu| b' |x| falls by 1/e at x = l (statistical mechanics)
    temp, b1 = 20e-6, 0.08
    size = mt.linear_trap_size(temp, LFS_HALF, b1)
    assert np.exp(-(MU_B / 2) * b1 * size / (sc.k * temp)) == pytest.approx(np.exp(-1), rel=1e-12)


def test_field_rotation_rate_against_finite_difference():
    # the direction of B = (b' x, 0, B0) is atan(b' x / B0); for x = v t its rate at t = 0 is b' v / B0
    b1, b0, v = 1.5, 1e-4, 0.03
    dt = 1e-10
    rate = (np.arctan(b1 * v * dt / b0) - np.arctan(-b1 * v * dt / b0)) / (2 * dt)
    assert mt.field_rotation_rate(b1, b0, v) == pytest.approx(rate, rel=1e-6)


def test_bad_axes_are_refused():
    with pytest.raises(ValueError):
        mt.quadrupole_field_matrix([0.1], [(0, 0, 0)])
    with pytest.raises(ValueError):
        mt.quadrupole_field_matrix([0.1, 0.2], [(0, 0, 1)])


@pytest.mark.parametrize("field_g", [0.0, 1.2, 100.0, 400.0])
def test_trappable_states_are_the_low_field_seekers_of_the_breit_rabi_levels(field_g):
    # A static field has a minimum but no maximum of |B| in free space, so only states whose energy grows with
    # |B| (moment -dE/dB < 0) are held (Prog. Quantum Electron. 8, 181 (1984), from memory). Moments from the
    # Breit-Rabi formula (Phys. Rev. 38, 2082 (1931)) written out in tests/atom_reference.py; threshold 0.01 mu_B
    # as the function's default. Na-23: at low field |1,-1>, |2,+1>, |2,+2> (g_F m_F > 0, Rev. Mod. Phys. 49, 31
    # (1977)); |2,0> joins once its second-order moment exceeds the threshold (100 G); |1,-1> turns into a
    # high-field seeker where d/dx sqrt(1 - x + x^2) changes sign, x = 1/2 (about 316 G).
    from seqgen.physics.atoms import get_species

    from ..atom_reference import moment

    b = field_g * 1e-4
    levels = [(1, m) for m in (-1, 0, 1)] + [(2, m) for m in range(-2, 3)]
    want = sorted(st for st in levels if moment(*st, b) < -0.01 * MU_B)
    assert sorted(mt.trappable_states(get_species("Na23"), b)) == want
    if field_g < 2:
        assert want == [(1, -1), (2, 1), (2, 2)]
    assert ((2, 0) in want) is (field_g >= 100) and ((1, -1) in want) is (field_g < 316)


def test_linear_trap_cloud_with_gravity_obeys_the_virial_theorem_and_sags():
    # U = |mu| |M r| + m g z is homogeneous of degree 1 in r, so a Boltzmann cloud has <r . grad U> = <U> = 3 k_B T
    # (virial theorem of classical statistical mechanics) whatever the support; without gravity the rms widths
    # are 2 k_B T / (|mu| g_i) (the exp(-|u|) moments); with gravity the cloud sits below the zero and is wider
    import numpy as np
    import scipy.constants as sc

    from seqgen.physics.magnetic_trap import linear_trap_cloud, quadrupole_field_matrix

    mu_b = sc.physical_constants["Bohr magneton"][0]
    mass = 132.905451961 * sc.atomic_mass  # Cs-133 (from memory)
    mu, temp = 0.75 * mu_b, 1e-6  # |F=3, mF=-3>: g_F = -1/4 (from memory), a low-field seeker
    kt = sc.k * temp
    for grad, axis in ((0.40, (0, 0, 1)), (2.0, (0, 0, 1)), (0.8, (1, 0, 0))):
        m = quadrupole_field_matrix([grad], [axis])
        mean, cov = linear_trap_cloud(m, -mu, mass, temp)
        # held against gravity: the cloud sits below the zero, with a positive definite covariance
        assert mean[2] < 0 and np.all(np.linalg.eigvalsh(cov) > 0)
    # no gravity (a vanishing mass): the closed-form widths
    m = quadrupole_field_matrix([0.40], [(0, 0, 1)])
    _, cov = linear_trap_cloud(m, -mu, 1e-40, temp)
    expected = 2 * kt / (mu * np.array([0.20, 0.20, 0.40]))
    assert np.sqrt(np.diag(cov)) == pytest.approx(expected, rel=5e-3)
    # the virial theorem near levitation (support 1.29), on a finer grid written here, and the function's sag
    grad, up = 0.40, np.array([0.0, 0.0, 1.0])
    m = quadrupole_field_matrix([grad], [(0, 0, 1)])
    reach = 40 * kt / (mu * 0.20)
    xs = np.linspace(-reach, reach, 121)
    x, y, z = np.meshgrid(xs, xs, xs, indexing="ij")
    pts = np.stack([x, y, z], axis=-1).reshape(-1, 3)
    u = mu * np.linalg.norm(pts @ m.T, axis=1) + mass * sc.g * (pts @ up)
    w = np.exp(-(u - u.min()) / kt)
    assert float(w @ u / w.sum()) == pytest.approx(3 * kt, rel=0.02)
    mean, _ = linear_trap_cloud(m, -mu, mass, temp)
    assert mean[2] == pytest.approx(float(w @ pts[:, 2] / w.sum()), rel=0.02)
