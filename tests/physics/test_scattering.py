"""Tests of seqgen.physics.scattering against closed forms and independent numerics.

Conventions checked here (stated in the module docstring): for x > barrier the
wave is t exp(ikx) with absolute x; the spinor Hamiltonian is
H_spin = (hbar/2) Omega_vec.sigma with Omega_vec = (Omega, 0, (V_up - V_down)/hbar - delta),
the precession angle is right-handed about the chosen axis, and the alignment
angle is the tilt towards -axis (the low-energy direction).
"""

import numpy as np
import pytest
from scipy.constants import hbar, k as k_B, u
from scipy.integrate import quad, solve_ivp
from scipy.optimize import brentq

from seqgen.physics import scattering as sc

# Rb-87 mass, AME2020 (Chinese Physics C 45, 030003 (2021)) (from memory).
M_RB87 = 86.909180531 * u

A = 1.0e-6                                   # barrier width, m
E_UNIT = hbar**2 / (2 * M_RB87 * A**2)       # energy with k a = 1
V0 = 25.0 * E_UNIT                           # kappa a = 5 at E = 0
UNITARITY = 1e-10


# --------------------------------------------------------------------------
# Textbook closed forms, written here independently of the module
# --------------------------------------------------------------------------

def rect_T_textbook(E, V0, a, m):
    """Rectangular barrier (Quantum Mechanics: Non-relativistic Theory, Course of Theoretical Physics vol. 3,
    section 25, problem 2 (from memory); derived by matching plane waves at both edges):
    T = [1 + V0^2 sinh^2(kappa a) / (4E(V0-E))]^-1 below, with sin^2(q a) and E - V0 above."""
    E = np.asarray(E, dtype=float)
    below = E < V0
    kap = np.sqrt(2 * m * np.abs(V0 - E)) / hbar
    T_below = 1 / (1 + V0**2 * np.sinh(kap * a) ** 2 / (4 * E * np.abs(V0 - E)))
    T_above = 1 / (1 + V0**2 * np.sin(kap * a) ** 2 / (4 * E * np.abs(E - V0)))
    return np.where(below, T_below, T_above)


def rect_t_and_dlnt_textbook(E, V0, a, m):
    """Complex amplitude of the barrier on [0, a], t = e^{-ika} / D, and d(ln t)/dV0.

    Below: D = cosh(kappa a) + i beta sinh(kappa a), beta = (kappa^2 - k^2)/(2 k kappa),
    d kappa/dV0 = m/(hbar^2 kappa), d beta/d kappa = (kappa^2 + k^2)/(2 k kappa^2).
    Above: D = cos(q a) - i gamma sin(q a), gamma = (q^2 + k^2)/(2 k q),
    dq/dV0 = -m/(hbar^2 q), d gamma/dq = (q^2 - k^2)/(2 k q^2).
    (the plane-wave matching solution above; the derivatives are elementary calculus)
    """
    E = float(E)
    k = np.sqrt(2 * m * E) / hbar
    if E < V0:
        K = np.sqrt(2 * m * (V0 - E)) / hbar
        beta = (K**2 - k**2) / (2 * k * K)
        D = np.cosh(K * a) + 1j * beta * np.sinh(K * a)
        dD = a * np.sinh(K * a) + 1j * ((K**2 + k**2) / (2 * k * K**2) * np.sinh(K * a)
                                         + beta * a * np.cosh(K * a))
        dvar = m / (hbar**2 * K)
    else:
        q = np.sqrt(2 * m * (E - V0)) / hbar
        gam = (q**2 + k**2) / (2 * k * q)
        D = np.cos(q * a) - 1j * gam * np.sin(q * a)
        dD = -a * np.sin(q * a) - 1j * ((q**2 - k**2) / (2 * k * q**2) * np.sin(q * a)
                                         + gam * a * np.cos(q * a))
        dvar = -m / (hbar**2 * q)
    t = np.exp(-1j * k * a) / D
    return t, -dD * dvar / D


def pt_T_textbook(E, V0, a, m):
    """Poeschl-Teller V0/cosh^2(x/a) (Quantum Mechanics: Non-relativistic Theory,
    Course of Theoretical Physics vol. 3, section 25, problem 4):
    T = sinh^2(pi k a) / [sinh^2(pi k a) + cosh^2((pi/2) sqrt(8 m V0 a^2/hbar^2 - 1))]."""
    k = np.sqrt(2 * m * np.asarray(E)) / hbar
    g = 8 * m * V0 * a**2 / hbar**2 - 1
    ch2 = np.cosh(np.pi / 2 * np.sqrt(g)) ** 2 if g >= 0 else np.cos(np.pi / 2 * np.sqrt(-g)) ** 2
    sh2 = np.sinh(np.pi * k * a) ** 2
    return sh2 / (sh2 + ch2)


