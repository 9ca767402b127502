"""Two-level driving checked against closed forms (Rabi, Landau-Zener, Fourier
transforms), an independent ODE integration of the Bloch equations, and the
far-detuned light-shift formula."""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate, optimize, special

from seqgen.physics import drive as d

TWO_PI = 2 * np.pi


def bloch_rhs(rabi, detuning):
    # undamped Bloch equations dR/dt = W x R, W = (Omega, 0, -Delta) (Phys. Rev. 70, 460 (1946))
    return lambda t, r: np.cross([rabi(t), 0.0, -detuning(t)], r)


def ode_final(rabi, detuning, t0, t1, r0=(0, 0, -1)):
    sol = integrate.solve_ivp(bloch_rhs(rabi, detuning), (t0, t1), r0, method="DOP853", rtol=1e-12, atol=1e-13)
    return sol.y[:, -1]


# ---------------------------------------------------------------- square pulses: Rabi formula

def test_square_pulse_matches_rabi_formula_over_detuning_grid():
    # P = Omega^2/(Omega^2+Delta^2) sin^2(sqrt(Omega^2+Delta^2) t/2) (Phys. Rev. 51, 652 (1937)), written out here
    om = TWO_PI * 10e3
    for delta in np.linspace(-10, 10, 41) * om:
        for t in (3e-6, 50e-6, 0.77e-3):
            w = np.hypot(om, delta)
            expected = om**2 / w**2 * np.sin(w * t / 2) ** 2
            assert d.bloch_propagate(om, delta, 0.0, t).excited_population == pytest.approx(expected, abs=1e-9)
            assert d.rabi_transfer(om, delta, t) == pytest.approx(expected, abs=1e-12)
            # the same pulse cut into 1000 pieces, and given as callables (Magnus path)
            pieces = d.bloch_propagate(np.full(1000, om), np.full(1000, delta), 0.0, t)
            assert pieces.excited_population == pytest.approx(expected, abs=1e-9)
    fn = d.bloch_propagate(lambda t: om + 0 * t, lambda t: 0.3 * om + 0 * t, 0.0, 50e-6)
    w = np.hypot(om, 0.3 * om)
    assert fn.excited_population == pytest.approx(om**2 / w**2 * np.sin(w * 50e-6 / 2) ** 2, abs=1e-9)


def test_rabi_transfer_edge_cases():
    assert d.rabi_transfer(0.0, 0.0, 1.0) == 0.0
    t = np.linspace(0, 1e-3, 5)
    assert np.allclose(d.rabi_transfer(TWO_PI * 1e3, 0.0, t), np.sin(np.pi * 1e3 * t) ** 2, atol=1e-15)


def test_pi_and_pi_half_pulses():
    # pi/2 needs area pi/2, pi needs area pi (common practice, no source)
    om = TWO_PI * 50e3
    r = d.bloch_propagate(om, 0.0, 0.0, (np.pi / 2) / om)
    # rotation of (0,0,-1) about +x by pi/2 under dR/dt = W x R ends on +y
    assert np.allclose(r.bloch, [0, 1, 0], atol=1e-12)
    assert r.excited_population == pytest.approx(0.5, abs=1e-12)
    r = d.bloch_propagate(om, 0.0, 0.0, np.pi / om)
    assert r.excited_population == pytest.approx(1.0, abs=1e-12)
    assert d.pulse_area(om, "square", np.pi / om) == pytest.approx(np.pi, rel=1e-15)


def test_complex_rabi_sets_rotation_axis():
    om = TWO_PI * 1e3
    r = d.bloch_propagate(1j * om, 0.0, 0.0, (np.pi / 2) / om)
    # W along +y rotates (0,0,-1) to -x (dR/dt = W x R, Phys. Rev. 70, 460 (1946))
    assert np.allclose(r.bloch, [-1, 0, 0], atol=1e-12)


# ---------------------------------------------------------------- shaped pulses

