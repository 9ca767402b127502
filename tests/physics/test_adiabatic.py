"""Harmonic-trap ramps: adiabaticity, Ermakov excitation, shortcut ramps, Thomas-Fermi scaling.

The source is named beside each check.
"""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

from seqgen.physics import adiabatic as ad
from seqgen.physics.expansion import thomas_fermi

TWO_PI = 2 * np.pi
W0, WF, T = TWO_PI * 200, TWO_PI * 50, 5e-3


def linear(w0, wf, duration):
    return lambda t: w0 + (wf - w0) * np.clip(np.asarray(t) / duration, 0.0, 1.0)


def test_adiabaticity_of_exponential_ramp():
    # omega = omega_0 exp(-t/tau): |omega'|/omega^2 = 1/(tau omega), largest at the end
    tau = 0.1
    t = np.linspace(0, 0.3, 3001)
    w = W0 * np.exp(-t / tau)
    assert ad.adiabaticity_parameter(t, w) == pytest.approx(1 / (tau * w[-1]), rel=1e-4)
    stacked = np.stack([w, 2 * w])  # vectorised over traces
    assert ad.adiabaticity_parameter(t, stacked) == pytest.approx([1 / (tau * w[-1]), 1 / (2 * tau * w[-1])], rel=1e-4)


def ermakov_energy_ratio_ode(omega, w0, wf, duration):
    """E/E_adiabatic after a ramp, integrated here with scipy: the Ermakov equation b'' = -omega(t)^2 b + w0^2 / b^3,
    b(0) = 1, b'(0) = 0, and the energy in the final trap (b'^2 + wf^2 b^2 + w0^2 / b^2) / (2 w0 wf) of the
    invariant's scaling solution (J. Math. Phys. 10, 1458 (1969)); a sudden change gives the textbook
    (w0^2 + wf^2) / (2 w0 wf), a frictionless ramp ending at b = sqrt(w0/wf), b' = 0 gives 1."""
    rhs = lambda t, y: [y[1], -omega(t) ** 2 * y[0] + w0**2 / y[0] ** 3]
    sol = integrate.solve_ivp(rhs, (0.0, duration), [1.0, 0.0], method="DOP853", rtol=1e-11, atol=1e-12)
    b, db = sol.y[:, -1]
    return (db**2 + wf**2 * b**2 + w0**2 / b**2) / (2 * w0 * wf)


def test_linear_ramp_excites():
    # 200 Hz -> 50 Hz linear in 5 ms: the ODE written out above gives about 1.17
    want = ermakov_energy_ratio_ode(linear(W0, WF, T), W0, WF, T)
    r = ad.ermakov_final_energy_ratio(linear(W0, WF, T), 0.0, T)
    assert r.energy_ratio == pytest.approx(want, rel=1e-6)
    assert want == pytest.approx(1.17, abs=0.01)
    assert r.breathing_amplitude > 0.1


@pytest.mark.parametrize("duration", [5e-3, 1e-3])
def test_shortcut_ramp_has_no_excitation(duration):
    # frictionless ramp (Phys. Rev. Lett. 104, 063002 (2010)): E/E_ad = 1 at any duration
    ramp = ad.shortcut_ramp_omega(W0, WF, duration)
    r = ad.ermakov_final_energy_ratio(ramp.omega_squared, 0.0, duration, squared=True)
    assert r.energy_ratio == pytest.approx(1.0, abs=1e-6)
    assert r.breathing_amplitude < 2e-3
    # ends in the equilibrium width of the final trap, b = gamma = sqrt(omega_0/omega_f), at rest
    assert r.b == pytest.approx(np.sqrt(W0 / WF), rel=1e-6)