# --------------------------------------------------------------------------
# Scalar: rectangular barrier
# --------------------------------------------------------------------------

E_RECT = np.concatenate([np.linspace(0.02, 0.98, 25), np.linspace(1.02, 4.0, 25)]) * V0


@pytest.mark.parametrize("n_cells", [1, 13, 1000])
def test_rectangular_barrier_matches_closed_form(n_cells):
    # Piecewise-constant cells are exact for a rectangle, so only rounding remains;
    # 1e-6 relative below and above the barrier (textbook T, cited above).
    res = sc.transmission(np.linspace(0.0, A, n_cells + 1), V0, E_RECT, M_RB87)
    T_ref = rect_T_textbook(E_RECT, V0, A, M_RB87)
    np.testing.assert_allclose(res.T, T_ref, rtol=1e-6)
    assert np.all(res.unitarity_error < UNITARITY)
    # Complex amplitude (phase included) against the textbook t = e^{-ika}/D.
    t_ref = np.array([rect_t_and_dlnt_textbook(e, V0, A, M_RB87)[0] for e in E_RECT])
    np.testing.assert_allclose(res.t, t_ref, rtol=1e-6)


def test_rectangular_closed_form_helpers_match_textbook():
    # The module helpers use the entire-function form; textbook sinh/sin forms above.
    np.testing.assert_allclose(sc.rectangular_barrier_transmission_exact(E_RECT, V0, A, M_RB87),
                               rect_T_textbook(E_RECT, V0, A, M_RB87), rtol=1e-12)
    t_ref = np.array([rect_t_and_dlnt_textbook(e, V0, A, M_RB87)[0] for e in E_RECT])
    np.testing.assert_allclose(sc.rectangular_barrier_amplitude_exact(E_RECT, V0, A, M_RB87),
                               t_ref, rtol=1e-12)


def test_energy_equal_to_barrier_height_is_stable():
    # Limit E -> V0 of the textbook formula: T = [1 + m V0 a^2 / (2 hbar^2)]^-1.
    T_lim = 1 / (1 + M_RB87 * V0 * A**2 / (2 * hbar**2))
    res = sc.transmission(np.linspace(0.0, A, 8), V0, np.array([V0]), M_RB87)
    np.testing.assert_allclose(res.T, T_lim, rtol=1e-10)
    # Continuity across E = V0 against the textbook form just beside it.
    E = V0 * (1 + np.array([-1e-9, 1e-9]))
    np.testing.assert_allclose(sc.transmission(np.linspace(0.0, A, 8), V0, E, M_RB87).T,
                               rect_T_textbook(E, V0, A, M_RB87), rtol=1e-7)


def test_potential_step_with_different_asymptotes():
    # Step up by Vs: T = 4 k1 k2 / (k1 + k2)^2, R = ((k1 - k2)/(k1 + k2))^2 (Course of Theoretical Physics vol. 3,
    # section 25, problem 1 (from memory); continuity of psi and psi' at the step).
    Vs = 0.6 * V0
    E = np.linspace(1.05, 5.0, 9) * Vs
    res = sc.transmission(np.array([0.0, 1e-9]), Vs, E, M_RB87, v_right=Vs)
    k1 = np.sqrt(2 * M_RB87 * E) / hbar
    k2 = np.sqrt(2 * M_RB87 * (E - Vs)) / hbar
    np.testing.assert_allclose(res.T, 4 * k1 * k2 / (k1 + k2) ** 2, rtol=1e-10)
    np.testing.assert_allclose(res.R, ((k1 - k2) / (k1 + k2)) ** 2, rtol=1e-8)
    assert np.all(res.unitarity_error < UNITARITY)


# --------------------------------------------------------------------------
# Scalar: smooth barriers
# --------------------------------------------------------------------------

