"""Absorption images: column densities of clouds, Beer-Lambert absorption with saturation and detuning, the
imaging resolution, camera pixels and photon shot noise.

SI units throughout (m, s, W, Hz); no seqgen types. Sources:
- resonant cross-section of a cycling two-level transition sigma0 = 3 lambda^2 / (2 pi), its Lorentzian
  detuning and saturation factor sigma = sigma0 / (1 + 4 delta^2/Gamma^2 + I/I_sat) (the alkali D-line data
  compilations: Sodium D Line Data, Rubidium 87 D Line Data; optical Bloch equations in steady state);
- absorption of a saturating probe, dI/dz = -n sigma0 I / (alpha (1 + 4 delta^2/Gamma^2) + I/I_sat), and its
  inversion OD_true = alpha OD_meas + (1 - exp(-OD_meas)) I/I_sat: Opt. Lett. 32, 3143 (2007) (alpha: the
  effective saturation intensity in units of I_sat, 1 for a cycling transition);
- Thomas-Fermi column density: Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge University
  Press (2008) (integrating the inverted parabola along the line of sight);
- point-spread function: the Airy pattern of a circular pupil, first zero at 0.61 lambda / NA (Rayleigh);
  approximated here by a Gaussian of rms width 0.21 lambda / NA (the least-squares fit to the Airy core,
  Appl. Opt. 46, 1819 (2007) (from memory)).
"""

from __future__ import annotations

import numpy as np
from scipy import constants as sc

__all__ = [
    "resonant_cross_section", "cross_section", "plane_matrix", "gaussian_column_density",
    "thomas_fermi_column_density", "transmitted_saturation", "measured_od", "saturation_corrected_od",
    "rayleigh_radius", "gaussian_psf_sigma", "numerical_aperture", "blur", "bin_pixels", "photons",
    "noisy_od",
]

RAYLEIGH = 0.61  # first zero of the Airy pattern, in lambda / NA
AIRY_GAUSSIAN = 0.21  # rms width of the Gaussian fitted to the Airy core, in lambda / NA (from memory)
PSF_TRUNCATE = 5.0  # the Gaussian kernel reaches this many rms widths (its weight beyond: 6e-7 per axis)


def _out(a):
    a = np.asarray(a, dtype=float)
    return float(a) if a.ndim == 0 else a


def resonant_cross_section(wavelength_m):
    """sigma0 = 3 lambda^2 / (2 pi) (m^2): resonant absorption of a cycling two-level transition."""
    return _out(3 * np.asarray(wavelength_m, dtype=float) ** 2 / (2 * np.pi))


def cross_section(wavelength_m, detuning_hz=0.0, linewidth_hz=1.0, s=0.0):
    """sigma = sigma0 / (1 + 4 delta^2 / Gamma^2 + s) (m^2) at detuning delta (Hz) from the line of width
    Gamma/2pi (Hz) and saturation s = I / I_sat."""
    d = np.asarray(detuning_hz, dtype=float) / np.asarray(linewidth_hz, dtype=float)
    return _out(resonant_cross_section(wavelength_m) / (1 + 4 * d ** 2 + np.asarray(s, dtype=float)))


def plane_matrix(sizes, axes, basis):
    """The 2x2 matrix E = B^T R diag(sizes^2) R^T B of an ellipsoid (semi-axes `sizes` along the columns of
    `axes`, R) seen along the normal of the plane spanned by the rows of `basis` (B^T, 2x3). For rms widths E
    is the covariance of the projected Gaussian; for Thomas-Fermi radii the projected (shadow) ellipse is
    rho^T E^-1 rho = 1, and sqrt(E_ii) the half-extent along basis vector i."""
    r = np.eye(3) if axes is None else np.asarray(axes, dtype=float)
    b = np.asarray(basis, dtype=float)
    m = r @ np.diag(np.asarray(sizes, dtype=float) ** 2) @ r.T
    return b @ m @ b.T


