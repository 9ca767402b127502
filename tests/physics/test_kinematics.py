"""Magnetic and optical kicks, arrival times and Stern-Gerlach separation, checked
against handbook values, scipy.constants, hand formulas and independent ODE / Monte Carlo."""

from types import SimpleNamespace

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

from seqgen.physics import kinematics as k

MU_B = sc.physical_constants["Bohr magneton"][0]
U = sc.physical_constants["atomic mass constant"][0]
G_N = 9.80665  # exact (3rd CGPM, 1901; SI Brochure)
M_RB87 = 86.909180531 * U  # AME2020, Chinese Physics C 45, 030003 (2021) (from memory)
LAMBDA_D2 = 780.241209686e-9  # "Rubidium 87 D Line Data" compilation
GAMMA_D2 = 2 * np.pi * 6.0666e6  # "Rubidium 87 D Line Data" compilation


def test_rb87_d2_recoil_velocity():
    # 5.8845 mm/s ("Rubidium 87 D Line Data" compilation), quoted to 5 digits
    assert k.recoil_velocity(LAMBDA_D2, M_RB87) == pytest.approx(5.8845e-3, rel=2e-5)


def test_gradient_kick_hand_formula_and_sign():
    # dv = mu b' t / m; force = mu dB/dz with mu = -dE/dB
    mu = -MU_B  # |2,2> of Rb-87 at low field: E = +mu_B B (g_F m_F = 1), low-field seeker
    dv = k.gradient_kick_velocity(mu, 0.2, 3e-3, M_RB87)
    assert dv == pytest.approx(-MU_B * 0.2 * 3e-3 / M_RB87, rel=1e-14)
    assert dv < 0  # pushed towards weaker field
    assert k.gradient_kick_velocity(0.0, 0.2, 3e-3, M_RB87) == 0.0  # m_F = 0 is not pushed (common practice)


def test_levitation_gradient_rb87_stretched_state():
    # magnetic levitation of Rb-87 |2,2> (g_F m_F = 1) needs about 15.3 G/cm (from memory):
    # the magnetic kick over 1 s then equals g_n * 1 s, upwards. The low-field seeker has moment
    # -dE/dB = -mu_B, so |B| must grow downwards: d|B|/dz = -15.26 G/cm with z up.
    gradient = -15.26e-2  # T/m
    assert k.gradient_kick_velocity(-MU_B, gradient, 1.0, M_RB87) == pytest.approx(G_N, rel=5e-3)


RB87 = SimpleNamespace(nuclear_spin=1.5, hyperfine_splitting_hz=6834682610.904, g_j=2.00233113,
                       g_i=-0.0009951414, mass_kg=M_RB87)  # "Rubidium 87 D Line Data" compilation


def test_magnetic_push_of_stretched_state_is_exact_at_any_field():
    # |2,2> is a pure |m_J = 1/2, m_I = 3/2> state: E = (g_J/2 + 3 g_I/2) mu_B B at every field
    # (Breit-Rabi formula, Phys. Rev. 38, 2082 (1931)), so moment -dE/dB = -(g_J/2 + 3 g_I/2) mu_B;
    # dv = moment b' tau / m (force -dE/dz = moment d|B|/dz with moment = -dE/dB, derived here)
    moment = -(RB87.g_j / 2 + 1.5 * RB87.g_i) * MU_B
    for bias in (0.0, 1e-4, 0.1):
        push = k.magnetic_push(2, 2, 0.2, 3e-3, bias, atom=RB87)
        assert push.moment == pytest.approx(moment, rel=1e-12)
        assert push.velocity == pytest.approx(moment * 0.2 * 3e-3 / M_RB87, rel=1e-12)
    assert push.velocity < 0  # a low-field seeker is pushed towards weaker field


def test_magnetic_push_low_field_and_vectorised():
    # at B = 0 the moment is -g_F m_F mu_B, g_F(F=1) = (-g_J + (2I+2) g_I)/(2I+1) for J = 1/2
    # (Rev. Mod. Phys. 49, 31 (1977)); m_F = 0 is not pushed (common practice, no source)
    g1 = (-RB87.g_j + 5 * RB87.g_i) / 4
    push = k.magnetic_push(1, np.array([-1.0, 0.0, 1.0]), 0.08, 2e-3, 0.0, atom=RB87)
    np.testing.assert_allclose(push.moment, -g1 * np.array([-1.0, 0.0, 1.0]) * MU_B, rtol=1e-12, atol=1e-40)
    np.testing.assert_allclose(push.velocity, push.moment * 0.08 * 2e-3 / M_RB87, rtol=1e-14, atol=0)
    assert push.velocity[0] < 0 < push.velocity[2] and push.velocity[1] == 0.0
    # explicit mass wins; no mass at all is an error; not a ground level is an error
    assert k.magnetic_push(1, -1, 0.08, 2e-3, atom=RB87, mass_kg=2 * M_RB87).velocity == pytest.approx(
        0.5 * push.velocity[0], rel=1e-14)
    with pytest.raises(TypeError):
        k.magnetic_push(1, -1, 0.08, 2e-3, nuclear_spin=1.5, hyperfine_splitting_hz=6.8e9, g_j=2.0, g_i=0.0)
    with pytest.raises(ValueError):
        k.magnetic_push(3, 0, 0.08, 2e-3, atom=RB87)