def test_poeschl_teller_against_exact_with_refinement():
    a = 0.5e-6
    Vp = 3.0 * hbar**2 / (M_RB87 * a**2)           # 8 m V0 a^2 / hbar^2 = 24 > 1
    E = np.linspace(0.3, 2.0, 12) * Vp
    # Truncation at |x| = 20 a leaves 4 V0 e^-40 ~ 2e-17 V0 outside.
    res = sc.solve(lambda x: sc.poeschl_teller_potential(x, Vp, a), (-20 * a, 20 * a), E, M_RB87,
                   rtol=1e-6)
    T_ref = pt_T_textbook(E, Vp, a, M_RB87)
    assert res.converged
    # Second-order cells: the solver's own error estimate must be
    # honest (within 2x of the true error) and the result good to 1e-6.
    np.testing.assert_allclose(res.T, T_ref, rtol=1e-6)
    assert np.all(np.abs(res.T - T_ref) <= 2 * res.error_estimate + 1e-14)
    assert np.all(res.unitarity_error < UNITARITY)
    np.testing.assert_allclose(sc.poeschl_teller_transmission_exact(E, Vp, a, M_RB87), T_ref, rtol=1e-12)


def test_poeschl_teller_shallow_branch_uses_cos():
    # 8 m V0 a^2 / hbar^2 < 1: cosh -> cos of the real root (same source:
    # Course of Theoretical Physics vol. 3, section 25, problem 4).
    a = 0.5e-6
    Vp = 0.05 * hbar**2 / (M_RB87 * a**2)
    E = np.linspace(0.2, 3.0, 6) * Vp
    res = sc.solve(lambda x: sc.poeschl_teller_potential(x, Vp, a), (-20 * a, 20 * a), E, M_RB87,
                   rtol=1e-7)
    np.testing.assert_allclose(res.T, pt_T_textbook(E, Vp, a, M_RB87), rtol=1e-6)
    assert np.all(res.unitarity_error < UNITARITY)


def _ode_amplitudes(E, V, x0, x1, m):
    """Independent reference: integrate psi'' = (2m/hbar^2)(V - E) psi with scipy's DOP853
    from psi = e^{ikx} at x1 back to x0, then read t, r off the free wave at x0."""
    k = np.sqrt(2 * m * E) / hbar
    L = x1 - x0

    def rhs(s, y):                     # s = x / L, y = (psi, dpsi/ds)
        x = x0 + s * L
        f = (2 * m / hbar**2) * (V(x) - E) * L**2
        return [y[1], f * y[0]]

    y1 = np.array([np.exp(1j * k * x1), 1j * k * L * np.exp(1j * k * x1)])
    sol = solve_ivp(rhs, (1.0, 0.0), y1, method="DOP853", rtol=1e-12, atol=1e-14)
    psi, dpsi = sol.y[0, -1], sol.y[1, -1] / L
    a_in = 0.5 * (psi + dpsi / (1j * k)) * np.exp(-1j * k * x0)
    b_out = 0.5 * (psi - dpsi / (1j * k)) * np.exp(1j * k * x0)
    return 1 / a_in, b_out / a_in


def test_gaussian_sheet_against_ode_integration():
    w = 1.0e-6
    Vg = 10 * hbar**2 / (2 * M_RB87 * w**2)
    V = lambda x: sc.gaussian_sheet_potential(x, Vg, w)  # noqa: E731
    E = np.array([0.3, 0.8, 1.0, 1.3]) * Vg
    res = sc.solve(V, (-4 * w, 4 * w), E, M_RB87, rtol=1e-8)
    for i, e in enumerate(E):
        t_ref, r_ref = _ode_amplitudes(e, V, -4 * w, 4 * w, M_RB87)
        assert abs(res.t[i] - t_ref) < 1e-6 * abs(t_ref) + 1e-9
        assert abs(res.r[i] - r_ref) < 1e-6
    assert np.all(res.unitarity_error < UNITARITY)
    # Near E = V0 a smooth wide barrier transmits about half (common practice, no source).
    assert 0.3 < res.T[2] < 0.7


def test_tabulated_table_and_node_values_unitary():
    rng = np.random.default_rng(3)
    xt = np.linspace(-2e-6, 2e-6, 41)
    vt = V0 * rng.random(41)
    V = sc.tabulated_potential(xt, vt)
    E = np.linspace(0.1, 3.0, 40) * V0
    res_cells = sc.transmission(np.linspace(-2e-6, 2e-6, 801), V, E, M_RB87)
    assert np.all(res_cells.unitarity_error < UNITARITY)
    # Node values on the table's own grid: a different sampling of the same
    # table, compared with the ODE reference only loosely (coarse cells).
    res_nodes = sc.transmission(xt, vt, E, M_RB87)
    assert np.all(res_nodes.unitarity_error < UNITARITY)
    t_ref, _ = _ode_amplitudes(E[-1], V, -2e-6, 2e-6, M_RB87)
    assert abs(res_cells.T[-1] - abs(t_ref) ** 2) < 1e-3