def _quad(matrix, x, y):
    inv = np.linalg.inv(np.asarray(matrix, dtype=float))
    x, y = np.asarray(x, dtype=float), np.asarray(y, dtype=float)
    return inv[0, 0] * x * x + 2 * inv[0, 1] * x * y + inv[1, 1] * y * y


def gaussian_column_density(atoms, cov, x, y):
    """Column density (1/m^2) of N atoms in a Gaussian cloud whose projected covariance is `cov` (2x2, m^2),
    at plane offsets x, y (m) from its centre: N / (2 pi sqrt(det cov)) exp(-rho^T cov^-1 rho / 2)."""
    det = float(np.linalg.det(cov))
    return _out(atoms / (2 * np.pi * np.sqrt(det)) * np.exp(-0.5 * _quad(cov, x, y)))


def thomas_fermi_column_density(atoms, shadow, x, y):
    """Column density (1/m^2) of N atoms in a Thomas-Fermi profile n = n0 (1 - sum r_i^2/R_i^2) seen along a
    line of sight, `shadow` the 2x2 matrix E of its projected ellipse (`plane_matrix` of the radii):
    n(rho) = 5 N / (2 pi sqrt(det E)) (1 - rho^T E^-1 rho)^(3/2) inside the ellipse, 0 outside; for axes
    along the plane, 5 N / (2 pi Rx Ry) (1 - x^2/Rx^2 - y^2/Ry^2)^(3/2)."""
    det = float(np.linalg.det(shadow))
    inside = np.clip(1 - _quad(shadow, x, y), 0.0, None)
    return _out(5 * atoms / (2 * np.pi * np.sqrt(det)) * inside ** 1.5)


def _lambertw_exp(x):
    """W(e^x), principal branch, without overflowing e^x: scipy's lambertw where e^x is finite, else the
    asymptotic series x - ln x + ln x / x (its error below 1e-5 beyond x = 600)."""
    from scipy.special import lambertw

    x = np.asarray(x, dtype=float)
    small = x < 600
    out = np.empty_like(x)
    out[small] = lambertw(np.exp(x[small])).real
    big = x[~small]
    lx = np.log(big)
    out[~small] = big - lx + lx / big
    return out


def transmitted_saturation(od0, s_in, detuning_linewidths=0.0, alpha=1.0):
    """Saturation parameter I/I_sat of the probe after the cloud, for a resonant optical depth od0 =
    sigma0 x column density, incoming saturation s_in, detuning delta/Gamma and alpha (I_sat_eff / I_sat).

    dI/dz = -n sigma0 I / (a + I/I_sat) with a = alpha (1 + 4 delta^2/Gamma^2) integrates to
    a ln(s_out/s_in) + s_out - s_in = -od0, so s_out = a W((s_in/a) exp((s_in - od0)/a)) (W: Lambert's
    function; Opt. Lett. 32, 3143 (2007) at delta = 0)."""
    od0, s_in = np.broadcast_arrays(np.asarray(od0, dtype=float), np.asarray(s_in, dtype=float))
    a = alpha * (1 + 4 * np.asarray(detuning_linewidths, dtype=float) ** 2)
    out = np.zeros(od0.shape)
    lit = s_in > 0
    if np.any(lit):
        a_b = np.broadcast_to(a, od0.shape)[lit]
        x = np.log(s_in[lit] / a_b) + (s_in[lit] - od0[lit]) / a_b
        out[lit] = a_b * _lambertw_exp(x)
    return _out(out)


def measured_od(od0, s_in, detuning_linewidths=0.0, alpha=1.0):
    """The optical depth a camera records, -ln(I_out/I_in), of a cloud of resonant optical depth od0 under a
    probe of saturation s_in (see `transmitted_saturation`); in the weak-probe limit od0 / (alpha (1 + 4
    delta^2/Gamma^2)). With s_in = 0 the weak-probe limit itself."""
    od0 = np.asarray(od0, dtype=float)
    s_in = np.asarray(s_in, dtype=float)
    a = alpha * (1 + 4 * np.asarray(detuning_linewidths, dtype=float) ** 2)
    weak = od0 / a
    if not np.any(s_in > 0):
        return _out(np.broadcast_to(weak, np.broadcast(od0, s_in).shape))
    s_out = np.asarray(transmitted_saturation(od0, s_in, detuning_linewidths, alpha))
    with np.errstate(divide="ignore", invalid="ignore"):
        od = np.where(np.broadcast_to(s_in, s_out.shape) > 0,
                      np.log(np.broadcast_to(s_in, s_out.shape) / np.maximum(s_out, 1e-300)),
                      np.broadcast_to(weak, s_out.shape))
    return _out(od)


