"""seqgen.physics.absorption against formulas written out here: the resonant cross-section 3 lambda^2/(2 pi) of a
cycling transition (alkali D-line data compilations, Sodium D Line Data), Beer-Lambert absorption with
saturation integrated numerically, the saturation correction of Opt. Lett. 32, 3143 (2007), Thomas-Fermi and
Gaussian column densities integrated numerically, the Airy pattern's first zero (Bessel J1) and photon counts
from scipy.constants."""

import math

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate
from scipy.integrate import solve_ivp
from scipy.optimize import curve_fit
from scipy.special import j1, jn_zeros

from seqgen.physics import absorption as ab

from .atom_reference import GAMMA_HZ, LAMBDA_D2

SIGMA0 = 3 * LAMBDA_D2 ** 2 / (2 * math.pi)  # cycling transition, Sodium D Line Data (from memory: 1.657e-13 m^2)


def test_the_resonant_cross_section_is_three_lambda_squared_over_two_pi():
    # the D2 line from its frequency, 508.8487162 THz (Sodium D Line Data, from memory), and c (scipy.constants)
    lam = sc.c / 508.8487162e12
    assert ab.resonant_cross_section(lam) == pytest.approx(3 * lam ** 2 / (2 * math.pi), rel=1e-12)
    assert ab.resonant_cross_section(lam) == pytest.approx(SIGMA0, rel=1e-6)
    assert ab.cross_section(LAMBDA_D2, GAMMA_HZ / 2, GAMMA_HZ, 0.0) == pytest.approx(SIGMA0 / 2, rel=1e-12)


@pytest.mark.parametrize("column", [1e12, 5e12, 2e13])
def test_optical_depth_of_a_known_uniform_column_is_n_sigma0_for_a_weak_probe(column):
    od = ab.measured_od(ab.resonant_cross_section(LAMBDA_D2) * column, 1e-9)
    assert od == pytest.approx(column * SIGMA0, rel=1e-6)
    assert ab.measured_od(column * SIGMA0, 0.0, 1.0) == pytest.approx(column * SIGMA0 / 5, rel=1e-12)


@pytest.mark.parametrize("od0,s_in,det", [(0.3, 0.1, 0.0), (2.0, 1.0, 0.0), (4.0, 5.0, 0.0), (1.5, 0.5, 0.7),
                                          (0.05, 20.0, 0.0), (8.0, 0.02, 0.0)])
def test_transmitted_intensity_against_the_beer_lambert_equation_integrated_numerically(od0, s_in, det):
    # a uniform slab: dI/dz = -n sigma0 I / (1 + 4 delta^2/Gamma^2 + I/I_sat), in units of n sigma0 z and I_sat
    sol = solve_ivp(lambda z, s: -s / (1 + 4 * det ** 2 + s), (0, od0), [s_in], rtol=1e-11, atol=1e-14)
    assert ab.transmitted_saturation(od0, s_in, det) == pytest.approx(sol.y[0, -1], rel=1e-7)
    assert ab.measured_od(od0, s_in, det) == pytest.approx(math.log(s_in / sol.y[0, -1]), rel=1e-7)


def test_a_strong_probe_far_beyond_saturation_does_not_overflow():
    s = ab.transmitted_saturation(np.array([1.0, 3.0]), np.array([1e4, 1e4]))
    # deep in saturation each atom scatters at Gamma/2: I_out = I_in - od0 I_sat (minus a logarithm)
    assert np.allclose(s, 1e4 - np.array([1.0, 3.0]), rtol=1e-6)


@pytest.mark.parametrize("od0,s_in,alpha", [(0.5, 0.2, 1.0), (3.0, 2.0, 1.0), (6.0, 10.0, 1.0), (2.0, 1.0, 1.8)])
def test_the_saturation_correction_of_opt_lett_32_3143(od0, s_in, alpha):
    """OD_true = alpha OD_meas + (1 - exp(-OD_meas)) I/I_sat (Opt. Lett. 32, 3143 (2007)), written out here."""
    od_meas = ab.measured_od(od0, s_in, 0.0, alpha)
    assert alpha * od_meas + (1 - math.exp(-od_meas)) * s_in == pytest.approx(od0, rel=1e-9)
    assert ab.saturation_corrected_od(od_meas, s_in, alpha) == pytest.approx(
        alpha * od_meas + (1 - math.exp(-od_meas)) * s_in, rel=1e-12)


def _rotation(a, b):
    ca, sa, cb, sb = math.cos(a), math.sin(a), math.cos(b), math.sin(b)
    return np.array([[ca, -sa, 0], [sa, ca, 0], [0, 0, 1]]) @ np.array([[1, 0, 0], [0, cb, -sb], [0, sb, cb]])


def test_thomas_fermi_column_density_integrates_to_the_atom_number():
    n_atoms, rx, ry = 3e4, 40e-6, 15e-6
    shadow = np.diag([rx ** 2, ry ** 2])
    total, _ = integrate.dblquad(lambda y, x: ab.thomas_fermi_column_density(n_atoms, shadow, x, y), -rx, rx,
                                 lambda x: -ry * math.sqrt(max(0.0, 1 - x * x / rx ** 2)),
                                 lambda x: ry * math.sqrt(max(0.0, 1 - x * x / rx ** 2)), epsabs=1e-6)
    assert total == pytest.approx(n_atoms, rel=1e-6)


