"""Coherent two-level driving: envelopes, pulse areas, Bloch propagation, Ramsey, Landau-Zener.

Conventions (SI; angular frequencies in rad/s, times in s):
- Basis (e, g); rotating-frame Hamiltonian H = (hbar/2) W.sigma with the
  drive vector W = (Re Omega, Im Omega, -Delta), Delta = omega_drive - omega_0.
  sigma_z = |e><e| - |g><g|.
- Bloch vector R = (<sigma_x>, <sigma_y>, <sigma_z>), ground state (0, 0, -1),
  excited population (1 + R_z)/2. Without decay dR/dt = W x R (optical Bloch
  equations with no damping); a resonant pulse rotates R about x by its area.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as sc

from .zeeman import _params

__all__ = [
    "envelope",
    "envelope_area",
    "pulse_area",
    "rabi_for_area",
    "BlochResult",
    "bloch_propagate",
    "rabi_transfer",
    "landau_zener_probability",
    "ramsey_phase",
    "ramsey_fringe",
    "field_noise_phase_sensitivity",
    "fourier_width_hz",
    "ModulatedBeamDrive",
    "two_photon_rabi_from_modulated_beam",
]

ENVELOPES = ("square", "blackman", "gaussian", "table")


# --------------------------------------------------------------------------- envelopes

def _gaussian_sigma(duration, opts):
    sigma, n_sigma = opts.get("sigma"), opts.get("n_sigma")
    if sigma is not None and n_sigma is not None:
        raise ValueError("give either sigma or n_sigma for a gaussian envelope, not both")
    if sigma is None:
        sigma = duration / (2.0 * (3.0 if n_sigma is None else float(n_sigma)))
    if sigma <= 0:
        raise ValueError("gaussian sigma must be positive")
    return float(sigma)


def _table(opts):
    times = np.asarray(opts.get("times"), dtype=float)
    values = np.asarray(opts.get("values"), dtype=float)
    if times.ndim != 1 or times.shape != values.shape or times.size < 2:
        raise ValueError("table envelope needs 1-D 'times' (s from pulse start) and 'values' of equal length >= 2")
    if np.any(np.diff(times) <= 0):
        raise ValueError("table 'times' must increase strictly")
    peak = np.max(np.abs(values))
    if peak == 0:
        raise ValueError("table envelope is zero everywhere")
    return times, values / peak


def envelope(name, t, duration, **opts):
    """Pulse envelope on [0, duration], normalised to peak 1 and zero outside.

    - "square": 1.
    - "blackman": 0.42 - 0.5 cos(2 pi t/T) + 0.08 cos(4 pi t/T) (classic
      Blackman window, Proc. IEEE 66, 51 (1978)); area 0.42 T.
    - "gaussian": exp(-(t - T/2)^2 / (2 sigma^2)), hard-truncated at the window
      edges, no pedestal subtracted (edge value exp(-n^2/2)). Options
      ``sigma`` (s) or ``n_sigma`` (half-window in sigmas, default 3, i.e.
      sigma = T/6).
    - "table": linear interpolation of ``times`` (s from pulse start) and
      ``values``, scaled so max |value| = 1; edge values held to 0 and T.
    ``name`` may also be a callable f(t) (already normalised), used as is.
    """
    t = np.asarray(t, dtype=float)
    T = float(duration)
    if T <= 0:
        raise ValueError("duration must be positive")
    inside = (t >= 0) & (t <= T)
    if callable(name):
        out = np.asarray(name(t), dtype=float) * inside
    elif name == "square":
        out = inside.astype(float)
    elif name == "blackman":
        ph = 2 * np.pi * t / T
        out = (0.42 - 0.5 * np.cos(ph) + 0.08 * np.cos(2 * ph)) * inside
    elif name == "gaussian":
        sigma = _gaussian_sigma(T, opts)
        out = np.exp(-0.5 * ((t - 0.5 * T) / sigma) ** 2) * inside
    elif name == "table":
        times, values = _table(opts)
        out = np.interp(t, times, values) * inside
    else:
        raise ValueError(f"unknown envelope {name!r}; known: {', '.join(ENVELOPES)}")
    return float(out) if out.ndim == 0 else out


def _breakpoints(name, duration, opts):
    if name == "table":
        times, _ = _table(opts)
        return [x for x in times if 0 < x < duration]
    return []


def envelope_area(name, duration, **opts) -> float:
    """Integral of the envelope over [0, duration] in s (closed form for square, quadrature otherwise)."""
    from scipy import integrate

    T = float(duration)
    if name == "square":
        return T
    pts = _breakpoints(name, T, opts)
    val, _ = integrate.quad(lambda x: envelope(name, x, T, **opts), 0.0, T, points=pts or None,
                            epsabs=0.0, epsrel=1e-13, limit=500)
    return float(val)


def pulse_area(rabi_peak_rad_s, envelope_name, duration, **opts):
    """Pulse area theta = Omega_peak * integral(envelope dt) in rad (vectorised over Omega_peak).

    A resonant pulse of area pi inverts, pi/2 makes an equal superposition
    (area theorem for a two-level atom, Phys. Rev. 183, 457 (1969)).
    """
    out = np.asarray(rabi_peak_rad_s, dtype=float) * envelope_area(envelope_name, duration, **opts)
    return float(out) if out.ndim == 0 else out


def rabi_for_area(area_rad, envelope_name, duration, **opts) -> float:
    """Peak Rabi frequency (rad/s) that gives pulse area ``area_rad``."""
    return float(area_rad) / envelope_area(envelope_name, duration, **opts)


# --------------------------------------------------------------------------- propagation

_PAULI = np.array([[[0, 1], [1, 0]], [[0, -1j], [1j, 0]], [[1, 0], [0, -1]]], dtype=complex)
_CHUNK = 1 << 15


def _su2(theta):
    """exp(-i theta.sigma / 2) for rotation vectors theta of shape (n, 3) -> (n, 2, 2)."""
    a = 0.5 * np.sqrt(np.einsum("ij,ij->i", theta, theta))
    c = np.cos(a)
    # sin(a)/a via numpy's normalised sinc, safe at a = 0
    s = 0.5 * np.sinc(a / np.pi)
    u = np.empty((theta.shape[0], 2, 2), dtype=complex)
    u[:, 0, 0] = c - 1j * s * theta[:, 2]
    u[:, 1, 1] = c + 1j * s * theta[:, 2]
    u[:, 0, 1] = -1j * s * (theta[:, 0] - 1j * theta[:, 1])
    u[:, 1, 0] = -1j * s * (theta[:, 0] + 1j * theta[:, 1])
    return u


def _chain(u):
    """Time-ordered product U_n ... U_2 U_1 of (n, 2, 2) propagators, by pairwise reduction."""
    while u.shape[0] > 1:
        if u.shape[0] % 2:
            u = np.concatenate([u, np.eye(2, dtype=complex)[None]], axis=0)
        u = u[1::2] @ u[0::2]
    return u[0]


def _product_of_steps(theta_fn, n_steps):
    total = np.eye(2, dtype=complex)
    for start in range(0, n_steps, _CHUNK):
        k = np.arange(start, min(start + _CHUNK, n_steps))
        total = _chain(_su2(theta_fn(k))) @ total
    return total


def _as_fn(x):
    if callable(x):
        def fn(t, _f=x):
            t = np.asarray(t, dtype=float)
            v = np.asarray(_f(t))
            if v.shape != t.shape:  # scalar-only callable
                v = np.array([_f(tt) for tt in t.ravel()]).reshape(t.shape)
            return v
        return fn
    v = np.asarray(x)
    if v.ndim != 0:
        raise ValueError("when one of rabi_t / detuning_t is a callable the other must be a callable or a scalar")
    return lambda t, _v=v: np.broadcast_to(_v, np.shape(t))


def _drive_vectors(rabi, detuning):
    rabi = np.asarray(rabi)
    return np.stack([np.real(rabi), np.imag(rabi), -np.asarray(detuning, dtype=float)], axis=-1).reshape(-1, 3)


@dataclass(frozen=True)
class BlochResult:
    """Outcome of bloch_propagate: final Bloch vector, populations, total propagator (basis e, g)."""

    bloch: np.ndarray
    excited_population: float
    ground_population: float
    propagator: np.ndarray
    segments: int
    error_estimate: float


def _initial_density(initial):
    init = np.asarray(initial)
    if init.shape == (3,):
        r = init.astype(float)
        if np.linalg.norm(r) > 1 + 1e-12:
            raise ValueError("initial Bloch vector must have length <= 1")
        return 0.5 * (np.eye(2) + np.einsum("i,ijk->jk", r, _PAULI))
    if init.shape == (2,):
        psi = init.astype(complex)
        psi = psi / np.linalg.norm(psi)
        return np.outer(psi, psi.conj())
    raise ValueError("initial must be a Bloch vector (3,) or amplitudes (c_e, c_g)")


def _result(u, initial, segments, err):
    rho = u @ _initial_density(initial) @ u.conj().T
    r = np.real(np.einsum("ijk,kj->i", _PAULI, rho))
    return BlochResult(bloch=r, excited_population=float(0.5 * (1 + r[2])),
                       ground_population=float(0.5 * (1 - r[2])), propagator=u,
                       segments=int(segments), error_estimate=float(err))


def bloch_propagate(rabi_t, detuning_t, t0, t1, initial=(0.0, 0.0, -1.0), *, edges=None,
                    tol=1e-10, max_steps=1 << 23) -> BlochResult:
    """Propagate a driven two-level system (no decay) from t0 to t1.

    rabi_t (rad/s, complex allowed: Omega e^{i phi}) and detuning_t (rad/s) are
    each a scalar, a callable of t (s), or an array of piecewise-constant values:
    - arrays / scalars only: piecewise-constant drive on ``edges`` (default n
      equal pieces of [t0, t1]); each piece uses its exact SU(2) propagator
      exp(-i W.sigma dt/2), multiplied in time order (vectorised pairwise).
    - any callable: fourth-order Magnus integrator with two Gauss points per
      step (Phys. Rep. 470, 151 (2009)): the step exponent
      theta = h (W1 + W2)/2 + (sqrt(3)/12) h^2 (W2 x W1) is again an su(2)
      rotation, so each step is exactly unitary. The step count is doubled
      until the propagator changes by less than 15 tol (the error estimate of
      a fourth-order method under step doubling; twice in a row while steps
      still rotate by more than 1 rad); the finer result is returned.
      Callables should be smooth on [t0, t1]; put kinks or jumps at t0 / t1 or
      split the interval.
    ``initial``: Bloch vector (|R| <= 1, mixed allowed) or amplitudes (c_e, c_g).
    """
    t0, t1 = float(t0), float(t1)
    if not t1 > t0:
        raise ValueError("need t1 > t0")
    if not (callable(rabi_t) or callable(detuning_t)):
        rabi, det = np.broadcast_arrays(np.atleast_1d(rabi_t), np.atleast_1d(np.asarray(detuning_t, dtype=float)))
        n = rabi.size
        e = np.linspace(t0, t1, n + 1) if edges is None else np.asarray(edges, dtype=float)
        if e.shape != (n + 1,) or np.any(np.diff(e) < 0):
            raise ValueError("edges must be n + 1 non-decreasing times for n pieces")
        theta = _drive_vectors(rabi, det) * np.diff(e)[:, None]
        u = _product_of_steps(lambda k: theta[k], n)
        return _result(u, initial, n, 0.0)

    rabi_fn, det_fn = _as_fn(rabi_t), _as_fn(detuning_t)
    span = t1 - t0
    probe = np.linspace(t0, t1, 257)
    w_max = float(np.max(np.linalg.norm(_drive_vectors(rabi_fn(probe), det_fn(probe)), axis=1)))
    c1, c2 = 0.5 - np.sqrt(3) / 6, 0.5 + np.sqrt(3) / 6

    def step_product(n):
        h = span / n

        def theta(k):
            a = t0 + k * h
            w1 = _drive_vectors(rabi_fn(a + c1 * h), det_fn(a + c1 * h))
            w2 = _drive_vectors(rabi_fn(a + c2 * h), det_fn(a + c2 * h))
            return 0.5 * h * (w1 + w2) + (np.sqrt(3) / 12) * h * h * np.cross(w2, w1)

        return _product_of_steps(theta, n)

    # Start coarse: where the detuning dominates, long Magnus steps are already
    # accurate (the error comes from the time variation, not from |W| itself).
    n = max(8, int(np.ceil(w_max * span / 16.0)))
    u = step_product(n)
    prev_ok = False
    while True:
        if 2 * n > max_steps:
            raise RuntimeError(f"bloch_propagate did not converge to tol={tol} within {max_steps} steps")
        u2 = step_product(2 * n)
        err = float(np.max(np.abs(u2 - u))) / 15.0
        n, u = 2 * n, u2
        # with rotations > 1 rad per step the estimate may be outside its
        # asymptotic regime: then ask for two passes in a row below tol
        if err < tol and (prev_ok or w_max * span / n <= 1.0):
            return _result(u, initial, n, err)
        prev_ok = err < tol


# --------------------------------------------------------------------------- closed forms

def rabi_transfer(rabi_rad_s, detuning_rad_s, t):
    """Excited population after a square pulse from the ground state:
    P = Omega^2 / (Omega^2 + Delta^2) sin^2(sqrt(Omega^2 + Delta^2) t / 2)
    (Phys. Rev. 51, 652 (1937)). Vectorised; written as (Omega t/2)^2 sinc^2
    so that Omega = Delta = 0 is regular.
    """
    om = np.abs(np.asarray(rabi_rad_s, dtype=complex))
    de = np.asarray(detuning_rad_s, dtype=float)
    t = np.asarray(t, dtype=float)
    half = 0.5 * np.sqrt(om**2 + de**2) * t
    out = (0.5 * om * t) ** 2 * np.sinc(half / np.pi) ** 2
    return float(out) if out.ndim == 0 else out


def landau_zener_probability(rabi_rad_s, sweep_rate_rad_s2):
    """Probability to STAY in the initial diabatic (bare) state after a linear sweep
    of the detuning through resonance from -inf to +inf:
        P_diabatic = exp(-pi Omega^2 / (2 |d Delta/dt|))
    (Proc. R. Soc. A 137, 696 (1932)), with Omega the resonant Rabi frequency
    (off-diagonal coupling hbar Omega/2). The adiabatic-passage transfer
    efficiency is 1 - P_diabatic. A zero sweep rate gives 0 (fully adiabatic).
    """
    om = np.abs(np.asarray(rabi_rad_s, dtype=complex))
    rate = np.abs(np.asarray(sweep_rate_rad_s2, dtype=float))
    with np.errstate(divide="ignore"):
        out = np.exp(-np.pi * om**2 / (2 * rate))
    return float(out) if np.ndim(out) == 0 else out


def ramsey_phase(detuning_hz, free_time_s):
    """Phase (rad) accumulated between drive and atom during free evolution: phi = 2 pi delta T."""
    out = 2 * np.pi * np.asarray(detuning_hz, dtype=float) * np.asarray(free_time_s, dtype=float)
    return float(out) if np.ndim(out) == 0 else out


def ramsey_fringe(detuning_hz, free_time_s, pi2_duration_s=0.0):
    """Excited population after two resonant-phase pi/2 pulses separated by free time T:
    P = (1 + cos phi)/2, phi = 2 pi delta T_eff.
    Ideal pulses: T_eff = T. Square pulses of duration tau: T_eff = T + 4 tau / pi,
    valid for |delta| tau << 1 (finite-pulse correction of the separated-
    oscillatory-field method, Phys. Rev. 78, 695 (1950); from memory, checked
    here against exact propagation to ~1e-9).
    """
    t_eff = np.asarray(free_time_s, dtype=float) + 4.0 * np.asarray(pi2_duration_s, dtype=float) / np.pi
    out = 0.5 * (1 + np.cos(ramsey_phase(detuning_hz, t_eff)))
    return float(out) if np.ndim(out) == 0 else out


def field_noise_phase_sensitivity(dnu_dB_hz_per_t, free_time):
    """d phi / d B in rad/T for a Ramsey interrogation of duration ``free_time`` (s):
    2 pi (d nu / dB) T. For a clock line at bias B0, d nu/dB = 2 K B0 with K
    from zeeman.quadratic_zeeman_coefficient. A field error dB then gives a phase
    error (d phi/d B) dB.
    """
    out = 2 * np.pi * np.asarray(dnu_dB_hz_per_t, dtype=float) * np.asarray(free_time, dtype=float)
    return float(out) if np.ndim(out) == 0 else out


def _spectrum_nodes(name, duration, opts, panels=64, order=24):
    edges = np.unique(np.concatenate([np.linspace(0.0, duration, panels + 1), _breakpoints(name, duration, opts)]))
    x, w = np.polynomial.legendre.leggauss(order)
    a, b = edges[:-1, None], edges[1:, None]
    t = (0.5 * (b - a) * x + 0.5 * (a + b)).ravel()
    wt = (0.5 * (b - a) * w).ravel()
    return t, wt * envelope(name, t, duration, **opts)


def fourier_width_hz(envelope_name, duration, **opts) -> float:
    """FWHM (Hz) of the spectral power |F(f)|^2 of the envelope, F(f) = int env(t) e^{-2 pi i f t} dt.

    Numerical: composite Gauss-Legendre transform (exact to ~1e-12 for the
    built-in shapes), then root finding for |F(f)|^2 = |F(0)|^2 / 2; the
    envelope must be non-negative so that the maximum is at f = 0. This is
    the small-area (linear-response) excitation linewidth of the pulse.
    """
    from scipy import optimize

    T = float(duration)
    t, wf = _spectrum_nodes(envelope_name, T, opts)
    p0 = abs(np.sum(wf)) ** 2
    if p0 == 0:
        raise ValueError("envelope has zero area")

    def rel_power(f):
        f = np.atleast_1d(np.asarray(f, dtype=float))
        amp = np.exp(-2j * np.pi * f[:, None] * t[None, :]) @ wf
        return np.abs(amp) ** 2 / p0

    grid = np.linspace(0.0, 50.0 / T, 2001)
    p = rel_power(grid)
    below = np.nonzero(p < 0.5)[0]
    if below.size == 0:
        raise ValueError("spectrum wider than 50/duration; envelope too narrow for this window")
    j = below[0]
    f_half = optimize.brentq(lambda f: rel_power(f)[0] - 0.5, grid[j - 1], grid[j], xtol=1e-12 / T, rtol=1e-13)
    return float(2 * f_half)


# --------------------------------------------------------------------------- modulated-beam Raman drive

_ATOM_LINE_NAMES = ("nuclear_spin", "hyperfine_splitting_hz", "d1_wavelength_m", "d2_wavelength_m",
                    "d1_linewidth_hz", "d2_linewidth_hz")


@dataclass(frozen=True)
class ModulatedBeamDrive:
    """Effective hyperfine drive from an intensity-modulated far-detuned beam (see the function).

    rabi_rad_s: resonant Rabi frequency Omega between |I-1/2, m> and |I+1/2, m>.
    mean_light_shift_j: time-averaged light shift of the lower level (J).
    differential_light_shift_j / _hz: time-averaged shift of the upper level
    minus that of the lower one (shifts the resonance; J and Hz).
    coupling_per_intensity_j: off-diagonal light-shift element per W/m^2.
    """

    rabi_rad_s: float
    mean_light_shift_j: float
    differential_light_shift_j: float
    differential_light_shift_hz: float
    coupling_per_intensity_j: float


def _ground_shift_per_intensity(F_upper, m, wavelength_m, polarization, i, nu_hfs, lam1, lam2, g1, g2):
    """Diagonal light shift per intensity of |F, m> (J per W/m^2), far-detuned multi-level form:
    U/I = (pi c^2 / 2) [Gamma_2 (2 + P g_F m)/(omega_2^3 Delta_2F) + Gamma_1 (1 - P g_F m)/(omega_1^3 Delta_1F)]
    (Adv. At. Mol. Opt. Phys. 42, 95 (2000), multi-level alkali formula, each
    line with its own Gamma and omega), g_F m -> <2 J_z> = +/- 2m/(2I+1), and
    Delta_iF = omega - omega_i + E_F/hbar with E_F the level energy from the
    hyperfine centroid (excited hyperfine structure neglected).
    """
    c = sc.c
    omega = 2 * np.pi * c / wavelength_m
    w1, w2 = 2 * np.pi * c / lam1, 2 * np.pi * c / lam2
    G1, G2 = 2 * np.pi * g1, 2 * np.pi * g2
    s = 1.0 if F_upper else -1.0
    e_f = 2 * np.pi * nu_hfs * (i / (2 * i + 1) if F_upper else -(i + 1) / (2 * i + 1))  # E_F / hbar, rad/s
    gfm = s * 2.0 * m / (2 * i + 1)
    d1, d2 = omega - w1 + e_f, omega - w2 + e_f
    return 0.5 * np.pi * c**2 * (G2 * (2 + polarization * gfm) / (w2**3 * d2)
                                 + G1 * (1 - polarization * gfm) / (w1**3 * d1))


def two_photon_rabi_from_modulated_beam(peak_intensity_w_m2, modulation_depth, wavelength_m, *, m_f=0.0,
                                        polarization=1.0, nuclear_spin=None, hyperfine_splitting_hz=None,
                                        d1_wavelength_m=None, d2_wavelength_m=None, d1_linewidth_hz=None,
                                        d2_linewidth_hz=None, atom=None) -> ModulatedBeamDrive:
    """Rabi frequency of a hyperfine transition |I-1/2, m> <-> |I+1/2, m> driven by one
    far-detuned beam whose intensity is modulated near the hyperfine frequency.

    Model (keep its limits in mind):
    - I(t) = I_peak (1 + eps cos(omega_m t)) / (1 + eps), 0 <= eps <= 1: mean
      I_peak/(1+eps), oscillating amplitude I_peak eps/(1+eps). The two
      sidebands of the beam form a co-propagating Raman pair.
    - Far detuning: |Delta| from both D lines >> excited hyperfine structure,
      and >> nu_hfs, so F is good and the light shift acts as an operator on the
      ground manifold: scalar part (identity, no coupling) plus vector part
      U_v 2 J_z P (a fictitious field along the beam, Adv. At. Mol. Opt. Phys.
      42, 95 (2000), multi-level alkali formula with its P g_F m_F term), with
          U_v / I = (pi c^2 / 2) [Gamma_2 / (omega_2^3 Delta_2) - Gamma_1 / (omega_1^3 Delta_1)],
      Delta_i = omega - omega_i. Rotating-wave (1/Delta) terms only: valid for
      |Delta| << omega_i; counter-rotating terms are left out.
    - P = ``polarization`` in [-1, 1] is the degree of circular polarisation
      (sigma+ = +1) along the quantisation axis, assumed parallel to the beam.
      Linear light (P = 0) gives no coupling in this order (the Raman
      amplitudes through D1 and D2 cancel); Delta m = +/-1 couplings from a
      tilted axis are not included.
    - J_z couples F = I - 1/2 and I + 1/2 at equal m with
      <I+1/2, m| J_z |I-1/2, m> = sqrt((I+1/2)^2 - m^2) / (2I+1), so the
      oscillating coupling (U_v/I) I_osc 2 P <..> cos(omega_m t) gives, in the
      rotating-wave approximation (Omega << nu_hfs),
          hbar Omega = 2 |P| |U_v/I| I_osc sqrt((I+1/2)^2 - m^2) / (2I+1).
      It scales as (fine-structure splitting) / Delta^2 at large detuning.
    - Differential light shift: the time-averaged diagonal shift of the upper
      minus the lower level, from the same formula with hyperfine-resolved
      detunings; its scalar part is of order U nu_hfs / Delta, its vector part
      (m != 0 only) of order U_v. The resonance sits at nu_hfs + Zeeman + this.
    Photon scattering (decoherence) is not included; see the optical module.
    """
    i, nu, lam1, lam2, g1, g2 = _params(atom, _ATOM_LINE_NAMES, dict(
        nuclear_spin=nuclear_spin, hyperfine_splitting_hz=hyperfine_splitting_hz,
        d1_wavelength_m=d1_wavelength_m, d2_wavelength_m=d2_wavelength_m,
        d1_linewidth_hz=d1_linewidth_hz, d2_linewidth_hz=d2_linewidth_hz))
    eps = float(modulation_depth)
    if not 0 <= eps <= 1:
        raise ValueError("modulation depth must lie in [0, 1]")
    if abs(polarization) > 1:
        raise ValueError("polarization (degree of circular polarisation) must lie in [-1, 1]")
    m = float(m_f)
    if abs(m) > i - 0.5 + 1e-9:
        raise ValueError(f"m_f = {m:g} exists only in F = I + 1/2: no hyperfine partner at equal m")
    c = sc.c
    omega = 2 * np.pi * c / float(wavelength_m)
    w1, w2 = 2 * np.pi * c / lam1, 2 * np.pi * c / lam2
    uv_per_i = 0.5 * np.pi * c**2 * (2 * np.pi * g2 / (w2**3 * (omega - w2)) - 2 * np.pi * g1 / (w1**3 * (omega - w1)))
    element = np.sqrt((i + 0.5) ** 2 - m * m) / (2 * i + 1)
    coupling_per_i = 2 * polarization * uv_per_i * element
    i_peak = float(peak_intensity_w_m2)
    i_mean, i_osc = i_peak / (1 + eps), i_peak * eps / (1 + eps)
    rabi = abs(coupling_per_i) * i_osc / sc.hbar
    args = (float(wavelength_m), polarization, i, nu, lam1, lam2, g1, g2)
    u_low = _ground_shift_per_intensity(False, m, *args) * i_mean
    u_up = _ground_shift_per_intensity(True, m, *args) * i_mean
    diff = u_up - u_low
    return ModulatedBeamDrive(rabi_rad_s=float(rabi), mean_light_shift_j=float(u_low),
                              differential_light_shift_j=float(diff), differential_light_shift_hz=float(diff / sc.h),
                              coupling_per_intensity_j=float(coupling_per_i))
