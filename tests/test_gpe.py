"""The 1D two-component Gross-Pitaevskii solver (seqgen.physics.gpe) against closed forms.

Each expected value is computed here from the published formula named beside it, never from the solver."""

import math

import numpy as np
import pytest
from scipy.constants import hbar, physical_constants

from seqgen.physics import gpe

M_NA = 22.98976928 * physical_constants["atomic mass constant"][0]  # Na-23 (CODATA atomic mass unit)


def _one(grid, psi):
    """A two-component state with psi in the first component, normalised to 1."""
    out = np.zeros((2, grid.n), dtype=complex)
    out[0] = psi
    out /= math.sqrt(np.sum(np.abs(out) ** 2) * grid.dx)
    return out


def _flat(grid):
    loc = gpe.Local(np.zeros(grid.n))
    return lambda t: loc


def _moments(grid, n):
    n = n / (np.sum(n) * grid.dx)
    mean = np.sum(grid.x * n) * grid.dx
    return mean, math.sqrt(np.sum((grid.x - mean) ** 2 * n) * grid.dx)


def test_free_gaussian_spreads_as_the_closed_form():
    # sigma(t) = sigma0 sqrt(1 + (hbar t / (2 m sigma0^2))^2) for |psi|^2 of rms width sigma0
    # (a standard quantum-mechanics textbook result: free spreading of a minimum-uncertainty packet (from memory));
    # the centre moves at hbar k0 / m
    grid = gpe.make_grid(-150e-6, 250e-6, 0.2e-6)
    s0, v0 = 3e-6, 5e-3
    psi = _one(grid, np.exp(-grid.x**2 / (4 * s0**2) + 1j * M_NA * v0 / hbar * grid.x))
    dt, steps = 20e-6, 1000
    ev = gpe.evolve(psi, grid, M_NA, dt, steps, _flat(grid))
    t = dt * steps
    mean, width = _moments(grid, np.abs(ev.psi[0]) ** 2)
    assert width == pytest.approx(s0 * math.sqrt(1 + (hbar * t / (2 * M_NA * s0**2)) ** 2), rel=1e-9)
    assert mean == pytest.approx(v0 * t, rel=1e-9)


def test_harmonic_ground_state_energy_and_width():
    # E0 = hbar omega / 2, |psi|^2 Gaussian of rms width sqrt(hbar / (2 m omega)) (any QM textbook, e.g.
    # Quantum Mechanics: Non-Relativistic Theory, 3rd ed., Pergamon 1977, section 23 (from memory))
    omega = 2 * math.pi * 88.0
    grid = gpe.make_grid(-30e-6, 30e-6, 0.1e-6)
    gs = gpe.ground_state(grid, M_NA, 0.5 * M_NA * omega**2 * grid.x**2)
    assert gs.energy == pytest.approx(0.5 * hbar * omega, rel=1e-6)
    assert gs.mu == pytest.approx(0.5 * hbar * omega, rel=1e-6)
    assert _moments(grid, gs.psi**2)[1] == pytest.approx(math.sqrt(hbar / (2 * M_NA * omega)), rel=1e-4)


def test_thomas_fermi_limit_of_the_interacting_ground_state():
    # 1D Thomas-Fermi: mu = (3 g N omega sqrt(m) / (4 sqrt 2))^(2/3) (Bose-Einstein
    # Condensation in Dilute Gases, 2nd ed., Cambridge 2008, ch. 6, the 1D form of the Thomas-Fermi profile
    # n = (mu - V)/g (from memory)); corrections of order (hbar omega / mu)^2 ln(mu / hbar omega)
    omega = 2 * math.pi * 20.0
    g = gpe.g1d(2 * math.pi * 300.0, 2.75e-9) * 2e4
    grid = gpe.make_grid(-150e-6, 150e-6, 0.25e-6)
    gs = gpe.ground_state(grid, M_NA, 0.5 * M_NA * omega**2 * grid.x**2, g)
    mu_tf = (3 * g * omega * math.sqrt(M_NA) / (4 * math.sqrt(2))) ** (2 / 3)
    assert mu_tf > 30 * hbar * omega
    assert gs.mu == pytest.approx(mu_tf, rel=3e-3)