def test_thomas_fermi_column_density_is_the_line_integral_of_a_rotated_ellipsoid():
    """n(r) = n0 (1 - sum (r.u_i)^2 / R_i^2), n0 = 15 N / (8 pi R1 R2 R3) (Bose-Einstein Condensation in Dilute
    Gases, 2nd ed. (2008)), integrated along y at points of the x-z plane."""
    n_atoms, radii = 5e4, np.array([60e-6, 12e-6, 25e-6])
    axes = _rotation(0.4, 0.7)
    n0 = 15 * n_atoms / (8 * math.pi * np.prod(radii))
    basis = np.array([[1.0, 0, 0], [0, 0, 1.0]])
    shadow = ab.plane_matrix(radii, axes, basis)
    for x, z in [(0.0, 0.0), (10e-6, -5e-6), (-30e-6, 8e-6), (40e-6, 3e-6)]:
        def density(y):
            r = np.array([x, y, z])
            return n0 * max(0.0, 1 - float(np.sum((axes.T @ r) ** 2 / radii ** 2)))
        line, _ = integrate.quad(density, -100e-6, 100e-6, points=[0.0], limit=400, epsabs=1e-3)
        assert ab.thomas_fermi_column_density(n_atoms, shadow, x, z) == pytest.approx(line, rel=1e-5, abs=1e3)


def test_gaussian_column_density_of_a_rotated_cloud_integrates_to_the_atom_number_and_matches_the_line_integral():
    n_atoms, widths = 2e5, np.array([80e-6, 30e-6, 50e-6])
    axes = _rotation(0.3, -0.5)
    basis = np.array([[1.0, 0, 0], [0, 0, 1.0]])
    cov = ab.plane_matrix(widths, axes, basis)
    total, _ = integrate.dblquad(lambda z, x: ab.gaussian_column_density(n_atoms, cov, x, z), -8e-4, 8e-4,
                                 -8e-4, 8e-4, epsabs=1e-4)
    assert total == pytest.approx(n_atoms, rel=1e-6)
    sig = axes @ np.diag(widths ** 2) @ axes.T
    inv, norm = np.linalg.inv(sig), n_atoms / ((2 * math.pi) ** 1.5 * math.sqrt(np.linalg.det(sig)))
    for x, z in [(0.0, 0.0), (50e-6, -20e-6)]:
        line, _ = integrate.quad(lambda y: norm * math.exp(-0.5 * np.array([x, y, z]) @ inv @ np.array([x, y, z])),
                                 -6e-4, 6e-4, epsabs=1e-3)
        assert ab.gaussian_column_density(n_atoms, cov, x, z) == pytest.approx(line, rel=1e-7)


def test_the_rayleigh_radius_is_the_first_zero_of_the_airy_pattern():
    na, lam = 0.1, LAMBDA_D2
    first_zero = jn_zeros(1, 1)[0] / (2 * math.pi) * lam / na  # J1(k NA r) = 0
    assert ab.rayleigh_radius(lam, na) == pytest.approx(first_zero, rel=2e-3)
    assert ab.numerical_aperture(6e-3, 60e-3) == pytest.approx(math.sin(math.atan(6 / 60)), rel=1e-12)


def test_the_gaussian_psf_fits_the_airy_core():
    """A least-squares Gaussian fit to the Airy intensity (2 J1(v)/v)^2 inside its first zero has an rms width
    within 5 % of 0.21 lambda / NA."""
    na, lam = 0.12, LAMBDA_D2
    r = np.linspace(1e-9, 0.6 * lam / na, 400)
    v = 2 * math.pi * na * r / lam
    airy = (2 * j1(v) / v) ** 2
    (sigma,), _ = curve_fit(lambda rr, s: np.exp(-rr ** 2 / (2 * s ** 2)), r, airy, p0=[0.2 * lam / na])
    assert ab.gaussian_psf_sigma(lam, na) == pytest.approx(sigma, rel=0.05)


def test_the_blur_keeps_the_total_absorbed_signal_and_binning_keeps_the_sum():
    rng = np.random.default_rng(3)
    field = np.zeros((120, 90))
    field[40:80, 30:60] = rng.random((40, 30))
    for sigma in (0.7, 2.5, 6.0):
        assert ab.blur(field, sigma).sum() == pytest.approx(field.sum(), rel=1e-9)
    blurred = ab.blur(field, 2.5)
    assert blurred[40:80, 30:60].sum() < field.sum()  # it does spread
    assert ab.bin_pixels(field, 3).sum() == pytest.approx(field.sum(), rel=1e-12)
    with pytest.raises(ValueError):
        ab.bin_pixels(field, 7)


def test_photon_counts_from_intensity_area_and_time():
    n = ab.photons(10.0, (3.25e-6) ** 2, 30e-6, LAMBDA_D2, 0.7)
    assert n == pytest.approx(0.7 * 10.0 * (3.25e-6) ** 2 * 30e-6 / (sc.h * sc.c / LAMBDA_D2), rel=1e-12)


def test_shot_noise_is_reproducible_with_a_seed_and_its_variance_follows_the_photon_counts():
    counts, t = 4000.0, np.full((300, 300), 0.5)
    a = ab.noisy_od(t, counts, np.random.default_rng(11))
    assert np.array_equal(a, ab.noisy_od(t, counts, np.random.default_rng(11)))
    assert not np.array_equal(a, ab.noisy_od(t, counts, np.random.default_rng(12)))
    assert a.mean() == pytest.approx(math.log(2), abs=0.005)
    # Poisson counts: Var ln C = 1/<C> to first order, for the image with atoms (<C> = N T) and the probe alone
    assert a.var() == pytest.approx(1 / (counts * 0.5) + 1 / counts, rel=0.03)
    flat = ab.noisy_od(np.ones((300, 300)), counts, np.random.default_rng(5))
    assert flat.var() == pytest.approx(2 / counts, rel=0.03)
