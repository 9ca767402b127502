"""seqgen.physics.barrier (the light sheet's height, grid and the spin rotation it drives) against closed forms:
the dipole potential (Adv. At. Mol. Opt. Phys. 42, 95 (2000)), the Poeschl-Teller transmission, the pulse area
(Phys. Rev. 51, 652 (1937)), the dressed-state rectangular barrier (Phys. Rev. B 27, 6178 (1983)) and the
Fourier factor of a Gaussian transit."""

import math

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.physics import barrier as pbar
from seqgen.physics.atoms import get_species

from ..atom_reference import MASS as M_NA

NA = get_species("Na23")


def _rect_t(E, V0, a, m):
    """Rectangular barrier on [0, a]: t = e^{-ika} / [cos(qa) - i (q^2 + k^2)/(2 k q) sin(qa)], complex q below
    the top (derivation: plane waves e^{ikx} + r e^{-ikx} before, A e^{iqx} + B e^{-iqx} inside, t e^{ikx} after;
    psi and psi' continuous at 0 and a give the four equations, solved for t)."""
    k = np.sqrt(2 * m * E) / sc.hbar
    q = np.sqrt(2 * m * (E - V0) + 0j) / sc.hbar
    return np.exp(-1j * k * a) / (np.cos(q * a) - 1j * (q**2 + k**2) / (2 * k * q) * np.sin(q * a))


def _poeschl_teller_T(E, V0, a, m):
    """V0 / cosh^2(x/a): T = sinh^2(pi k a) / [sinh^2(pi k a) + cosh^2((pi/2) sqrt(8 m V0 a^2 / hbar^2 - 1))]
    (Quantum Mechanics: Non-Relativistic Theory, 3rd ed., Pergamon (1977), section 25, problem 4)."""
    k = np.sqrt(2 * m * E) / sc.hbar
    g = 8 * m * V0 * a**2 / sc.hbar**2 - 1
    ch2 = np.cosh(0.5 * np.pi * np.sqrt(g)) ** 2
    sh2 = np.sinh(np.pi * k * a) ** 2
    return sh2 / (sh2 + ch2)


# ---------------------------------------------------------------- helpers


def test_barrier_height_is_d1_d2_light_shift_times_peak_intensity():
    # U = -sum_i w_i (3 pi c^2 / (2 w_i^3)) Gamma_i [1/(w_i - w) + 1/(w_i + w)] I, w_D2 = 2/3, w_D1 = 1/3
    # (Adv. At. Mol. Opt. Phys. 42, 95 (2000)); Na D lines 589.158326 / 589.755815 nm, Gamma/2pi 9.795 / 9.765 MHz
    # (Sodium D Line Data, from memory); I0 = 2P/(pi w w_y) for an elliptical Gaussian beam
    # (the integral of I0 exp(-2x^2/w^2 - 2y^2/w_y^2) over the plane is I0 pi w w_y / 2).
    P, w, wy, lam = 0.43e-3, 45e-6, 1.8e-6, 532e-9
    omega = 2 * np.pi * sc.c / lam
    u_per_i = 0.0
    for weight, lam_i, gamma_hz in ((2 / 3, 589.158326e-9, 9.795e6), (1 / 3, 589.755815e-9, 9.765e6)):
        w_i = 2 * np.pi * sc.c / lam_i
        u_per_i -= weight * 3 * np.pi * sc.c**2 / (2 * w_i**3) * 2 * np.pi * gamma_hz * (1 / (w_i - omega) + 1 / (w_i + omega))
    expected = u_per_i * 2 * P / (np.pi * w * wy)
    got = pbar.barrier_height(NA, lam, P, w, wy)
    assert got > 0  # 532 nm is blue of both D lines: repulsive
    assert got == pytest.approx(expected, rel=2e-3)


def test_sheet_grid_resolves_a_smooth_barrier_against_poeschl_teller():
    # A barrier of the sheet's width on the grid the checks use, against the exact Poeschl-Teller transmission.
    from seqgen.physics.scattering import transmission

    a = 0.9e-6
    V0 = 7.3e-30
    energies = V0 * np.array([0.7, 0.9, 1.0, 1.1, 1.4])
    k_max = math.sqrt(2 * M_NA * energies.max()) / sc.hbar
    x = pbar.sheet_grid(a, k_max, half_width=16.0)  # cosh^-2 tails fall as exp(-2|x|/a): a wider window

    def V(xx):
        return V0 / np.cosh(xx / a) ** 2

    T = transmission(x, V, energies, M_NA).T
    np.testing.assert_allclose(T, _poeschl_teller_T(energies, V0, a, M_NA), atol=2e-4)