def test_energies_below_asymptote_rejected():
    with pytest.raises(ValueError):
        sc.transmission(np.linspace(0, A, 3), V0, np.array([0.0, V0]), M_RB87)


# --------------------------------------------------------------------------
# Spinor: Larmor clock, free-flight rotation, Rabi formula
# --------------------------------------------------------------------------

SPIN_X = np.array([1.0, 1.0]) / np.sqrt(2)     # Bloch vector +x
SPIN_UP = np.array([1.0, 0.0])                  # Bloch vector +z


@pytest.mark.parametrize("e_over_v0", [0.1, 0.5, 0.9, 1.5, 3.0])
def test_larmor_clock_weak_field_matches_closed_form_derivatives(e_over_v0):
    # Phys. Rev. B 27, 6178 (1983): field along z confined to the barrier, spin in along x.
    # With H_spin = +(hbar wL/2) sigma_z, up sees V0 + hbar wL/2 and down V0 - hbar wL/2;
    # then precession (right-handed about z) = wL tau_y, tau_y = -hbar d(arg t)/dV0, and
    # alignment (tilt to -z, the low-energy side) = wL tau_z, tau_z = -hbar d(ln|t|)/dV0.
    E = e_over_v0 * V0
    wL = 1e-5 * V0 / hbar
    res = sc.spinor_transmission(np.linspace(0, A, 9), V0 + hbar * wL / 2, V0 - hbar * wL / 2,
                                 0.0, 0.0, np.array([E]), M_RB87)
    clock = sc.larmor_clock(res.t, SPIN_X, [0, 0, 1], wL)
    _, dlnt = rect_t_and_dlnt_textbook(E, V0, A, M_RB87)
    tau_y = -hbar * dlnt.imag
    tau_z = -hbar * dlnt.real
    # Corrections are O((hbar wL / V0)^2) ~ 1e-10 relative.
    np.testing.assert_allclose(clock.precession_time, tau_y, rtol=1e-6)
    np.testing.assert_allclose(clock.alignment_time, tau_z, rtol=1e-6, atol=1e-6 * abs(tau_y))
    assert np.all(res.unitarity_error < UNITARITY)


def test_larmor_derivative_of_reference_is_right():
    # Guard on the test's own analytic derivative: central difference of the textbook t.
    for E in (0.3 * V0, 2.0 * V0):
        h = 1e-6 * V0
        tp, _ = rect_t_and_dlnt_textbook(E, V0 + h, A, M_RB87)
        tm, _ = rect_t_and_dlnt_textbook(E, V0 - h, A, M_RB87)
        _, d = rect_t_and_dlnt_textbook(E, V0, A, M_RB87)
        fd = (np.log(abs(tp) / abs(tm)) + 1j * np.angle(tp / tm)) / (2 * h)
        assert abs(fd - d) < 1e-7 * abs(d)


def test_free_flight_rotation_is_pulse_area_over_velocity():
    # V = 0, coupling Omega over length L: precession angle -> Omega L / v
    # (common practice, no source); corrections O((hbar Omega / E)^2) ~ 1e-6 here.
    L = 50e-6
    for v in (5e-3, 1e-2, 2e-2):
        E = 0.5 * M_RB87 * v**2
        Om = 0.8 * 1e-2 / L                             # 0.8 rad at 1 cm/s
        res = sc.spinor_transmission(np.array([0.0, L]), 0.0, 0.0, Om, 0.0, np.array([E]), M_RB87)
        clock = sc.larmor_clock(res.t, SPIN_UP, [1, 0, 0], Om)
        np.testing.assert_allclose(clock.precession_angle, Om * L / v, rtol=1e-5)
        np.testing.assert_allclose(sc.rotation_per_rabi_frequency(clock.precession_angle, Om), L / v,
                                   rtol=1e-5)
        assert abs(clock.alignment_angle[0]) < 1e-4
        assert np.all(res.unitarity_error < UNITARITY)