def test_optical_kick_mean_and_heating():
    s, t = 1.0, 20e-6
    kick = k.optical_kick(GAMMA_D2, s, 0.0, t, LAMBDA_D2, M_RB87)
    # on resonance at s = 1 the rate is Gamma/4 (steady state of the optical Bloch equations)
    assert kick.scattering_rate == pytest.approx(GAMMA_D2 / 4, rel=1e-14)
    assert kick.photons == pytest.approx(GAMMA_D2 / 4 * t, rel=1e-14)
    assert kick.velocity == pytest.approx(kick.photons * sc.h / (M_RB87 * LAMBDA_D2), rel=1e-14)
    # heating 2 E_rec per scattered photon (Adv. At. Mol. Opt. Phys. 42, 95 (2000)), E_rec = hbar^2 k^2 / 2m
    e_rec = (sc.hbar * 2 * np.pi / LAMBDA_D2) ** 2 / (2 * M_RB87)
    assert kick.heating_j == pytest.approx(2 * kick.photons * e_rec, rel=1e-12)


def test_optical_kick_random_walk_against_monte_carlo():
    # Poisson absorptions along +z, isotropic emission: simulate and compare spreads
    rng = np.random.default_rng(12345)
    kick = k.optical_kick(GAMMA_D2, 0.1, GAMMA_D2 / 2, 2e-6, LAMBDA_D2, M_RB87)
    atoms = 20000
    n = rng.poisson(kick.photons, atoms)
    total = n.sum()
    cos_t = rng.uniform(-1, 1, total)
    phi = rng.uniform(0, 2 * np.pi, total)
    sin_t = np.sqrt(1 - cos_t**2)
    owner = np.repeat(np.arange(atoms), n)
    vz = kick.recoil_velocity * (n + np.bincount(owner, cos_t, atoms))
    vx = kick.recoil_velocity * np.bincount(owner, sin_t * np.cos(phi), atoms)
    assert vz.mean() == pytest.approx(kick.velocity, rel=0.02)
    # standard error of an RMS from 20000 samples ~ 0.5 %
    assert vz.std() == pytest.approx(kick.rms_velocity_along, rel=0.03)
    assert vx.std() == pytest.approx(kick.rms_velocity_transverse, rel=0.03)


def test_time_to_reach():
    # free fall from rest: d = g t^2 / 2
    assert k.time_to_reach(-0.1, 0.0, -G_N) == pytest.approx(np.sqrt(2 * 0.1 / G_N), rel=1e-14)
    assert k.time_to_reach(2e-3, 1e-2) == pytest.approx(0.2, rel=1e-14)
    # thrown up at v against gravity: first passage at height h is (v - sqrt(v^2 - 2 g h)) / g
    v, h = 0.5, 0.01
    assert k.time_to_reach(h, v, -G_N) == pytest.approx((v - np.sqrt(v**2 - 2 * G_N * h)) / G_N, rel=1e-12)
    assert k.time_to_reach(1.0, v, -G_N) == np.inf  # above the apex
    assert k.time_to_reach(-1e-3, 1e-2) == np.inf  # moving away, no acceleration
    assert k.time_to_reach(0.0, 3.0, 1.0) == 0.0
    # a tiny acceleration must not lose precision (no cancellation)
    assert k.time_to_reach(1e-3, 1e-2, 1e-15) == pytest.approx(0.1, rel=1e-12)
    out = k.time_to_reach(np.array([-0.1, 0.2]), 0.0, -G_N)
    assert out[0] == pytest.approx(np.sqrt(0.2 / G_N)) and out[1] == np.inf


def test_stern_gerlach_separation_against_trajectory_integration():
    mu1, mu2 = -MU_B / 2, MU_B / 2  # Rb-87 |2,1> and |1,1> at low field (g_F m_F = +1/2 and -1/2)
    b, tau, tof = 0.3, 4e-3, 12e-3

    def trajectory(mu):
        def rhs(t, y):
            force = mu * b if t < tau else 0.0
            return [y[1], force / M_RB87 - G_N]
        first = integrate.solve_ivp(rhs, (0, tau), [0, 0], rtol=1e-12, atol=1e-15)
        second = integrate.solve_ivp(rhs, (tau, tau + tof), first.y[:, -1], rtol=1e-12, atol=1e-15)
        return second.y[0, -1]

    sep = k.stern_gerlach_separation(mu1, mu2, b, tau, tof, M_RB87)
    assert sep == pytest.approx(trajectory(mu1) - trajectory(mu2), rel=1e-8)
    # hand formula: da tau (tau/2 + tof)
    da = (mu1 - mu2) * b / M_RB87
    assert sep == pytest.approx(da * tau * (tau / 2 + tof), rel=1e-14)


