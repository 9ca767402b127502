"""Adaptive refinement of seqgen.physics.scattering.solve / solve_spinor on potentials with jumps.

A cell straddling a jump is only first order and its error does not shrink
regularly, so comparing successive grids alone can report convergence with a
large error.  The references here are outside the module: the textbook
rectangular-barrier transmission, plane-wave matching at each step of a
multi-step barrier, scipy's ODE integrator, the Rabi formula.
"""

import numpy as np
import pytest
from scipy.constants import hbar, u
from scipy.integrate import solve_ivp

from seqgen.physics import scattering as sc
from seqgen.physics.transfer_matrix import jumps

# Rb-87 mass, AME2020 (Chinese Physics C 45, 030003 (2021)) (from memory).
M = 86.909180531 * u
A = 1.0e-6
V0 = 25.0 * hbar**2 / (2 * M * A**2)          # kappa a = 5 at E = 0
E = np.concatenate([np.linspace(0.05, 0.95, 10), np.linspace(1.05, 4.0, 10)]) * V0


def rect_T(E, V0, a, m):
    """T = [1 + V0^2 sinh^2(kappa a) / (4 E (V0 - E))]^-1 below the barrier and
    [1 + V0^2 sin^2(q a) / (4 E (E - V0))]^-1 above (D. J. Griffiths, Introduction to Quantum
    Mechanics, 2nd ed. (Pearson, 2005), problem 2.33 (from memory); E. Merzbacher, Quantum
    Mechanics, 3rd ed. (Wiley, 1998), ch. 6)."""
    kap = np.sqrt(2 * m * np.abs(V0 - E)) / hbar
    below = 1 / (1 + V0**2 * np.sinh(kap * a) ** 2 / (4 * E * np.abs(V0 - E)))
    above = 1 / (1 + V0**2 * np.sin(kap * a) ** 2 / (4 * E * np.abs(E - V0)))
    return np.where(E < V0, below, above)


def steps_T(E, edges, levels, m):
    """Multi-step barrier by plane-wave matching (Merzbacher, Quantum Mechanics, 3rd ed., ch. 6):
    psi = A_j e^{i k_j x} + B_j e^{-i k_j x} in each region, psi and psi' continuous at every edge;
    V = 0 outside.  Complex wave numbers below a step."""
    out = []
    for e in np.atleast_1d(E):
        ks = [np.sqrt(complex(2 * m * (e - v))) / hbar for v in [0.0, *levels, 0.0]]

        def W(k, x):
            return np.array([[np.exp(1j * k * x), np.exp(-1j * k * x)],
                             [1j * k * np.exp(1j * k * x), -1j * k * np.exp(-1j * k * x)]])

        coef = np.array([1.0, 0.0], dtype=complex)      # (t, 0) on the right, unnormalised
        for j in range(len(edges) - 1, -1, -1):
            coef = np.linalg.solve(W(ks[j], edges[j]), W(ks[j + 1], edges[j]) @ coef)
        out.append(1.0 / abs(coef[0]) ** 2)
    return np.array(out)


def test_textbook_formula_and_module_closed_form_agree():
    np.testing.assert_allclose(sc.rectangular_barrier_transmission_exact(E, V0, A, M), rect_T(E, V0, A, M),
                               rtol=1e-12)
    np.testing.assert_allclose(steps_T(E, [0.0, A], [V0], M), rect_T(E, V0, A, M), rtol=1e-10)


@pytest.mark.parametrize("center,x_range", [(0.5e-6, (0.0, 1.0e-6)),             # edges on the grid ends
                                            (0.0, (-2e-6, 2e-6)),                 # edges on grid points
                                            (0.1234567e-6, (-1.9629e-6, 2e-6))])  # edges on no grid
@pytest.mark.parametrize("rtol", [1e-4, 1e-7])
def test_rectangle_within_rtol_below_and_above(center, x_range, rtol):
    res = sc.solve(lambda x: sc.rectangular_potential(x, V0, A, center=center), x_range, E, M, rtol=rtol)
    assert res.converged
    np.testing.assert_allclose(res.T, rect_T(E, V0, A, M), rtol=rtol)
    assert np.all(res.error_estimate <= rtol * res.T)


def test_rectangle_edges_located_to_rounding():
    c = 0.1234567e-6
    cuts = jumps((lambda x: sc.rectangular_potential(x, V0, A, center=c),), -1.9629e-6, 2e-6, 1024)
    np.testing.assert_allclose(cuts, [c - A / 2, c + A / 2], rtol=0, atol=1e-20)


def test_random_rectangles_converged_means_within_rtol():
    # Before the fix every one of these reported converged with errors up to tens of per cent.
    rng = np.random.default_rng(7)
    rtol = 1e-4
    for _ in range(12):
        a = rng.uniform(0.05e-6, 2e-6)
        c = rng.uniform(-1e-6, 1e-6)
        v0 = rng.uniform(1, 40) * hbar**2 / (2 * M * a**2)
        e = np.array([0.3, 0.9, 1.5, 3.0]) * v0
        res = sc.solve(lambda x: sc.rectangular_potential(x, v0, a, center=c), (-3e-6, 3.1e-6), e, M,
                       rtol=rtol, max_cells=2**14)
        assert res.converged
        np.testing.assert_allclose(res.T, rect_T(e, v0, a, M), rtol=rtol)


