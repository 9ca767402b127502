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


# ---------------------------------------------------------------- mean-field release (Thomas-Fermi condensate)


def test_released_energy_per_atom_is_two_sevenths_of_mu_by_integrating_the_profile():
    # Interaction energy per atom (g/2) int n^2 / int n of n = (mu/g)(1 - r^2) in the scaled unit ball: 2/7 mu
    # (Rev. Mod. Phys. 71, 463 (1999)); here the radial integrals done numerically.
    from scipy import integrate

    mu = 1.3e-30
    n2, _ = integrate.quad(lambda r: (1 - r * r) ** 2 * r * r, 0.0, 1.0)
    n1, _ = integrate.quad(lambda r: (1 - r * r) * r * r, 0.0, 1.0)
    assert pbar.released_energy_per_atom(mu) == pytest.approx(0.5 * mu * n2 / n1, rel=1e-12)
    assert 0.5 * n2 / n1 == pytest.approx(2 / 7, rel=1e-12)


def test_projected_velocity_rms_is_the_half_width_over_sqrt_seven():
    # <v_c^2> of the ellipsoid n(v) ~ 1 - sum v_i^2 / V_i^2 along direction cosines c: numerically, in the unit
    # ball, <x^2> = int x^2 (1 - r^2) / int (1 - r^2) = (1/3) int r^4 (1 - r^2) dr / int r^2 (1 - r^2) dr, and the
    # cross terms vanish by symmetry, so <v_c^2> = <x^2> sum c_i^2 V_i^2
    from scipy import integrate

    num, _ = integrate.quad(lambda r: r**4 * (1 - r * r), 0.0, 1.0)
    den, _ = integrate.quad(lambda r: r**2 * (1 - r * r), 0.0, 1.0)
    x2 = num / (3 * den)
    half = np.array([3e-3, 1e-3, 0.4e-3])
    c = np.array([0.6, 0.8, 0.0])
    s = pbar.projected_half_width(half, c)
    assert s == pytest.approx(math.sqrt(np.sum(c**2 * half**2)), rel=1e-12)
    assert s * pbar.PROJECTED_RMS_PER_HALF_WIDTH == pytest.approx(math.sqrt(x2 * np.sum(c**2 * half**2)), rel=1e-9)


def test_free_release_turns_all_the_interaction_energy_into_kinetic_energy():
    # Energy conservation of the scaling solution (Phys. Rev. Lett. 77, 5315 (1996)): once expanded, the kinetic
    # energy per atom, sum_i m <v_i^2> / 2 = sum_i m (R_i b_i')^2 / 14 with R_i^2 = 2 mu / (m w_i^2), is the
    # released 2/7 mu (Rev. Mod. Phys. 71, 463 (1999)); an anisotropic trap shares it unequally.
    mu, m = 70e-9 * sc.k, M_NA
    w = 2 * np.pi * np.array([40.0, 290.0, 310.0])
    radii = np.sqrt(2 * mu / (m * w**2))
    t_end = 400.0 / w.min()
    sol = pbar.scaling_release(w, [(0.0, np.zeros(3))], t_end)
    _, bd = sol.at(t_end)
    per_axis = 0.5 * m * (radii * bd[:, 0]) ** 2 / 7
    assert per_axis.sum() == pytest.approx(pbar.released_energy_per_atom(mu), rel=2e-3)
    assert per_axis.sum() == pytest.approx(2 / 7 * mu, rel=2e-3)
    assert per_axis[0] < 0.05 * per_axis.sum()  # the weak axis gets little of it


def test_cigar_release_follows_the_castin_dum_closed_form():
    # Elongated trap, eps = w_z / w_perp << 1: b_perp = sqrt(1 + tau^2), b_z = 1 + eps^2 (tau atan tau -
    # ln sqrt(1 + tau^2)), tau = w_perp t (Phys. Rev. Lett. 77, 5315 (1996), from memory), to O(eps^2) relative.
    eps, w_perp = 0.01, 2 * np.pi * 300.0
    w = np.array([w_perp, w_perp, eps * w_perp])
    t = np.array([0.5, 2.0, 10.0, 40.0]) / w_perp
    sol = pbar.scaling_release(w, [(0.0, np.zeros(3))], t[-1], n_times=4001)
    b, bd = sol.at(t)
    tau = w_perp * t
    np.testing.assert_allclose(b[0], np.sqrt(1 + tau**2), rtol=3 * eps**2)
    np.testing.assert_allclose(b[2] - 1, eps**2 * (tau * np.arctan(tau) - np.log(np.sqrt(1 + tau**2))), rtol=2e-2)
    np.testing.assert_allclose(bd[2], eps**2 * w_perp * np.arctan(tau), rtol=2e-2)


def test_a_trap_left_as_it_was_releases_nothing():
    # The Thomas-Fermi ground state is stationary: with the trap unchanged, b = 1 and b' = 0 (Phys. Rev. Lett.
    # 77, 5315 (1996): the scaling equations' fixed point)
    w = 2 * np.pi * np.array([44.0, 293.0, 295.0])
    sol = pbar.scaling_release(w, [(0.0, w**2)], 0.05)
    b, bd = sol.at(np.array([0.01, 0.05]))
    np.testing.assert_allclose(b, 1.0, atol=1e-8)
    np.testing.assert_allclose(bd * 0.05, 0.0, atol=1e-8)


# ---------------------------------------------------------------- precession, alignment, Larmor times


