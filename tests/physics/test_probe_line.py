"""Probe detuning from a D line and the sign of a trap beam's light shift, against hand formulas with
scipy.constants (CODATA) and the Rb-87 and Na-23 D-line data compilations ("Rubidium 87 D Line Data",
"Sodium D Line Data", values from memory)."""

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.physics import imaging as im
from seqgen.physics import optical as opt
from seqgen.physics.atoms import get_species

RB_D2, RB_D1 = 780.241209686e-9, 794.978851156e-9  # Rubidium 87 D Line Data (from memory)
RB_GAMMA_D2, RB_GAMMA_D1 = 6.0666e6, 5.7500e6  # Gamma/2pi, Hz, same compilation (from memory)
NA_D2 = 589.1583264e-9  # Sodium D Line Data (from memory)


def test_optical_detuning_is_difference_of_frequencies():
    # a sodium probe on rubidium: nu = c / lambda for each, by hand
    delta = sc.c / 589.158e-9 - sc.c / RB_D2
    assert im.optical_detuning_hz(589.158e-9, RB_D2) == pytest.approx(delta, rel=1e-12)
    assert delta == pytest.approx(124.6e12, rel=1e-3)  # 508.8 THz - 384.2 THz (frequencies from memory)
    # blue of the line is positive, red negative
    assert im.optical_detuning_hz(RB_D1, RB_D2) < 0 < im.optical_detuning_hz(RB_D2, RB_D1)


def test_rb87_fine_structure_splitting_from_the_wavelengths():
    # D2 - D1 of Rb-87: 384.2304844685 THz - 377.1074635 THz = 7.123 THz (Rubidium 87 D Line Data, from memory)
    assert im.optical_detuning_hz(RB_D2, RB_D1) == pytest.approx(7.1230e12, rel=1e-4)


def test_wavelength_step_against_finite_difference():
    # |d nu / d lambda| = c / lambda^2 to first order; compare with the exact difference of c/lambda
    lam, step = NA_D2, 0.5e-12
    exact = sc.c / (lam - step / 2) - sc.c / (lam + step / 2)
    assert im.wavelength_step_hz(lam, step) == pytest.approx(exact, rel=1e-8)
    # the rounding of 589.158 nm (0.33 pm from the sodium D2 line) stays below half a pm
    assert abs(im.optical_detuning_hz(589.158e-9, NA_D2)) < im.wavelength_step_hz(NA_D2, 0.5e-12)


def test_scattering_rate_far_detuned_lorentzian_limit():
    # steady state R = (Gamma/2) s / (1 + s + 4 Delta^2/Gamma^2) (Laser Cooling and Trapping, Springer 1999,
    # from memory): for |Delta| >> Gamma it tends to (Gamma/2) s Gamma^2 / (4 Delta^2)
    gamma, s = 2 * np.pi * RB_GAMMA_D2, 0.2
    delta = 2 * np.pi * (sc.c / 589.158e-9 - sc.c / RB_D2)
    assert im.scattering_rate(gamma, s, delta) == pytest.approx(gamma / 2 * s * gamma**2 / (4 * delta**2), rel=1e-9)
    # at Delta = Gamma/2 and s << 1 the rate halves
    assert im.scattering_rate(gamma, 1e-6, gamma / 2) == pytest.approx(im.scattering_rate(gamma, 1e-6) / 2, rel=1e-5)


def _two_line_potential_per_intensity(lam, d1, d2, g1_hz, g2_hz):
    # ODT review, Adv. At. Mol. Opt. Phys. 42, 95 (2000): U/I = -sum w_i 3 pi c^2 / (2 w_i^3) Gamma_i
    # [1/(w_i - w) + 1/(w_i + w)], w_D1 = 1/3, w_D2 = 2/3 (written out here)
    w = 2 * np.pi * sc.c / lam
    total = 0.0
    for weight, lam_i, g_hz in ((1 / 3, d1, g1_hz), (2 / 3, d2, g2_hz)):
        wi, gi = 2 * np.pi * sc.c / lam_i, 2 * np.pi * g_hz
        total += weight * 3 * np.pi * sc.c**2 / (2 * wi**3) * gi * (1 / (wi - w) + 1 / (wi + w))
    return -total


@pytest.mark.parametrize("lam,repels", [(532e-9, True), (1064e-9, False), (770e-9, True), (800e-9, False)])
def test_rb87_light_shift_sign_blue_repels_red_attracts(lam, repels):
    sp = get_species("Rb87")
    ref = _two_line_potential_per_intensity(lam, RB_D1, RB_D2, RB_GAMMA_D1, RB_GAMMA_D2)
    got = opt.dipole_potential_per_intensity(sp, lam)
    assert got == pytest.approx(ref, rel=1e-6)
    assert (got > 0) is repels
    # alpha = -2 eps0 c U/I (ODT review): negative polarisability for a repulsive beam
    assert (opt.scalar_polarizability_au(sp, lam) < 0) is repels


def test_rb87_polarisability_at_1064_nm_near_published():
    # about 687 a.u. at 1064 nm (Phys. Rev. A 73, 022505 (2006), from memory); the D1 + D2 model leaves out
    # the core and the higher P lines (a few per cent)
    assert opt.scalar_polarizability_au(get_species("Rb87"), 1064e-9) == pytest.approx(687, rel=0.06)


def _scattering_per_intensity(lam, d1, d2, g1_hz, g2_hz):
    # ODT review: Gamma_sc/I = sum w_i 3 pi c^2 / (2 hbar w_i^3) (w/w_i)^3 Gamma_i^2 [1/(w_i - w) + 1/(w_i + w)]^2
    w = 2 * np.pi * sc.c / lam
    total = 0.0
    for weight, lam_i, g_hz in ((1 / 3, d1, g1_hz), (2 / 3, d2, g2_hz)):
        wi, gi = 2 * np.pi * sc.c / lam_i, 2 * np.pi * g_hz
        total += weight * 3 * np.pi * sc.c**2 / (2 * sc.hbar * wi**3) * (w / wi) ** 3 * gi**2 * (1 / (wi - w) + 1 / (wi + w)) ** 2
    return total


def test_held_trap_heating_is_recoil_heating_at_the_focus():
    # dT/dt = T_rec Gamma_sc / 3, k_B T_rec = hbar^2 k^2 / m (ODT review); one horizontal beam, the atoms sit
    # at the harmonic gravity sag z = g_n / omega_r^2, omega_r^2 = 4 U0 / (m w^2), where I = I0 exp(-2 z^2/w^2)
    sp = get_species("Rb87")
    lam, p, w = 1064e-9, 1.0, 50e-6
    depth, omegas, rate = opt.held_trap_heating(sp, [opt.GaussianBeam(p, w, lam)])
    i0 = 2 * p / (np.pi * w**2)
    t_rec = sc.hbar**2 * (2 * np.pi / lam) ** 2 / (sp.mass_kg * sc.k)
    u0 = -_two_line_potential_per_intensity(lam, RB_D1, RB_D2, RB_GAMMA_D1, RB_GAMMA_D2) * i0
    sag = 9.80665 / (4 * u0 / (sp.mass_kg * w**2))  # standard gravity (SI Brochure)
    i_min = i0 * np.exp(-2 * sag**2 / w**2)
    ref = t_rec * _scattering_per_intensity(lam, RB_D1, RB_D2, RB_GAMMA_D1, RB_GAMMA_D2) * i_min / 3
    assert depth > 0 and omegas is not None
    assert rate == pytest.approx(ref, rel=3e-4)
    assert opt.held_trap(sp, [opt.GaussianBeam(p, w, lam)])[0] == depth