def saturation_corrected_od(od_meas, s_in, alpha=1.0):
    """The resonant optical depth sigma0 x column density from a recorded one (Opt. Lett. 32, 3143 (2007)):
    OD_true = alpha OD_meas + (1 - exp(-OD_meas)) I_in / I_sat."""
    od = np.asarray(od_meas, dtype=float)
    return _out(alpha * od + (1 - np.exp(-od)) * np.asarray(s_in, dtype=float))


def rayleigh_radius(wavelength_m, na):
    """Radius of the first dark ring of the Airy pattern, 0.61 lambda / NA (m)."""
    return _out(RAYLEIGH * np.asarray(wavelength_m, dtype=float) / np.asarray(na, dtype=float))


def gaussian_psf_sigma(wavelength_m, na):
    """rms width (m, per axis) of the Gaussian that stands in for the Airy pattern: 0.21 lambda / NA."""
    return _out(AIRY_GAUSSIAN * np.asarray(wavelength_m, dtype=float) / np.asarray(na, dtype=float))


def numerical_aperture(aperture_radius_m, distance_m):
    """NA = sin(atan(r / d)) of a circular aperture of radius r at distance d from the object (in vacuum)."""
    r, d = np.asarray(aperture_radius_m, dtype=float), np.asarray(distance_m, dtype=float)
    return _out(r / np.hypot(r, d))


def blur(field, sigma_samples):
    """`field` (2D) convolved with a normalised Gaussian of rms width `sigma_samples` (in samples) along both
    axes, out to PSF_TRUNCATE widths; zero beyond the edges. The sum is kept while the signal stays that far
    from the edges (leave that margin)."""
    from scipy.ndimage import gaussian_filter

    a = np.asarray(field, dtype=float)
    if sigma_samples <= 0:
        return a.copy()
    return gaussian_filter(a, sigma_samples, mode="constant", cval=0.0, truncate=PSF_TRUNCATE)


def bin_pixels(field, k: int):
    """Sum k x k blocks of a 2D array whose sides are multiples of k (fine samples into camera pixels)."""
    a = np.asarray(field, dtype=float)
    ny, nx = a.shape
    if ny % k or nx % k:
        raise ValueError(f"array of {ny} x {nx} samples does not split into {k} x {k} blocks")
    return a.reshape(ny // k, k, nx // k, k).sum(axis=(1, 3))


def photons(intensity_w_m2, area_m2, duration_s, wavelength_m, quantum_efficiency=1.0):
    """Photo-electrons counted from light of intensity I on an area A (at the atoms) for a time tau:
    QE I A tau / (h c / lambda)."""
    energy = sc.h * sc.c / np.asarray(wavelength_m, dtype=float)
    return _out(quantum_efficiency * np.asarray(intensity_w_m2, dtype=float) * area_m2 * duration_s / energy)


def noisy_od(transmission, counts_reference, rng):
    """The optical depth -ln(C_atoms / C_ref) from Poisson counts: C_ref of mean `counts_reference` (the probe
    alone) and C_atoms of mean counts_reference x transmission (the probe after the atoms), drawn from the
    numpy Generator `rng`. A pixel that counts nothing is given one count (no infinite OD). For large counts
    the variance of the OD is (1/T + 1) / N_ref."""
    t = np.asarray(transmission, dtype=float)
    n = np.broadcast_to(np.asarray(counts_reference, dtype=float), t.shape)
    with_atoms = np.maximum(rng.poisson(n * t), 1)
    reference = np.maximum(rng.poisson(n), 1)
    return np.log(reference / with_atoms)