def test_free_flight_rabi_formula_with_detuning():
    # Rabi formula P = Omega^2/(Omega^2 + delta^2) sin^2(sqrt(Omega^2 + delta^2) tau / 2),
    # tau = L / v (Phys. Rev. 51, 652 (1937)); kinetic corrections O(hbar Omega / E)^2.
    L, v = 80e-6, 1e-2
    E = 0.5 * M_RB87 * v**2
    tau = L / v
    Om = np.pi / tau                                  # a pi pulse on resonance
    for dl in (0.0, 0.5 * Om, -1.3 * Om):
        res = sc.spinor_transmission(np.linspace(0, L, 3), 0.0, 0.0, Om, dl, np.array([E]), M_RB87)
        P = abs(res.t[0, 1, 0]) ** 2                   # up in -> down out
        W = np.sqrt(Om**2 + dl**2)
        np.testing.assert_allclose(P, Om**2 / W**2 * np.sin(W * tau / 2) ** 2, atol=1e-5)
        assert res.unitarity_error[0] < UNITARITY
    # A pi pulse is not a weak probe; a 0.05 rad rotation is (0.1 rad threshold).
    assert not sc.is_weak_probe(np.pi)
    assert sc.is_weak_probe(0.05)


def test_gaussian_coupling_profile_area_theorem_with_refinement():
    # Pulse area in flight: angle = int Omega(x) dx / v; for Omega0 exp(-2x^2/w^2)
    # int = Omega0 w sqrt(pi/2) (Gaussian integral; free-flight rule, common practice, no source).
    w, v = 20e-6, 1e-2
    E = 0.5 * M_RB87 * v**2
    Om0 = 0.3 * v / w
    res = sc.solve_spinor(0.0, 0.0, lambda x: Om0 * np.exp(-2 * x**2 / w**2), 0.0, (-4 * w, 4 * w),
                          np.array([E]), M_RB87, rtol=1e-7)
    clock = sc.larmor_clock(res.t, SPIN_UP, [1, 0, 0], Om0)
    assert res.converged
    np.testing.assert_allclose(clock.precession_angle, Om0 * w * np.sqrt(np.pi / 2) / v, rtol=1e-5)
    # 0.38 rad exceeds the 0.1 rad weak-probe threshold (common practice, no source).
    assert not sc.is_weak_probe(clock.precession_angle)[0]
    assert np.all(res.unitarity_error < UNITARITY)


def test_spin_independent_potential_gives_no_rotation():
    w = 1e-6
    x = np.linspace(-4 * w, 4 * w, 600)
    Vg = sc.gaussian_sheet_potential(x, 10 * E_UNIT, w)
    E = np.linspace(0.2, 3.0, 15) * 10 * E_UNIT
    res = sc.spinor_transmission(x, Vg, Vg, 0.0, 0.0, E, M_RB87)
    # Bloch vector of a normalised (up, down) = (a, b): (2 Re a*b, 2 Im a*b, |a|^2 - |b|^2), i.e. <sigma_x, y, z>
    for chi, want in ((SPIN_X, (1, 0, 0)), (SPIN_UP, (0, 0, 1)), (np.array([1.0, 1j]) / np.sqrt(2), (0, 1, 0)),
                      (np.array([0.6, -0.8]), (-0.96, 0, -0.28))):
        _, bloch = sc.transmitted_spin(res.t, chi)
        np.testing.assert_allclose(bloch, np.broadcast_to(want, bloch.shape), atol=1e-12)
    assert np.max(np.abs(res.t[..., 0, 1])) < 1e-14
    assert np.all(res.unitarity_error < UNITARITY)


def test_spinor_smatrix_unitary_with_barrier_coupling_and_detuning():
    # Full 4x4 S-matrix unitarity (current conservation) with everything switched on.
    w = 1e-6
    x = np.linspace(-4 * w, 4 * w, 900)
    xm = 0.5 * (x[1:] + x[:-1])
    Vb = 8 * E_UNIT
    res = sc.spinor_transmission(
        x, sc.gaussian_sheet_potential(xm, Vb, w), sc.gaussian_sheet_potential(xm, 0.7 * Vb, w),
        sc.gaussian_sheet_potential(xm, 0.4 * Vb / hbar, w), 0.1 * Vb / hbar * np.exp(-2 * xm**2 / w**2),
        np.linspace(0.1, 3.0, 60) * Vb, M_RB87)
    assert np.all(res.unitarity_error < UNITARITY)
    # Mixing actually happens in this case (else the check is weak).
    assert np.max(np.abs(res.t[..., 1, 0])) > 1e-2


# --------------------------------------------------------------------------
# Momentum averaging and velocity spreads
# --------------------------------------------------------------------------