@pytest.mark.parametrize("shape,opts", [("blackman", {}), ("gaussian", {"n_sigma": 3}), ("gaussian", {"sigma": 2e-6})])
def test_shaped_pulses_match_independent_ode_integration(shape, opts):
    T = 20e-6
    peak = d.rabi_for_area(np.pi, shape, T, **opts)
    rabi = lambda t: peak * d.envelope(shape, t, T, **opts)
    for delta in (0.0, 0.3 * peak, -1.7 * peak):
        res = d.bloch_propagate(rabi, delta, 0.0, T)
        ref = ode_final(rabi, lambda t: delta, 0.0, T)
        assert np.allclose(res.bloch, ref, atol=1e-9)
        if delta == 0.0:
            # area theorem: a resonant pulse of area pi inverts (Phys. Rev. 183, 457 (1969))
            assert res.excited_population == pytest.approx(1.0, abs=1e-9)


def test_chirped_pulse_against_ode():
    T = 10e-6
    peak = TWO_PI * 200e3
    rabi = lambda t: peak * d.envelope("blackman", t, T)
    det = lambda t: TWO_PI * 300e3 * (2 * t / T - 1)
    res = d.bloch_propagate(rabi, det, 0.0, T)
    assert np.allclose(res.bloch, ode_final(rabi, det, 0.0, T), atol=1e-9)
    assert res.error_estimate < 1e-10


def test_mixed_initial_state_and_amplitudes():
    om = TWO_PI * 1e3
    half = d.bloch_propagate(om, 0.0, 0.0, np.pi / om, initial=(0, 0, -0.5))
    assert np.allclose(half.bloch, [0, 0, 0.5], atol=1e-12)  # pi pulse flips a partly mixed state
    amp = d.bloch_propagate(om, 0.0, 0.0, np.pi / om, initial=(0, 1))  # (c_e, c_g) = ground
    assert amp.excited_population == pytest.approx(1.0, abs=1e-12)


# ---------------------------------------------------------------- envelopes and areas

def test_envelopes_peak_at_one_and_vanish_outside():
    T = 1e-3
    t = np.linspace(-0.1 * T, 1.1 * T, 12001)
    table = dict(times=[0, 0.2e-3, 0.5e-3, 1e-3], values=[0, 4.0, 2.0, 0.0])
    for shape, opts in [("square", {}), ("blackman", {}), ("gaussian", {}), ("table", table)]:
        e = d.envelope(shape, t, T, **opts)
        assert np.max(e) == pytest.approx(1.0, abs=1e-6)
        assert np.all(e[(t < 0) | (t > T)] == 0)


def test_envelope_areas():
    T = 2e-3
    # Blackman window 0.42 - 0.5 cos + 0.08 cos: the cosines integrate to zero, area 0.42 T
    assert d.envelope_area("blackman", T) == pytest.approx(0.42 * T, rel=1e-12)
    # truncated Gaussian: sigma sqrt(2 pi) erf(n / sqrt 2) (closed form), and scipy quad of the formula
    for n in (2.0, 3.0, 4.5):
        sigma = T / (2 * n)
        closed = sigma * np.sqrt(2 * np.pi) * special.erf(n / np.sqrt(2))
        quad, _ = integrate.quad(lambda t: np.exp(-0.5 * ((t - T / 2) / sigma) ** 2), 0, T, epsabs=0, epsrel=1e-13)
        assert d.envelope_area("gaussian", T, n_sigma=n) == pytest.approx(closed, rel=1e-11)
        assert quad == pytest.approx(closed, rel=1e-11)
    # piecewise-linear table: trapezoid rule on its own nodes is exact
    times, values = np.array([0, 0.3e-3, 1.1e-3, 2e-3]), np.array([0.5, 2.0, 1.0, 0.0])
    assert d.envelope_area("table", T, times=times, values=values) == pytest.approx(
        np.trapezoid(values / 2.0, times), rel=1e-12)
    assert d.pulse_area(TWO_PI * 1e3, "blackman", T) == pytest.approx(TWO_PI * 1e3 * 0.42 * T, rel=1e-12)


def test_envelope_rejects_bad_options():
    with pytest.raises(ValueError):
        d.envelope("gaussian", 0.0, 1.0, sigma=0.1, n_sigma=3)
    with pytest.raises(ValueError):
        d.envelope("sawtooth", 0.0, 1.0)
    with pytest.raises(ValueError):
        d.envelope("table", 0.0, 1.0, times=[0, 0.5, 0.4], values=[0, 1, 0])