def test_shortcut_ramp_shape():
    # b(0) = 1, b(T) = gamma; omega(0) = omega_0, omega(T) = omega_f (Phys. Rev. Lett. 104, 063002 (2010))
    ramp = ad.shortcut_ramp_omega(W0, WF, T)
    assert ramp.b(0.0) == 1.0 and ramp.b(T) == pytest.approx(2.0, rel=1e-12)
    assert ramp(0.0) == pytest.approx(W0, rel=1e-12) and ramp(T) == pytest.approx(WF, rel=1e-12)
    assert ramp(-1.0) == pytest.approx(W0) and ramp(1.0) == pytest.approx(WF)
    assert ramp(np.linspace(0, T, 7)).shape == (7,)
    assert ramp.min_omega_squared > 0  # 5 ms stays confining
    fast = ad.shortcut_ramp_omega(W0, WF, 1e-3)
    assert fast.min_omega_squared < 0  # short ramps pass through an expulsive stretch
    assert np.isnan(fast(np.linspace(0, 1e-3, 201))).any()
    # the linear ramp of the same 5 ms does excite while the shortcut does not
    assert ad.ermakov_final_energy_ratio(ramp, 0.0, T).energy_ratio == pytest.approx(1.0, abs=1e-6)


@pytest.mark.parametrize("wi,wf", [(W0, WF), (WF, W0), (TWO_PI * 100, TWO_PI * 90)])
def test_sudden_quench(wi, wf):
    # sudden quench: E/E_ad = (wi^2 + wf^2)/(2 wi wf) (textbook; the ODE above at b = 1, b' = 0); b then oscillates between
    # 1 and wi/wf, amplitude |wi/wf - 1| / (2 sqrt(wi/wf)) (turning points of the Ermakov invariant)
    r = ad.ermakov_final_energy_ratio(lambda t: wf, 0.0, 3e-3, omega_initial=wi)
    assert r.energy_ratio == pytest.approx((wi**2 + wf**2) / (2 * wi * wf), rel=1e-8)
    q = wi / wf
    assert r.breathing_amplitude == pytest.approx(abs(q - 1) / (2 * np.sqrt(q)), rel=1e-6)


def test_slow_ramps_converge_to_adiabatic():
    excess = []
    for duration in (5e-3, 5e-2, 0.5, 2.0):
        r = ad.ermakov_final_energy_ratio(linear(W0, WF, duration), 0.0, duration)
        excess.append(r.energy_ratio - 1)
        # |omega'|/omega^2 << 1 means adiabatic (common practice, no source): excess below its square
        t = np.linspace(0, duration, 2001)
        eps = ad.adiabaticity_parameter(t, linear(W0, WF, duration)(t))
        assert r.energy_ratio - 1 <= eps**2
    assert excess[0] > excess[1] > excess[2] > excess[3] >= 0
    assert excess[-1] < 1e-5


def test_ermakov_rejects_bad_input():
    with pytest.raises(ValueError):
        ad.ermakov_final_energy_ratio(lambda t: W0, 1.0, 0.5)
    with pytest.raises(ValueError):
        ad.ermakov_final_energy_ratio(lambda t: -1.0, 0.0, 1.0, squared=True)


# --- Thomas-Fermi condensate ----------------------------------------------

def test_tf_modes_isotropic():
    # isotropic Thomas-Fermi condensate: monopole sqrt(5) omega, quadrupole sqrt(2) omega
    # (Phys. Rev. Lett. 77, 2360 (1996))
    assert ad.tf_mode_frequencies([1.0, 1.0, 1.0]) == pytest.approx([np.sqrt(2), np.sqrt(2), np.sqrt(5)], rel=1e-12)