def test_gauss_hermite_moments_exact():
    # moments of a normal distribution (v = v0 + s z, E z^2 = 1, E z^4 = 3): E[v^2] = v0^2 + s^2, Var[v^2] = 4 v0^2 s^2 + 2 s^4,
    # E[v^4] = v0^4 + 6 v0^2 s^2 + 3 s^4.
    v0, s, m = 3e-3, 1e-3, M_RB87
    to_v2 = lambda E: 2 * E / m  # noqa: E731
    avg = sc.average_over_momentum(lambda E: (to_v2(E), to_v2(E)), v0, s, m, n_points=8)
    np.testing.assert_allclose(avg.mean_transmission, v0**2 + s**2, rtol=1e-12)
    np.testing.assert_allclose(avg.transmission_spread, np.sqrt(4 * v0**2 * s**2 + 2 * s**4), rtol=1e-10)
    Ev4 = v0**4 + 6 * v0**2 * s**2 + 3 * s**4
    np.testing.assert_allclose(avg.mean_rotation, Ev4 / (v0**2 + s**2), rtol=1e-12)


def test_momentum_average_of_barrier_against_quadrature():
    # Independent: adaptive quadrature of the textbook T(E) against the Gaussian density.
    v0 = np.sqrt(2 * 1.2 * V0 / M_RB87)
    s = 0.1 * v0

    def T_of_v(v):
        return rect_T_textbook(0.5 * M_RB87 * v**2, V0, A, M_RB87)

    def gauss(v):
        return np.exp(-((v - v0) ** 2) / (2 * s**2)) / np.sqrt(2 * np.pi * s**2)

    ref = quad(lambda v: T_of_v(v) * gauss(v), v0 - 8 * s, v0 + 8 * s, limit=200, epsabs=1e-13, epsrel=1e-12)[0]
    f = lambda E: sc.transmission(np.linspace(0, A, 2), V0, E, M_RB87)  # noqa: E731
    # T(v) oscillates (over-barrier resonances): Gauss-Hermite needs ~150 nodes for 1e-8.
    avg = sc.average_over_momentum(f, v0, s, M_RB87, n_points=150)
    np.testing.assert_allclose(avg.mean_transmission, ref, rtol=1e-8)
    assert avg.transmission_spread > 0


def test_thermal_velocity_spread_is_equipartition():
    # (1/2) m <v_x^2> = (1/2) k_B T (equipartition theorem of classical statistical mechanics); constants from
    # scipy.constants.
    T = 1e-6
    v = sc.thermal_velocity_rms(T, M_RB87)
    np.testing.assert_allclose(0.5 * M_RB87 * v**2, 0.5 * k_B * T, rtol=1e-14)


def test_condensate_width_from_thomas_fermi_fourier_transform():
    # Thomas-Fermi wavefunction sqrt(1 - r^2/R^2) ("Bose-Einstein Condensation
    # in Dilute Gases", Cambridge University Press); its axial momentum distribution is
    # n(k) = int d^2 rho |int dz psi e^{-ikz}|^2, computed here by direct quadrature
    # (z = c sin(theta), Gauss-Legendre), independent of the module's Bessel form.
    th, wth = np.polynomial.legendre.leggauss(200)
    th = th * np.pi / 2
    wth = wth * np.pi / 2
    rho, wrho = np.polynomial.legendre.leggauss(200)
    rho = 0.5 * (rho + 1)
    wrho = 0.5 * wrho
    c = np.sqrt(1 - rho**2)

    def n(k):
        F = np.sum(wth * (c[:, None] ** 2 * np.cos(th) ** 2) * np.cos(k * c[:, None] * np.sin(th)), axis=1)
        return np.sum(wrho * rho * F**2)

    hwhm = brentq(lambda k: n(k) - 0.5 * n(0.0), 0.5, 5.0)
    sigma = 2 * hwhm / (2 * np.sqrt(2 * np.log(2)))
    np.testing.assert_allclose(sc.THOMAS_FERMI_MOMENTUM_WIDTH, sigma, rtol=1e-4)
    R = 5e-6
    np.testing.assert_allclose(sc.condensate_velocity_rms(R, M_RB87), sigma * hbar / (M_RB87 * R), rtol=1e-4)
    # Order of magnitude: above the Heisenberg scale hbar / (2 m R) (common practice, no source).
    assert 1 < sc.condensate_velocity_rms(R, M_RB87) / (hbar / (2 * M_RB87 * R)) < 10