def test_two_level_step_not_aligned_to_any_grid():
    # Step from 1.3 V0 down to 0.4 V0 at an irrational fraction of the width.
    edges = [0.0, A / np.sqrt(2), A * np.sqrt(3) / 1.5]
    levels = [1.3 * V0, 0.4 * V0]

    def V(x):
        return np.where((x > edges[0]) & (x < edges[1]), levels[0],
                        np.where((x >= edges[1]) & (x < edges[2]), levels[1], 0.0))

    e = np.linspace(0.1, 3.0, 15) * V0
    res = sc.solve(V, (-0.3e-6, 1.6e-6), e, M, rtol=1e-6)
    assert res.converged
    np.testing.assert_allclose(res.T, steps_T(e, edges, levels, M), rtol=1e-6)


def _ode_T(e, V, x0, x1, cut, m):
    """Independent reference: scipy DOP853 for psi'' = (2m/hbar^2)(V - E) psi from psi = e^{ikx}
    at x1 back to x0, restarted at the jump so the integrator never steps across it."""
    k = np.sqrt(2 * m * e) / hbar

    def rhs(x, y):
        return [y[1], (2 * m / hbar**2) * (V(x) - e) * y[0]]

    y = np.array([np.exp(1j * k * x1), 1j * k * np.exp(1j * k * x1)])
    for a, b in ((x1, cut), (cut, x0)):
        y = solve_ivp(rhs, (a, b), y, method="DOP853", rtol=1e-12, atol=1e-20,
                      first_step=1e-11).y[:, -1]
    a_in = 0.5 * (y[0] + y[1] / (1j * k)) * np.exp(-1j * k * x0)
    return 1.0 / abs(a_in) ** 2


def test_jump_on_a_smooth_barrier_against_ode():
    w = 1.0e-6
    Vg = 10 * hbar**2 / (2 * M * w**2)
    cut = 0.2718e-6

    def V(x):
        x = np.asarray(x, dtype=float)
        # left of the cut: the Gaussian sheet; right of it: raised by 0.5 Vg (evaluated per side so
        # the ODE sees the side it integrates)
        return sc.gaussian_sheet_potential(x, Vg, w) + 0.5 * Vg * (x > cut) * np.exp(-(x - cut) ** 2 / w**2)

    e = np.array([0.4, 1.0, 1.7]) * Vg
    res = sc.solve(V, (-4 * w, 4 * w), e, M, rtol=1e-5)
    assert res.converged
    ref = [_ode_T(x, V, -4 * w, 4 * w, cut, M) for x in e]
    np.testing.assert_allclose(res.T, ref, rtol=1e-5)


def test_smooth_barriers_get_no_cuts_and_converge_as_before():
    a = 0.5e-6
    Vp = 3.0 * hbar**2 / (M * a**2)
    V = lambda x: sc.poeschl_teller_potential(x, Vp, a)  # noqa: E731
    assert jumps((V,), -20 * a, 20 * a, 1024).size == 0
    assert jumps((lambda x: sc.gaussian_sheet_potential(x, Vp, a),), -4 * a, 4 * a, 1024).size == 0
    # Poeschl-Teller transmission (Quantum Mechanics: Non-relativistic Theory, Course of
    # Theoretical Physics vol. 3, section 25, problem 4), via the module's closed form that
    # test_scattering.py checks against the written-out formula.
    e = np.linspace(0.3, 2.0, 12) * Vp
    res = sc.solve(V, (-20 * a, 20 * a), e, M, rtol=1e-4)
    assert res.converged and res.n_cells < 5000      # about 4100 uniform cells, as before the fix
    np.testing.assert_allclose(res.T, sc.poeschl_teller_transmission_exact(e, Vp, a, M), rtol=1e-4)


def test_not_converged_is_reported_with_an_honest_estimate():
    a = 0.5e-6
    Vp = 3.0 * hbar**2 / (M * a**2)
    e = np.linspace(0.3, 2.0, 12) * Vp
    res = sc.solve(lambda x: sc.poeschl_teller_potential(x, Vp, a), (-20 * a, 20 * a), e, M,
                   rtol=1e-9, max_cells=1024)
    assert not res.converged
    assert 512 < res.n_cells <= 1024
    true_err = np.abs(res.T - sc.poeschl_teller_transmission_exact(e, Vp, a, M))
    assert np.all(true_err <= 2 * res.error_estimate)
    assert np.all(res.error_estimate <= 2 * true_err)
    assert np.any(true_err > 1e-9 * res.T)


def test_spinor_square_rabi_region_off_grid():
    # Rabi formula P = Omega^2/W^2 sin^2(W tau / 2), W^2 = Omega^2 + delta^2, tau = L / v
    # (Phys. Rev. 51, 652 (1937)) for a coupling switched on over [c, c + L], edges on no grid.
    # The formula ignores the kinetic side (reflection at the sudden edges, third-order terms of
    # the dressed-state wave numbers in hbar W / E ~ 1e-2): ~1e-6 here, so 1e-5 absolute; a cell
    # straddling an edge gave 5e-4 (reported converged at rtol 1e-7) before the fix.
    L, v = 37.3e-6, 1e-2
    c = -11.17e-6
    e = 0.5 * M * v**2
    tau = L / v
    Om, dl = 0.8 * np.pi / tau, 0.3 * np.pi / tau

    def on(x):
        return ((x > c) & (x < c + L)).astype(float)

    res = sc.solve_spinor(0.0, 0.0, lambda x: Om * on(x), lambda x: dl * on(x), (-40e-6, 41e-6),
                          np.array([e]), M, rtol=1e-7)
    assert res.converged
    W = np.hypot(Om, dl)
    np.testing.assert_allclose(abs(res.t[0, 1, 0]) ** 2, Om**2 / W**2 * np.sin(W * tau / 2) ** 2, atol=1e-5)