# ---------------------------------------------------------------- Landau-Zener

def test_landau_zener_tapered_sweep_matches_formula():
    # Proc. R. Soc. A 137, 696 (1932): P_stay = exp(-pi Omega^2 / (2 |alpha|)) for a sweep from
    # -inf to +inf. Switching the coupling on and off smoothly far from resonance (|Delta| >> Omega)
    # removes the finite-sweep oscillation, so a short sweep suffices.
    om, span = 1.0, 200.0
    for alpha in (1.0, 2.27, 6.0):
        def rabi(t):
            a = np.abs(t)
            return om * np.where(a < span / 2, 1.0, np.cos(0.5 * np.pi * (a - span / 2) / (span / 2)) ** 2)
        res = d.bloch_propagate(rabi, lambda t: alpha * t, -span, span, tol=1e-8)
        assert res.ground_population == pytest.approx(np.exp(-np.pi * om**2 / (2 * alpha)), abs=1e-6)
        assert d.landau_zener_probability(om, alpha) == pytest.approx(np.exp(-np.pi / (2 * alpha)), rel=1e-14)


def test_landau_zener_long_constant_coupling_sweep_converges():
    # constant coupling from -T to T: finite-time correction to P_stay of order
    # 2 Omega/(alpha T) (estimate derived here, not from a source)
    om, alpha = 1.0, 2.27
    errors = []
    for span in (100.0, 500.0):
        res = d.bloch_propagate(om, lambda t: alpha * t, -span, span, tol=1e-8)
        err = abs(res.ground_population - d.landau_zener_probability(om, alpha))
        assert err < 2 * om / (alpha * span)
        errors.append(err)
    assert errors[-1] < 1e-3


def test_landau_zener_limits():
    assert d.landau_zener_probability(1.0, 0.0) == 0.0  # infinitely slow: adiabatic
    assert d.landau_zener_probability(1.0, 1e12) == pytest.approx(1.0, abs=1e-11)  # sudden: stays


# ---------------------------------------------------------------- Ramsey

def test_ramsey_phase_and_fringe_from_bloch_propagation():
    om = TWO_PI * 100e3
    tau = (np.pi / 2) / om
    T = 1e-3
    for df in (0.0, 130.0, 377.0, -250.0):
        assert d.ramsey_phase(df, T) == pytest.approx(TWO_PI * df * T, rel=1e-15)
        res = d.bloch_propagate([om, 0.0, om], TWO_PI * df, 0.0, T + 2 * tau, edges=[0, tau, tau + T, T + 2 * tau])
        # finite square pulses act as if T were T + 4 tau/pi (Phys. Rev. 78, 695 (1950)) (from memory);
        # residual of order (delta tau)^2
        assert d.ramsey_fringe(df, T, pi2_duration_s=tau) == pytest.approx(res.excited_population, abs=1e-7)
        # ideal-pulse fringe differs by the phase 2 pi delta (4 tau/pi) only
        assert abs(d.ramsey_fringe(df, T) - res.excited_population) <= np.pi * abs(df) * 4 * tau / np.pi + 1e-12


def test_field_noise_phase_sensitivity_clock_line():
    # Rb-87 clock line: nu = nu0 + K B^2, K = 575.15 Hz/G^2 ("Rubidium 87 D Line Data" compilation): at 1 G, d nu/dB = 1150.3 Hz/G
    dnu_db = 2 * 575.15 * 1e-4 / 1e-8  # Hz/T at B = 1e-4 T
    sens = d.field_noise_phase_sensitivity(dnu_db, 10e-3)
    assert sens * 1e-4 == pytest.approx(TWO_PI * 1150.3 * 10e-3, rel=1e-5)  # rad per gauss


# ---------------------------------------------------------------- spectral width

