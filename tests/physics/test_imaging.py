"""Imaging: saturation, scattering, Doppler shift and recoil blur, checked against
hand formulas, a steady-state solution of the optical Bloch equations, the
handbook values of the Rb-87 D line, and a Monte Carlo random walk."""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

from seqgen.physics import imaging as im

U = sc.physical_constants["atomic mass constant"][0]
M_RB87 = 86.909180531 * U  # AME2020 (from memory)
LAMBDA_D2 = 780.241209686e-9  # "Rubidium 87 D Line Data" compilation
GAMMA_D2 = 2 * np.pi * 6.0666e6  # "Rubidium 87 D Line Data" compilation
ISAT = 16.69  # W/m^2 = 1.669 mW/cm^2, D2 cycling transition ("Rubidium 87 D Line Data" compilation) (from memory)
V_REC = 5.8845e-3  # m/s ("Rubidium 87 D Line Data" compilation)


def test_saturation_parameter_and_gaussian_peak_intensity():
    p, w = 1e-3, 1e-3
    assert im.saturation_parameter(p, w, ISAT) == pytest.approx(2 * p / (np.pi * w**2) / ISAT, rel=1e-14)
    # the profile I0 exp(-2 r^2 / w^2) must carry the full power
    i0 = im.peak_intensity(p, w)
    power, _ = integrate.quad(lambda r: i0 * np.exp(-2 * r**2 / w**2) * 2 * np.pi * r, 0, 10 * w)
    assert power == pytest.approx(p, rel=1e-10)


def obe_steady_state_excited(gamma, rabi, delta):
    # damped optical Bloch equations (u, v, w), w = P_e - P_g:
    # du = delta v - G/2 u; dv = -delta u - G/2 v - Omega w; dw = Omega v - G (w + 1)
    a = np.array([[-gamma / 2, delta, 0], [-delta, -gamma / 2, -rabi], [0, rabi, -gamma]])
    u, v, w = np.linalg.solve(a, [0, 0, gamma])
    return (1 + w) / 2


def test_scattering_rate_against_optical_bloch_steady_state():
    for s in (0.01, 1.0, 7.0):
        for delta in (0.0, 0.5 * GAMMA_D2, -3 * GAMMA_D2):
            rabi = GAMMA_D2 * np.sqrt(s / 2)  # s = 2 Omega^2 / Gamma^2 (on-resonance saturation parameter)
            expected = GAMMA_D2 * obe_steady_state_excited(GAMMA_D2, rabi, delta)
            assert im.scattering_rate(GAMMA_D2, s, delta) == pytest.approx(expected, rel=1e-12)
    assert im.scattering_rate(GAMMA_D2, 1e12) == pytest.approx(GAMMA_D2 / 2, rel=1e-11)
    assert im.photons_per_atom(1e7, 30e-6) == pytest.approx(300.0, rel=1e-14)


def test_doppler_shift_after_recoils():
    # one recoil: Doppler shift 7.5419 kHz on Rb-87 D2 ("Rubidium 87 D Line Data" compilation) (from memory)
    assert im.doppler_shift_after(1, V_REC, LAMBDA_D2) == pytest.approx(7.5419e3, rel=1e-4)
    # half a linewidth (Gamma/2pi = 6.0666 MHz) after about 402 photons
    n_half = im.photons_for_doppler_shift(0.5, V_REC, LAMBDA_D2, 6.0666e6)
    assert n_half == pytest.approx(0.5 * 6.0666e6 / 7.5419e3, rel=1e-4)
    assert im.doppler_shift_linewidths(n_half, V_REC, LAMBDA_D2, 6.0666e6) == pytest.approx(0.5, rel=1e-12)


def test_recoil_blur_against_monte_carlo_random_walk():
    rng = np.random.default_rng(7)
    n, tau, atoms = 200, 40e-6, 20000
    times = rng.uniform(0, tau, (atoms, n))
    cos_t = rng.uniform(-1, 1, (atoms, n))  # isotropic directions
    vx = V_REC * np.sqrt(1 - cos_t**2) * np.cos(rng.uniform(0, 2 * np.pi, (atoms, n)))
    x = np.sum(vx * (tau - times), axis=1)  # each kick drifts for the rest of the exposure
    # standard error of an RMS from 20000 samples ~ 0.5 %
    assert x.std() == pytest.approx(im.recoil_blur(n, V_REC, tau), rel=0.03)
    # the formula stated in the docstring: sqrt(N/3) v_rec tau / sqrt(3)
    assert im.recoil_blur(n, V_REC, tau) == pytest.approx(np.sqrt(n / 3) * V_REC * tau / np.sqrt(3), rel=1e-14)


def test_pixel_size_object_plane():
    assert im.pixel_size_object_plane(6.5e-6, 10.0) == pytest.approx(0.65e-6, rel=1e-14)
    assert im.pixel_size_object_plane(6.5e-6, -4.0) == pytest.approx(1.625e-6, rel=1e-14)  # inverted image
    with pytest.raises(ValueError):
        im.pixel_size_object_plane(6.5e-6, 0.0)