def test_free_flight_rotation_is_the_gaussian_pulse_area():
    # No barrier, weak resonant coupling Omega_peak exp(-2x^2/w^2): rotation = int Omega dt = sqrt(pi/2) Omega w / v
    # (Larmor clock in free flight, angle = Omega L / v (common practice, no source); Gaussian integral).
    wy, v = 1.8e-6, 0.0195
    E = 0.5 * M_NA * v**2
    omega = 2 * np.pi * 20.0
    x = pbar.sheet_grid(wy, math.sqrt(2 * M_NA * E) / sc.hbar)
    r = pbar.spin_rotation(x, pbar.gaussian_profile(wy), 0.0, omega, np.array([E]), M_NA)
    expected = math.sqrt(math.pi / 2) * omega * wy / v
    assert r.angle[0] == pytest.approx(expected, rel=1e-3)
    assert pbar.free_flight_rotation(omega, wy, v) == pytest.approx(expected, rel=1e-12)
    assert r.probability[0] == pytest.approx(1.0, abs=1e-9)


def test_strong_resonant_coupling_rotates_by_the_full_pulse_area():
    # A resonant pulse rotates the Bloch vector by its area (Phys. Rev. 51, 652 (1937)); here area = 1.3 rad,
    # with the kinetic energy far above hbar Omega (a wide coupling region) so the motion is unaffected.
    wy, v = 20e-6, 0.0195
    E = 0.5 * M_NA * v**2
    area = 1.3
    omega = area * v / (math.sqrt(math.pi / 2) * wy)
    assert sc.hbar * omega < 2e-2 * E
    x = pbar.sheet_grid(wy, math.sqrt(2 * M_NA * E) / sc.hbar)
    r = pbar.spin_rotation(x, pbar.gaussian_profile(wy), 0.0, omega, np.array([E]), M_NA)
    assert r.angle[0] == pytest.approx(area, rel=1e-3)


@pytest.mark.parametrize("ratio", [0.8, 1.0, 1.25])
def test_rotation_in_a_rectangular_barrier_matches_the_dressed_state_closed_form(ratio):
    # Coupling hbar Omega sigma_x / 2 with the barrier's own profile: the sigma_x eigenstates see barriers
    # V0 +/- hbar Omega / 2 (Larmor clock construction, Phys. Rev. B 27, 6178 (1983)); from |down> the
    # transmitted spinor is ((t+ - t-)/2, (t+ + t-)/2), so tan(theta/2) = |t+ - t-| / |t+ + t-|,
    # with t+/- the rectangular amplitudes of _rect_t.
    a = 2.0e-6
    V0 = 7.3e-30
    E = ratio * V0
    omega = 0.05 * V0 / sc.hbar
    x = np.linspace(0.0, a, 9)
    r = pbar.spin_rotation(x, lambda xx: np.ones_like(np.asarray(xx, dtype=float)), V0, omega, np.array([E]), M_NA)
    tp = _rect_t(E, V0 + 0.5 * sc.hbar * omega, a, M_NA)
    tm = _rect_t(E, V0 - 0.5 * sc.hbar * omega, a, M_NA)
    expected = 2 * math.atan2(abs(tp - tm), abs(tp + tm))
    assert r.angle[0] == pytest.approx(expected, rel=1e-8)
    assert r.probability[0] == pytest.approx(0.5 * (abs(tp) ** 2 + abs(tm) ** 2), rel=1e-8)


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_detuned_transit_follows_the_fourier_factor(sign):
    # Weak coupling, no barrier, detuning delta: first-order amplitude ~ int Omega(vt) e^{i delta t} dt, so the
    # rotation falls by exp(-delta^2 w^2 / (8 v^2)) (Fourier transform of a Gaussian). A wide coupling region
    # keeps hbar delta << E, where the in-grid rotating-frame offset is exact to first order.
    wy, v = 20e-6, 0.0195
    E = 0.5 * M_NA * v**2
    delta = 2.0 * v / wy
    omega = 1e-3 * v / wy
    assert sc.hbar * delta < 0.05 * E
    k_max = math.sqrt(2 * M_NA * (E + sc.hbar * delta)) / sc.hbar
    x = pbar.sheet_grid(wy, k_max)
    g = pbar.gaussian_profile(wy)
    on = pbar.spin_rotation(x, g, 0.0, omega, np.array([E]), M_NA).angle[0]
    off = pbar.spin_rotation(x, g, 0.0, omega, np.array([E]), M_NA, partner_offset_j=-sign * sc.hbar * delta).angle[0]
    assert off / on == pytest.approx(math.exp(-(delta * wy / v) ** 2 / 8), rel=2e-2)
