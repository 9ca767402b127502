"""Time of flight: thermal clouds, Thomas-Fermi condensates, free fall.

The source is named beside each check.
"""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

from seqgen.physics import expansion as ex

A0 = sc.physical_constants["Bohr radius"][0]
M_RB87 = 86.909180531 * sc.physical_constants["atomic mass constant"][0]  # AME2020 (from memory)


def test_thermal_width_formula():
    # sigma(t)^2 = sigma0^2 + k_B T t^2 / m: x(t) = x0 + v t with independent Gaussian x0 and v (Maxwell-Boltzmann,
    # variance k_B T / m per velocity component), so the variances add (derived here)
    t = np.linspace(0, 30e-3, 7)
    got = ex.thermal_width(20e-6, 1e-6, M_RB87, t)
    assert got == pytest.approx(np.sqrt(20e-6**2 + sc.k * 1e-6 * t**2 / M_RB87), rel=1e-12)
    # Rb87 at 1 uK: rms velocity sqrt(kT/m) ~ 9.8 mm/s, so ~196 um after 20 ms from a point source
    assert ex.thermal_width(0.0, 1e-6, M_RB87, 20e-3) == pytest.approx(196e-6, rel=5e-3)


def test_thermal_release_from_harmonic_trap():
    # released equilibrium cloud: sigma0^2 = k_B T / (m omega^2) (equipartition in the trap), so the form above
    # becomes sigma(t) = sigma0 sqrt(1 + omega^2 t^2) (derived here)
    w = 2 * np.pi * 80.0
    s0 = ex.thermal_in_trap_width(500e-9, M_RB87, w)
    assert s0 == pytest.approx(np.sqrt(sc.k * 500e-9 / (M_RB87 * w**2)), rel=1e-12)
    t = np.array([0.0, 5e-3, 20e-3])
    assert ex.thermal_width(s0, 500e-9, M_RB87, t) == pytest.approx(s0 * np.sqrt(1 + (w * t) ** 2), rel=1e-12)


def test_thomas_fermi_against_independent_forms():
    # "Bose-Einstein Condensation in Dilute Gases" (Cambridge University Press, 2008): mu^(5/2) = 15 hbar^2 m^(1/2) N omega_bar^3 a / 2^(5/2), and the normalisation
    # of the TF profile n = (mu - V)/g, g = 4 pi hbar^2 a / m: N = (8 pi / 15) mu R_x R_y R_z / g
    n, a = 2e5, 100.4 * A0  # Rb87 |1,-1> (Phys. Rev. Lett. 88, 093201 (2002), from memory)
    w = 2 * np.pi * np.array([30.0, 90.0, 150.0])
    mu, radii = ex.thomas_fermi(n, M_RB87, a, w)
    wbar = np.prod(w) ** (1 / 3)
    mu_indep = (15 * sc.hbar**2 * np.sqrt(M_RB87) * n * wbar**3 * a / 2**2.5) ** 0.4
    assert mu == pytest.approx(mu_indep, rel=1e-12)
    g = 4 * np.pi * sc.hbar**2 * a / M_RB87
    assert 8 * np.pi / 15 * mu * np.prod(radii) / g == pytest.approx(n, rel=1e-12)
    # trap energy at the edge equals mu on every axis
    assert 0.5 * M_RB87 * (w * radii) ** 2 == pytest.approx(np.full(3, mu), rel=1e-12)
    with pytest.raises(ValueError):
        ex.thomas_fermi(n, M_RB87, -1e-9, w)


def test_cigar_expansion_closed_form():
    # Phys. Rev. Lett. 77, 5315 (1996), eps = omega_z/omega_perp << 1, tau = omega_perp t:
    # lambda_perp = sqrt(1 + tau^2) (+ O(eps^2)), lambda_z = 1 + eps^2 (tau arctan tau - ln sqrt(1 + tau^2)) + O(eps^4)
    tau = np.linspace(0.0, 40.0, 41)
    resid = {}
    for eps in (0.01, 0.02):
        lam = ex.condensate_expansion([1.0, 1.0, eps], tau)
        perp = np.sqrt(1 + tau**2)
        lz = 1 + eps**2 * (tau * np.arctan(tau) - np.log(np.sqrt(1 + tau**2)))
        assert np.all(np.abs(lam[0] / perp - 1) < eps**2)
        assert lam[0] == pytest.approx(lam[1], rel=1e-12)
        assert np.all(np.abs(lam[2] - lz) < eps**4 * (1 + tau**2))
        resid[eps] = np.abs(lam[2] - lz)[-1]
    # the residual is of order eps^4: doubling eps multiplies it by ~16
    assert resid[0.02] / resid[0.01] == pytest.approx(16, rel=0.1)


def test_isotropic_expansion_by_quadrature():
    # isotropic: lambda'' = omega^2 / lambda^4, energy integral lambda'^2 = (2/3) omega^2 (1 - lambda^-3),
    # so t(lambda) = int_1^lambda dl / (omega sqrt(2/3 (1 - l^-3))) (evaluated independently by quad)
    w = 2 * np.pi * 50.0
    targets = np.array([1.5, 3.0, 10.0])
    times = [integrate.quad(lambda l: 1 / (w * np.sqrt(2 / 3 * (1 - l**-3))), 1.0, lt, limit=200)[0]
             for lt in targets]
    lam = ex.condensate_expansion([w, w, w], np.array(times))
    assert lam[0] == pytest.approx(targets, rel=1e-6)


def test_expansion_unsorted_times_and_radii():
    w = 2 * np.pi * np.array([100.0, 100.0, 10.0])
    t = np.array([20e-3, 0.0, 5e-3])
    lam = ex.condensate_expansion(w, t)
    assert lam.shape == (3, 3)
    assert lam[:, 1] == pytest.approx([1, 1, 1])
    # scaling equations of a released condensate, lambda_i'' = omega_i^2 / (lambda_i lambda_x lambda_y lambda_z),
    # lambda(0) = 1, lambda'(0) = 0 (Phys. Rev. Lett. 77, 5315 (1996)), integrated here with scipy
    def rhs(_, y):
        lam_, dlam = y[:3], y[3:]
        return np.r_[dlam, w**2 / (lam_ * np.prod(lam_))]

    sol = integrate.solve_ivp(rhs, (0.0, 20e-3), np.r_[np.ones(3), np.zeros(3)], method="DOP853",
                              rtol=1e-12, atol=1e-14, t_eval=[5e-3, 20e-3])
    assert lam[:, 2] == pytest.approx(sol.y[:3, 0], rel=1e-8)
    assert lam[:, 0] == pytest.approx(sol.y[:3, 1], rel=1e-8)
    radii = np.array([3e-6, 3e-6, 30e-6])
    assert ex.condensate_tof_radii(radii, w, t) == pytest.approx(radii[:, None] * lam, rel=1e-12)


def test_free_fall():
    # z = z0 + v0 t - g t^2 / 2 with standard gravity g = 9.80665 m/s^2 (scipy.constants.g, SI Brochure)
    t = np.array([0.0, 10e-3, 20e-3])
    assert ex.free_fall_position(1e-3, 5e-3, t) == pytest.approx(1e-3 + 5e-3 * t - 0.5 * sc.g * t**2, rel=1e-12)
    assert ex.free_fall_position(0.0, 0.0, 20e-3) == pytest.approx(-1.96133e-3, rel=1e-6)