def test_g1d_is_twice_hbar_omega_perp_a():
    # Phys. Rev. Lett. 81, 938 (1998): g1D = 2 hbar omega_perp a for a << a_perp
    assert gpe.g1d(2 * math.pi * 300.0, 2.75e-9) == pytest.approx(2 * hbar * 2 * math.pi * 300.0 * 2.75e-9, rel=1e-15)


def test_bright_soliton_keeps_its_sech_shape():
    # focusing 1D NLS: psi = sqrt(N / (2 l)) sech(x / l), l = 2 hbar^2 / (m |g| N), mu = -hbar^2 / (2 m l^2)
    # (Sov. Phys. JETP 34, 62 (1972); Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge 2008, ch. 7)
    g = -5e-38  # J m, times the atom number
    ell = 2 * hbar**2 / (M_NA * abs(g))
    grid = gpe.make_grid(-40 * ell, 40 * ell, ell / 4)
    exact = np.sqrt(1 / (2 * ell)) / np.cosh(grid.x / ell)
    mu = -(hbar**2) / (2 * M_NA * ell**2)
    period = 2 * math.pi * hbar / abs(mu)
    dt = period / 1000
    ev = gpe.evolve(_one(grid, exact), grid, M_NA, dt, 5000, _flat(grid), g=g)  # five phase periods
    assert np.max(np.abs(np.abs(ev.psi[0]) - exact)) < 2e-3 * exact.max()
    # and the phase turns at mu / hbar
    phase = np.angle(ev.psi[0, grid.n // 2] / exact[grid.n // 2])
    assert math.remainder(phase + mu * 5000 * dt / hbar, 2 * math.pi) == pytest.approx(0.0, abs=5e-3)


def test_dark_soliton_keeps_its_tanh_shape():
    # defocusing 1D NLS on a background n0: psi = sqrt(n0) tanh(x / (sqrt 2 xi)), xi = hbar / sqrt(2 m g n0)
    # (Sov. Phys. JETP 37, 823 (1973); Bose-Einstein Condensation in Dilute Gases, 2nd ed., Cambridge 2008, ch. 7);
    # two far-apart solitons make the state periodic on the grid
    length = 400e-6
    n0 = 1 / length  # psi normalised to 1 over the box
    g = gpe.g1d(2 * math.pi * 300.0, 2.75e-9) * 2e4
    xi = hbar / math.sqrt(2 * M_NA * g * n0)
    # dt below pi hbar over the grid's largest kinetic energy: split-step Fourier for the defocusing
    # equation is unstable beyond it (SIAM J. Numer. Anal. 23, 485 (1986))
    grid = gpe.make_grid(-0.5 * length, 0.5 * length, xi / 2)
    a = 0.25 * length
    x = grid.x
    exact = math.sqrt(n0) * np.tanh((x + a) / (math.sqrt(2) * xi)) * np.tanh((a - x) / (math.sqrt(2) * xi))
    psi = np.zeros((2, grid.n), dtype=complex)
    psi[0] = exact
    mu = g * n0
    loc = gpe.Local(np.full(grid.n, -mu))  # the frame turning with mu: a stationary state stands still
    period = 2 * math.pi * hbar / mu
    ev = gpe.evolve(psi, grid, M_NA, period / 400, 2000, lambda t: loc, g=g)
    assert np.max(np.abs(np.abs(ev.psi[0]) - np.abs(exact))) < 2e-3 * math.sqrt(n0)
    near = np.abs(x + a) < 3 * xi
    assert np.max(np.abs(ev.psi[0, near] - exact[near])) < 5e-3 * math.sqrt(n0)


@pytest.mark.parametrize("delta", [0.0, 2 * math.pi * 300.0])
def test_uniform_rabi_oscillation(delta):
    # P_b(t) = Omega^2 / W^2 sin^2(W t / 2), W = sqrt(Omega^2 + delta^2) (Phys. Rev. 51, 652 (1937));
    # the solver's coupling turning at delta is the same as a detuning delta
    grid = gpe.make_grid(0.0, 50e-6, 1e-6)
    omega = 2 * math.pi * 1e3
    n = grid.n
    loc = gpe.Local(np.zeros(n), slice(0, n), np.zeros(n), np.zeros(n), np.full(n, omega), delta)
    psi = _one(grid, np.ones(n))
    times, pb = [], []

    def observe(k, t, p, ev):
        times.append(t)
        pb.append(float(np.sum(np.abs(p[1]) ** 2) * grid.dx))

    gpe.evolve(psi, grid, M_NA, 2e-6, 1500, lambda t: loc, observe=observe, observe_every=25)
    w = math.hypot(omega, delta)
    expected = omega**2 / w**2 * np.sin(w * np.array(times) / 2) ** 2
    # exact for a still coupling; a turning one is sampled once per step (second order: (delta dt)^2)
    assert np.max(np.abs(np.array(pb) - expected)) < (1e-9 if delta == 0 else (delta * 2e-6) ** 2)


def _rectangular_t(energy, v0, width, mass):
    """Stationary transmission of a rectangular barrier (Quantum Mechanics: Non-Relativistic Theory, 3rd ed.,
    Pergamon 1977, section 25, problem 2 (from memory); written out here independently of seqgen)."""
    e = np.asarray(energy, dtype=float)
    out = np.empty_like(e)
    below = e < v0
    kappa = np.sqrt(2 * mass * (v0 - e[below])) / hbar
    out[below] = 1 / (1 + v0**2 * np.sinh(kappa * width) ** 2 / (4 * e[below] * (v0 - e[below])))
    q = np.sqrt(2 * mass * (e[~below] - v0)) / hbar
    out[~below] = 1 / (1 + v0**2 * np.sin(q * width) ** 2 / (4 * e[~below] * (e[~below] - v0)))
    return out


def test_packet_through_a_rectangular_barrier_matches_the_averaged_stationary_t():
    v_in, sigma = 10e-3, 8e-6
    k0 = M_NA * v_in / hbar
    grid = gpe.make_grid(-100e-6, 100e-6, 0.08e-6)
    x = grid.x
    inside = np.abs(x) < 0.5e-6
    width = np.count_nonzero(inside) * grid.dx  # the barrier as the grid holds it
    e0 = 0.5 * M_NA * v_in**2
    v0 = 1.05 * e0
    loc = gpe.Local(np.where(inside, v0, 0.0))
    psi = _one(grid, np.exp(-(x + 45e-6) ** 2 / (4 * sigma**2) + 1j * k0 * x))
    dt = 0.5e-6
    ev = gpe.evolve(psi, grid, M_NA, dt, int(round(9e-3 / dt)), lambda t: loc)
    t_sim = float(np.sum(np.abs(ev.psi[0, x > 0]) ** 2) * grid.dx)
    # |phi(k)|^2 Gaussian of rms 1/(2 sigma) about k0
    k = k0 + np.linspace(-8, 8, 4001) / (2 * sigma)
    w = np.exp(-((k - k0) ** 2) * 2 * sigma**2)
    t_avg = float(np.sum(w * _rectangular_t(0.5 * (hbar * k) ** 2 / M_NA, v0, width, M_NA)) / np.sum(w))
    assert 0.1 < t_avg < 0.9
    # the sharp edges sampled on the grid (12 cells across) leave about 2e-3 (it falls as dx falls)
    assert t_sim == pytest.approx(t_avg, abs=4e-3)


def test_norm_is_conserved_with_interactions_coupling_and_a_push():
    grid = gpe.make_grid(-60e-6, 60e-6, 0.2e-6)
    x = grid.x
    win = slice(grid.index(5e-6), grid.index(15e-6))
    nw = win.stop - win.start
    sheet = 1e-30 * np.exp(-2 * (x[win] - 10e-6) ** 2 / (2e-6) ** 2)
    loc = gpe.Local(0.5 * M_NA * (2 * math.pi * 50) ** 2 * x**2 - 1e-26 * x, win, np.zeros(nw), 0.1 * sheet,
                    2e4 * sheet / sheet.max(), 2 * math.pi * 100)
    psi = _one(grid, np.exp(-x**2 / (4 * (3e-6) ** 2)))
    ev = gpe.evolve(psi, grid, M_NA, 2e-6, 3000, lambda t: loc, g=2e-37)
    assert float(np.sum(np.abs(ev.psi) ** 2) * grid.dx) == pytest.approx(1.0, abs=1e-11)
    assert float(np.sum(np.abs(ev.psi[1]) ** 2) * grid.dx) > 1e-3  # the coupling did act


def test_second_order_convergence_in_dt():
    # Strang splitting is second order: halving dt divides the error by about 4
    # (J. Comput. Phys. 187, 318 (2003))
    grid = gpe.make_grid(-40e-6, 40e-6, 0.25e-6)
    x = grid.x
    win = slice(grid.index(-10e-6), grid.index(10e-6))
    nw = win.stop - win.start
    loc = gpe.Local(0.5 * M_NA * (2 * math.pi * 200) ** 2 * x**2, win, np.full(nw, 2e-31), np.zeros(nw),
                    np.full(nw, 2 * math.pi * 500), 2 * math.pi * 200)
    psi = _one(grid, np.exp(-(x - 3e-6) ** 2 / (4 * (2e-6) ** 2)))
    t_end = 4e-3

    def run(n):
        return gpe.evolve(psi, grid, M_NA, t_end / n, n, lambda t: loc, g=5e-37).psi

    ref = run(6400)
    errors = [float(np.sqrt(np.sum(np.abs(run(n) - ref) ** 2) * grid.dx)) for n in (200, 400, 800)]
    assert errors[0] > 1e-4  # the steps are coarse enough to show their error
    for coarse, fine in zip(errors, errors[1:]):
        assert 3.5 < coarse / fine < 4.5


def test_absorbers_take_the_atoms_with_their_spin():
    # a packet in an equal superposition runs into the right absorber: all of it is taken there, the spin
    # density matrix it leaves is the incident one (nothing else acts on the spin)
    grid = gpe.make_grid(-50e-6, 50e-6, 0.2e-6)
    x = grid.x
    v = 20e-3
    env = np.exp(-(x + 20e-6) ** 2 / (4 * (4e-6) ** 2) + 1j * M_NA * v / hbar * x)
    psi = np.stack([env, 1j * env])
    psi /= math.sqrt(np.sum(np.abs(psi) ** 2) * grid.dx)
    width = 100  # 20 um
    ab = gpe.Absorber(width, gpe.absorber_strength(width * grid.dx, 2 * v))
    ev = gpe.evolve(psi, grid, M_NA, 1e-6, 4000, _flat(grid), absorber=ab)
    rho = ev.absorbed_right
    assert np.trace(rho).real == pytest.approx(1.0, abs=2e-3)
    assert rho[0, 1] / np.trace(rho) == pytest.approx(-0.5j, abs=1e-3)  # a conj(b) = 1 * conj(i) / 2
    assert float(np.sum(np.abs(ev.psi) ** 2) * grid.dx) < 2e-3


def test_mean_field_phase_factor_is_unitary_and_within_the_pade_bound():
    # the (2,2) Pade approximant of exp(z) errs by z^5 / 720 to leading order (Pade
    # Approximants, 2nd ed., Cambridge 1996 (from memory)); on the imaginary axis it has modulus 1 exactly
    angle = np.linspace(-0.1, 0.1, 2001)
    out = gpe.unit_phase(angle, np.empty(angle.size, dtype=complex), np.empty((3, angle.size)))
    assert np.max(np.abs(np.abs(out) - 1.0)) < 1e-15
    assert np.all(np.abs(out - np.exp(1j * angle)) <= np.abs(angle) ** 5 / 720 * 1.01 + 1e-15)
    big = np.linspace(-3.0, 3.0, 13)  # beyond the Pade range: cos and sin
    out = gpe.unit_phase(big, np.empty(big.size, dtype=complex), np.empty((3, big.size)))
    assert np.max(np.abs(out - np.exp(1j * big))) < 1e-15