def test_fourier_width_square_pulse():
    # |F|^2 ~ sinc^2(f T): half power at sinc^2(x) = 1/2 (closed form transform)
    x = optimize.brentq(lambda x: np.sinc(x) ** 2 - 0.5, 0.1, 0.9, xtol=1e-15)
    for T in (1e-6, 3e-3):
        assert d.fourier_width_hz("square", T) == pytest.approx(2 * x / T, rel=1e-9)


def test_fourier_width_gaussian_and_triangle():
    T = 1e-3
    sigma = T / 16  # truncation at 8 sigma: negligible
    # Gaussian transform: |F|^2 ~ exp(-4 pi^2 sigma^2 f^2) -> FWHM = sqrt(ln 2) / (pi sigma)
    assert d.fourier_width_hz("gaussian", T, sigma=sigma) == pytest.approx(np.sqrt(np.log(2)) / (np.pi * sigma), rel=1e-9)
    # triangle of full width T: F ~ sinc^2(f T / 2), half power at sinc^4(x) = 1/2, f = 2 x / T
    x = optimize.brentq(lambda x: np.sinc(x) ** 4 - 0.5, 0.1, 0.9, xtol=1e-15)
    width = d.fourier_width_hz("table", T, times=[0, T / 2, T], values=[0, 1, 0])
    assert width == pytest.approx(2 * (2 * x / T), rel=1e-8)


def test_fourier_width_blackman_against_fft():
    # independent numerical method: zero-padded FFT of a densely sampled window
    T, n, pad = 1.0, 4000, 64
    t = (np.arange(n) + 0.5) / n * T
    spec = np.abs(np.fft.rfft(d.envelope("blackman", t, T), n * pad)) ** 2
    spec /= spec[0]
    f = np.arange(spec.size) / (pad * T)
    j = int(np.argmax(spec < 0.5))
    fft_width = 2 * np.interp(0.5, [spec[j], spec[j - 1]], [f[j], f[j - 1]])
    assert d.fourier_width_hz("blackman", T) == pytest.approx(fft_width, rel=1e-4)
    assert d.fourier_width_hz("blackman", 1e-3) == pytest.approx(fft_width / 1e-3, rel=1e-4)


# ---------------------------------------------------------------- modulated-beam Raman drive

# Rb-87 line data from the "Rubidium 87 D Line Data" compilation; ground hyperfine splitting
# Europhys. Lett. 45, 558 (1999) (from memory)
RB = dict(nuclear_spin=1.5, hyperfine_splitting_hz=6_834_682_610.904, d1_wavelength_m=794.978851156e-9,
          d2_wavelength_m=780.241209686e-9, d1_linewidth_hz=5.7500e6, d2_linewidth_hz=6.0666e6)


def vector_shift_per_intensity(lam):
    # P g_F m_F coefficient of the multi-level light shift (Adv. At. Mol. Opt. Phys. 42, 95 (2000)),
    # per line: pi c^2 Gamma_i / (2 omega_i^3 Delta_i) with +1 for D2 and -1 for D1
    c = sc.c
    w = TWO_PI * c / lam
    out = 0.0
    for lam_i, gam_hz, sign in ((RB["d2_wavelength_m"], RB["d2_linewidth_hz"], 1), (RB["d1_wavelength_m"], RB["d1_linewidth_hz"], -1)):
        wi = TWO_PI * c / lam_i
        out += sign * np.pi * c**2 * TWO_PI * gam_hz / (2 * wi**3 * (w - wi))
    return out


def jz_hyperfine_element(i, m):
    """<I+1/2, m| J_z |I-1/2, m> from explicit angular-momentum matrices: the two
    states are the eigenvectors of I.J in the (m_J, m_I) = (+1/2, m-1/2), (-1/2, m+1/2) block."""
    mi_a = m - 0.5
    ij = np.array([[0.5 * mi_a, 0.5 * np.sqrt(i * (i + 1) - mi_a * (mi_a + 1))],
                   [0.5 * np.sqrt(i * (i + 1) - mi_a * (mi_a + 1)), -0.5 * (m + 0.5)]])
    _, vec = np.linalg.eigh(ij)
    jz = np.diag([0.5, -0.5])
    return abs(vec[:, 1] @ jz @ vec[:, 0])