@pytest.mark.parametrize("lam", [0.05, 0.3, 2.0])
def test_tf_modes_axisymmetric(lam):
    # axisymmetric, lam = omega_z/omega_perp: m = 0 modes
    # omega^2 / omega_perp^2 = 2 + 3 lam^2/2 +- sqrt(9 lam^4 - 16 lam^2 + 16)/2, m = 2 mode sqrt(2) omega_perp
    # (Phys. Rev. Lett. 77, 2360 (1996))
    m0 = 2 + 1.5 * lam**2 + np.array([-1, 1]) * 0.5 * np.sqrt(9 * lam**4 - 16 * lam**2 + 16)
    expect = np.sort(np.sqrt(np.r_[m0, 2.0]))
    assert ad.tf_mode_frequencies([1.0, 1.0, lam]) == pytest.approx(expect, rel=1e-10)


def test_tf_slow_ramp_follows_equilibrium():
    # after a slow decompression the cloud sits at the final-trap Thomas-Fermi size:
    # lambda_j = R_j(final)/R_j(initial) from the Thomas-Fermi radii
    # ("Bose-Einstein Condensation in Dilute Gases", Cambridge University Press (2008))
    w0 = TWO_PI * np.array([120.0, 100.0, 15.0])
    wf = w0 / np.array([2.0, 1.5, 1.2])
    dur = 2.0
    r = ad.condensate_ramp_excitation(lambda t: w0 + (wf - w0) * min(max(t / dur, 0.0), 1.0), 0.0, dur)
    m, a = 1.443e-25, 5.3e-9  # any positive mass and scattering length: the ratio does not depend on them
    _, r_i = thomas_fermi(1e5, m, a, w0)
    _, r_f = thomas_fermi(1e5, m, a, wf)
    assert r.equilibrium == pytest.approx(r_f / r_i, rel=1e-12)
    assert r.lambdas == pytest.approx(r_f / r_i, rel=1e-2)
    assert r.excitation_fraction < 1e-3
    assert np.all(r.breathing_amplitude < 1e-2)


@pytest.mark.parametrize("q", [0.5, 0.9, 1.3])
def test_tf_sudden_quench_energy(q):
    # isotropic sudden change omega -> q omega: energy per atom in units of mu_0 is
    # (3 q^2 + 2)/7 just after (trap 3/7 q^2, interaction 2/7; Thomas-Fermi 5/7 mu split,
    # "Bose-Einstein Condensation in Dilute Gases", Cambridge University Press (2008))
    # and (5/7) q^(6/5) at equilibrium (mu ~ omega^(6/5)), so the excess fraction is
    # (3 q^2 + 2) / (5 q^(6/5)) - 1
    w = TWO_PI * 100.0
    r = ad.condensate_ramp_excitation(lambda t: np.full(3, w if t <= 0 else q * w), 0.0, 1e-6, rtol=1e-11)
    assert r.excitation_fraction == pytest.approx((3 * q**2 + 2) / (5 * q**1.2) - 1, rel=1e-4)


def test_tf_small_quench_breathing_amplitude():
    # small isotropic quench: linear monopole oscillation between 1 and 2 lambda_eq - 1,
    # amplitude |1 - lambda_eq| / lambda_eq, lambda_eq = q^(-2/5) (Thomas-Fermi radius ~ omega^(-2/5))
    q = 0.98
    w = TWO_PI * 100.0
    r = ad.condensate_ramp_excitation(lambda t: np.full(3, w if t <= 0 else q * w), 0.0, 1e-7, rtol=1e-11)
    leq = q ** -0.4
    assert r.equilibrium == pytest.approx(np.full(3, leq), rel=1e-12)
    assert r.breathing_amplitude == pytest.approx(np.full(3, abs(1 - leq) / leq), rel=1e-3)


def test_depth_to_temperature_ratio():
    # eta = U/(k_B T); evaporation runs at eta ~ 6-10 (common practice, no source)
    assert ad.depth_to_temperature_ratio(10 * sc.k * 1e-6, 1e-6) == pytest.approx(10.0, rel=1e-12)
    eta = ad.depth_to_temperature_ratio(np.array([6.0, 10.0]) * sc.k * 2e-6, 2e-6)
    assert eta == pytest.approx([6.0, 10.0], rel=1e-12)