def _rect_larmor_times(E, V0, a, m):
    """Larmor times of a rectangular barrier of width a below its top, tau_y = -hbar d(arg t)/dV0 and
    tau_z = -hbar d(ln|t|)/dV0 (Phys. Rev. B 27, 6178 (1983)), differentiated here by hand from the textbook
    amplitude t = e^{-ika} / [cosh(kappa a) + i eps sinh(kappa a)], eps = (kappa^2 - k^2)/(2 k kappa), with
    k0^2 = k^2 + kappa^2 = 2 m V0 / hbar^2, d kappa / dV0 = m / (hbar^2 kappa), D = 4 k^2 kappa^2 + k0^4 sinh^2(kappa a):
    tau_y = m k [2 kappa a (kappa^2 - k^2) + k0^2 sinh(2 kappa a)] / (hbar kappa D),
    tau_z = m k0^2 [(kappa^2 - k^2) sinh^2(kappa a) + (kappa a k0^2 / 2) sinh(2 kappa a)] / (hbar kappa^2 D)."""
    k = math.sqrt(2 * m * E) / sc.hbar
    kap = math.sqrt(2 * m * (V0 - E)) / sc.hbar
    k0sq = 2 * m * V0 / sc.hbar**2
    d = 4 * k**2 * kap**2 + k0sq**2 * math.sinh(kap * a) ** 2
    tau_y = m * k * (2 * kap * a * (kap**2 - k**2) + k0sq * math.sinh(2 * kap * a)) / (sc.hbar * kap * d)
    tau_z = (m * k0sq * ((kap**2 - k**2) * math.sinh(kap * a) ** 2 + 0.5 * kap * a * k0sq * math.sinh(2 * kap * a))
             / (sc.hbar * kap**2 * d))
    return tau_y, tau_z


@pytest.mark.parametrize("ratio", [0.3, 0.6, 0.9])
def test_weak_coupling_larmor_times_of_a_rectangular_barrier_are_buttikers(ratio):
    # Weak coupling hbar Omega sigma_x / 2 over the barrier: precession about x = Omega tau_y, alignment towards
    # the low-energy -x = Omega tau_z, tau_y = -hbar d(arg t)/dV0, tau_z = -hbar d(ln|t|)/dV0 (Phys. Rev. B 27,
    # 6178 (1983)); the derivatives by central differences of the closed-form amplitude _rect_t, and the closed
    # forms of _rect_larmor_times.
    a, V0 = 2.0e-6, 7.3e-30
    E = ratio * V0
    omega = 1e-4 * V0 / sc.hbar
    x = np.linspace(0.0, a, 9)
    r = pbar.spin_rotation(x, lambda xx: np.ones_like(np.asarray(xx, dtype=float)), V0, omega, np.array([E]), M_NA)
    dv = 1e-5 * V0
    tp, tm = _rect_t(E, V0 + dv, a, M_NA), _rect_t(E, V0 - dv, a, M_NA)
    tau_y = -sc.hbar * np.angle(tp / tm) / (2 * dv)
    tau_z = -sc.hbar * (math.log(abs(tp)) - math.log(abs(tm))) / (2 * dv)
    closed_y, closed_z = _rect_larmor_times(E, V0, a, M_NA)
    assert tau_y == pytest.approx(closed_y, rel=1e-6) and tau_z == pytest.approx(closed_z, rel=1e-6)
    assert r.clock.precession_time[0] == pytest.approx(closed_y, rel=1e-4)
    assert r.clock.alignment_time[0] == pytest.approx(closed_z, rel=1e-4)
    assert r.clock.precession_angle[0] == pytest.approx(omega * closed_y, rel=1e-4)
    # weak field: the total angle from the pole is the hypotenuse of the two (small-angle geometry)
    assert r.angle[0] == pytest.approx(math.hypot(omega * closed_y, omega * closed_z), rel=1e-3)


@pytest.mark.parametrize("theta,alpha", [(0.3, 0.1), (1.2, -0.4), (2.5, 0.7)])
def test_precession_and_alignment_of_a_constructed_bloch_pair(theta, alpha):
    # From the pole -z: turn by theta right-handed about x (in the y-z plane, perpendicular to the axis), then
    # tilt by alpha towards -x: s = (-sin a, cos a sin t, -cos a cos t); the angles are read back geometrically
    # (Phys. Rev. B 27, 6178 (1983): precession about the field, alignment with it).
    from seqgen.physics.scattering import spin_rotation_angles

    s_in = np.array([0.0, 0.0, -1.0])
    s_out = np.array([-math.sin(alpha), math.cos(alpha) * math.sin(theta), -math.cos(alpha) * math.cos(theta)])
    prec, align = spin_rotation_angles(s_in, s_out, (1.0, 0.0, 0.0))
    assert float(prec) == pytest.approx(theta, abs=1e-12)
    assert float(align) == pytest.approx(alpha, abs=1e-12)


def test_transmitted_weighted_mean_weights_by_what_gets_through():
    # sum w P a / sum w P: two velocity classes, the second transmitted three times as often (arithmetic)
    got = pbar.transmitted_weighted_mean([0.5, 0.5], [0.1, 0.3], [2.0, 6.0])
    assert got == pytest.approx((0.05 * 2 + 0.15 * 6) / 0.2, rel=1e-12)
    assert pbar.transmitted_weighted_mean([1.0], [0.0], [3.0]) == 0.0