def test_modulated_beam_rabi_from_vector_light_shift():
    i_peak, eps = 5e6, 0.6
    i_osc = i_peak * eps / (1 + eps)
    for lam in (785e-9, 800e-9, 1064e-9):
        for m in (-1.0, 0.0, 1.0):
            res = d.two_photon_rabi_from_modulated_beam(i_peak, eps, lam, m_f=m, polarization=1.0, **RB)
            # hbar Omega = |2 U_v <2,m|J_z|1,m>| I_osc
            expected = 2 * abs(vector_shift_per_intensity(lam)) * jz_hyperfine_element(1.5, m) * i_osc / sc.hbar
            assert res.rabi_rad_s == pytest.approx(expected, rel=1e-9)
    # Clebsch-Gordan value for m = 0: 1/2 (Rb-87, I = 3/2)
    assert jz_hyperfine_element(1.5, 0.0) == pytest.approx(0.5, abs=1e-12)


def test_modulated_beam_linear_polarisation_and_scaling():
    assert d.two_photon_rabi_from_modulated_beam(1e7, 1.0, 1064e-9, polarization=0.0, **RB).rabi_rad_s == 0.0
    # far detuned: coupling ~ fine-structure splitting / Delta^2 (D1 and D2 amplitudes nearly cancel)
    c = sc.c
    w2 = TWO_PI * c / RB["d2_wavelength_m"]
    lam_a, lam_b = 2.0e-6, 4.0e-6
    ra = d.two_photon_rabi_from_modulated_beam(1e7, 1.0, lam_a, **RB).rabi_rad_s
    rb = d.two_photon_rabi_from_modulated_beam(1e7, 1.0, lam_b, **RB).rabi_rad_s
    da, db = TWO_PI * c / lam_a - w2, TWO_PI * c / lam_b - w2
    assert ra / rb == pytest.approx((db / da) ** 2, rel=0.05)


def test_modulated_beam_differential_light_shift_is_u_times_hfs_over_detuning():
    # scalar shift U_F = (pi c^2/2) I [2 Gamma_2/(w2^3 (D2 + e_F)) + Gamma_1/(w1^3 (D1 + e_F))]
    # (Adv. At. Mol. Opt. Phys. 42, 95 (2000)); to first order in the hyperfine splitting
    # U_up - U_low = -w_hfs (pi c^2/2) I [2 Gamma_2/(w2^3 D2^2) + Gamma_1/(w1^3 D1^2)]
    c = sc.c
    i_peak, eps, lam = 1e7, 1.0, 1064e-9
    i_mean = i_peak / (1 + eps)
    w = TWO_PI * c / lam
    w1, w2 = TWO_PI * c / RB["d1_wavelength_m"], TWO_PI * c / RB["d2_wavelength_m"]
    g1, g2 = TWO_PI * RB["d1_linewidth_hz"], TWO_PI * RB["d2_linewidth_hz"]
    w_hfs = TWO_PI * RB["hyperfine_splitting_hz"]
    first_order = -w_hfs * 0.5 * np.pi * c**2 * i_mean * (2 * g2 / (w2**3 * (w - w2) ** 2) + g1 / (w1**3 * (w - w1) ** 2))
    res = d.two_photon_rabi_from_modulated_beam(i_peak, eps, lam, m_f=0.0, **RB)
    assert res.differential_light_shift_j == pytest.approx(first_order, rel=1e-3)  # next order ~ w_hfs/Delta ~ 1e-4
    assert res.differential_light_shift_hz == pytest.approx(res.differential_light_shift_j / sc.h, rel=1e-12)
    # order of magnitude U * nu_hfs / Delta
    u = res.mean_light_shift_j
    assert abs(res.differential_light_shift_j) == pytest.approx(abs(u) * w_hfs / abs(w - w2), rel=0.1)


def test_modulated_beam_input_checks():
    with pytest.raises(ValueError):
        d.two_photon_rabi_from_modulated_beam(1e7, 1.5, 1064e-9, **RB)
    with pytest.raises(ValueError):
        d.two_photon_rabi_from_modulated_beam(1e7, 0.5, 1064e-9, m_f=2.0, **RB)  # only in F = 2