def test_components_resolved_rule():
    # >= 3 combined RMS widths (common practice, no source)
    s1, s2 = 30e-6, 40e-6  # combined 50 um
    assert k.components_resolved(150e-6, s1, s2)
    assert not k.components_resolved(149e-6, s1, s2)
    assert k.components_resolved(-150e-6, s1, s2)
    assert not k.components_resolved(150e-6, s1, s2, n_sigma=4)
    assert list(k.components_resolved(np.array([100e-6, 200e-6]), s1, s2)) == [False, True]


def test_pulse_displacement_against_trajectory_integration():
    # uniform acceleration a on [t0, t1], then free flight: integrate x'' = a numerically
    a, t0, t1 = 3.7, 2e-3, 6e-3

    def rhs(t, y):
        return [y[1], a if t0 <= t < t1 else 0.0]

    times = np.array([1e-3, 4e-3, 6e-3, 15e-3])
    sol = integrate.solve_ivp(rhs, (0, 15e-3), [0, 0], t_eval=times, rtol=1e-12, atol=1e-15, max_step=1e-5)
    np.testing.assert_allclose(k.pulse_displacement(a, t0, t1, times), sol.y[0], rtol=1e-6, atol=1e-12)
    # hand forms: a tau^2/2 at the end of the pulse, a tau (tau/2 + t_after) after it
    assert k.pulse_displacement(a, t0, t1, t1) == pytest.approx(a * 4e-3**2 / 2, rel=1e-14)
    assert k.pulse_displacement(a, t0, t1, 15e-3) == pytest.approx(a * 4e-3 * (2e-3 + 9e-3), rel=1e-14)
    assert k.pulse_displacement(a, t0, t1, 0.0) == 0.0
    # vectors: an acceleration with a trailing axis of 3 and times with a matching axis of 1
    out = k.pulse_displacement(np.array([[1.0, 0, 0], [0, 0, -2.0]]), 0.0, 1.0, np.array([[2.0], [1.0]]))
    np.testing.assert_allclose(out, [[1.5, 0, 0], [0, 0, -1.0]], rtol=1e-14)


def test_linear_trap_rms_widths_against_boltzmann_integral():
    # quadrupole with axial gradient G along z: |B| = (G/2) sqrt(x^2 + y^2 + 4 z^2); density exp(-|mu| |B| / k_B T)
    # (Boltzmann distribution of classical statistical mechanics). Integrate <z^2> and <rho^2>/2 on (rho, z) with the 2 pi rho weight.
    temp, mu, grad = 20e-6, -0.5 * MU_B, 0.2
    l_rad = sc.k * temp / (abs(mu) * grad / 2)  # 1/e length across the axis

    def dens(r, z):
        return np.exp(-np.sqrt(r * r + 4 * z * z) / l_rad) * 2 * np.pi * r

    lim = 40 * l_rad
    norm = integrate.dblquad(lambda r, z: dens(r, z), -lim, lim, 0, lim, epsabs=0, epsrel=1e-10)[0]
    z2 = integrate.dblquad(lambda r, z: z * z * dens(r, z), -lim, lim, 0, lim, epsabs=0, epsrel=1e-10)[0] / norm
    x2 = integrate.dblquad(lambda r, z: r * r / 2 * dens(r, z), -lim, lim, 0, lim, epsabs=0, epsrel=1e-10)[0] / norm
    widths = k.linear_trap_rms_widths(temp, mu, [grad / 2, grad / 2, grad])
    np.testing.assert_allclose(widths, [np.sqrt(x2), np.sqrt(x2), np.sqrt(z2)], rtol=1e-6)
    # twice the 1/e Boltzmann length k_B T / (|mu| b') along each axis
    assert widths[0] == pytest.approx(2 * l_rad, rel=1e-14)
    # broadcasting over temperatures
    assert k.linear_trap_rms_widths(np.array([1e-6, 4e-6]), mu, [grad / 2, grad / 2, grad]).shape == (2, 3)


def test_image_plane_basis():
    # a camera looking along +y with z up has +x to its right (right = forward x up); every basis is
    # orthonormal, and (right, up, forward) is left-handed: e_h x e_v = -n
    e_h, e_v, n = k.image_plane_basis([0, 2, 0])
    np.testing.assert_allclose(e_v, [0, 0, 1], atol=1e-15)
    np.testing.assert_allclose(e_h, [1, 0, 0], atol=1e-15)
    for los in ([0, 1, 0], [1, 1, 0.3], [0, 0, -1], [1e-9, 0, 1]):
        basis = np.array(k.image_plane_basis(los))
        np.testing.assert_allclose(basis @ basis.T, np.eye(3), atol=1e-12)
        np.testing.assert_allclose(np.cross(basis[0], basis[1]), -basis[2], atol=1e-12)
        np.testing.assert_allclose(basis[2], np.asarray(los) / np.linalg.norm(los), atol=1e-12)
    # the image's "up" is the vertical's part perpendicular to the line of sight
    e_h, e_v, n = k.image_plane_basis([1, 0, 1])
    np.testing.assert_allclose(e_v, np.array([-1, 0, 1]) / np.sqrt(2), atol=1e-12)
    with pytest.raises(ValueError):
        k.image_plane_basis([0, 0, 0])
