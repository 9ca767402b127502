"""Resonant absorption / fluorescence imaging: saturation, scattering, recoil effects.

SI units: W, m, s, rad/s, Hz. Linewidths Gamma are angular (rad/s) where the
argument name says rad_s; ``linewidth_hz`` means Gamma / 2 pi.
"""

from __future__ import annotations

import numpy as np
from scipy import constants as sc

__all__ = [
    "optical_detuning_hz",
    "wavelength_step_hz",
    "peak_intensity",
    "saturation_parameter",
    "scattering_rate",
    "photons_per_atom",
    "doppler_shift_after",
    "doppler_shift_linewidths",
    "photons_for_doppler_shift",
    "recoil_blur",
    "pixel_size_object_plane",
]


def _out(a):
    a = np.asarray(a, dtype=float)
    return float(a) if a.ndim == 0 else a


def peak_intensity(power_w, waist_m):
    """Peak intensity (W/m^2) of a Gaussian beam, 1/e^2 intensity radius w: I0 = 2 P / (pi w^2)."""
    return _out(2 * np.asarray(power_w, dtype=float) / (np.pi * np.asarray(waist_m, dtype=float) ** 2))


def saturation_parameter(power_w, waist_m, saturation_intensity_w_m2):
    """s0 = I0 / I_sat at the beam centre, I0 = 2 P / (pi w^2) (w = 1/e^2 intensity radius)."""
    return _out(peak_intensity(power_w, waist_m) / np.asarray(saturation_intensity_w_m2, dtype=float))


def scattering_rate(gamma_rad_s, s, detuning_rad_s=0.0):
    """Photon scattering rate (1/s) of a two-level atom in steady state:
    R = (Gamma/2) s / (1 + s + 4 Delta^2 / Gamma^2)
    (optical Bloch equations, steady state; e.g. the alkali D-line data
    compilations). Tends to Gamma/2 at strong saturation.
    """
    g = np.asarray(gamma_rad_s, dtype=float)
    s = np.asarray(s, dtype=float)
    d = np.asarray(detuning_rad_s, dtype=float)
    return _out(0.5 * g * s / (1 + s + 4 * (d / g) ** 2))


def optical_detuning_hz(wavelength_m, line_wavelength_m):
    """Detuning (Hz) of light of vacuum wavelength lambda from a line at lambda_0:
    delta = c/lambda - c/lambda_0 (positive: blue of the line)."""
    return _out(sc.c / np.asarray(wavelength_m, dtype=float) - sc.c / np.asarray(line_wavelength_m, dtype=float))


def wavelength_step_hz(wavelength_m, step_m):
    """Frequency spanned by a wavelength step d_lambda at lambda: |d nu| = c d_lambda / lambda^2 (first order)."""
    return _out(sc.c * np.asarray(step_m, dtype=float) / np.asarray(wavelength_m, dtype=float) ** 2)


def photons_per_atom(rate_per_s, duration_s):
    """Mean number of photons scattered: N = R tau (constant rate)."""
    return _out(np.asarray(rate_per_s, dtype=float) * np.asarray(duration_s, dtype=float))


def doppler_shift_after(photons, recoil_velocity_m_s, wavelength_m):
    """Doppler shift (Hz) seen by an atom pushed along the probe by N absorbed photons:
    delta_f = k v / 2 pi = N v_rec / lambda (first-order Doppler shift). Spontaneous
    emission kicks average to zero and are left out.
    """
    v = np.asarray(photons, dtype=float) * np.asarray(recoil_velocity_m_s, dtype=float)
    return _out(v / np.asarray(wavelength_m, dtype=float))


def doppler_shift_linewidths(photons, recoil_velocity_m_s, wavelength_m, linewidth_hz):
    """Doppler shift after N photons in units of the natural linewidth Gamma/2pi.

    Above about 0.5 the atom is pushed out of resonance (the scattering rate
    drops by half at detuning Gamma/2 for s << 1) and the image loses signal.
    """
    return _out(doppler_shift_after(photons, recoil_velocity_m_s, wavelength_m) / np.asarray(linewidth_hz, dtype=float))


def photons_for_doppler_shift(fraction_of_linewidth, recoil_velocity_m_s, wavelength_m, linewidth_hz):
    """Photons needed to Doppler-shift the atom by ``fraction_of_linewidth`` * Gamma/2pi."""
    return _out(np.asarray(fraction_of_linewidth, dtype=float) * np.asarray(linewidth_hz, dtype=float)
                * np.asarray(wavelength_m, dtype=float) / np.asarray(recoil_velocity_m_s, dtype=float))


def recoil_blur(photons, recoil_velocity_m_s, duration_s):
    """RMS displacement (m) along one axis transverse to the probe, from the random walk of
    spontaneous-emission recoils during an exposure of ``duration_s``:
        sigma_x = sqrt(N/3) v_rec tau / sqrt(3) = v_rec tau sqrt(N) / 3.
    Derivation (done here): photons are emitted at a constant rate R = N/tau
    in isotropic random directions, so each kick has per-axis variance
    v_rec^2/3 and the velocity is a random walk with Var v(t) = R t v_rec^2/3.
    x(tau) = integral of v(t) dt, hence
    Var x = (R v_rec^2/3) integral integral min(t, t') dt dt' = (R v_rec^2/3) tau^3/3.
    A dipole emission pattern changes the per-axis share (1/3) by tens of per cent.
    The directed push along the probe is not a blur in the image plane.
    """
    n = np.asarray(photons, dtype=float)
    return _out(np.asarray(recoil_velocity_m_s, dtype=float) * np.asarray(duration_s, dtype=float) * np.sqrt(n) / 3.0)


def pixel_size_object_plane(pixel_m, magnification):
    """Size (m) of one camera pixel projected into the atom plane: pixel / |M|."""
    m = np.asarray(magnification, dtype=float)
    if np.any(m == 0):
        raise ValueError("magnification must be non-zero")
    return _out(np.asarray(pixel_m, dtype=float) / np.abs(m))
