"""seqgen.physics.passage (which fraction of a pushed cloud has reached a plane by a time) against the
kinematics of uniform acceleration then free flight, the Thomas-Fermi line density integrated directly, the
normal tail of a Gaussian velocity spread, and simulated trajectories."""

import math

import numpy as np
import pytest

from seqgen.physics import passage as ppass

from ..atom_reference import thomas_fermi_fraction_beyond_by_integration as _tf_beyond_by_integration


def test_path_frequency_of_a_harmonic_trap():
    # Curvature along a unit direction d of V = (m/2) sum w_i^2 x_i^2: V(s d) = (m/2) s^2 sum d_i^2 w_i^2, so
    # d^2V/ds^2 = m sum d_i^2 w_i^2 and w_d^2 = sum d_i^2 w_i^2 (derivation).
    w = np.array([2.0, 300.0, 310.0])
    assert ppass.path_frequency(w, None, (1, 0, 0)) == pytest.approx(2.0)
    assert ppass.path_frequency(w, None, (1, 1, 0)) == pytest.approx(math.sqrt((4.0 + 300.0**2) / 2))
    rot = np.array([[0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])  # principal axes as columns: x <-> y
    assert ppass.path_frequency(w, rot, (1, 0, 0)) == pytest.approx(300.0)


@pytest.mark.parametrize("u", [-1.0, -0.7, -0.2, 0.0, 0.35, 0.8, 1.0])
def test_thomas_fermi_line_fraction_against_direct_integration(u):
    assert float(ppass.thomas_fermi_fraction_beyond(u)) == pytest.approx(_tf_beyond_by_integration(u), abs=1e-9)
    r = 25e-6
    assert float(ppass.fraction_beyond(u * r, "thomas-fermi", r)) == pytest.approx(_tf_beyond_by_integration(u), abs=1e-9)


def test_point_cloud_arrives_when_the_kinematics_say():
    # uniform acceleration v / tau from rest over the push tau, s = v t^2 / (2 tau), then uniform motion,
    # s = v (t - tau / 2); solving s = d: t = sqrt(2 d tau / v) while d <= v tau / 2, else
    # t = tau + (d - v tau / 2) / v (derivation)
    v, tau = 0.0195, 2e-3
    for d in (5e-6, 0.3e-3):
        t = math.sqrt(2 * d * tau / v) if d <= v * tau / 2 else tau + (d - v * tau / 2) / v
        assert ppass.time_to_fraction(0.5, d, v, tau, 0.0, "point", 0.0) == pytest.approx(t, rel=1e-6)
        reached = ppass.fraction_reached(np.array([0.999 * t, 1.001 * t]), d, v, tau, 0.0, "point", 0.0)
        assert reached.tolist() == [0.0, 1.0]


def test_point_cloud_with_a_velocity_spread_is_a_normal_tail():
    # position s(t) + u t with u ~ N(0, sigma_v^2): reached when u >= (d - s)/t, P = normal survival function
    from scipy.stats import norm

    v, tau, sv, d = 0.0195, 2e-3, 5e-3, 0.3e-3
    t = np.array([5e-3, 12e-3, 16e-3, 25e-3])
    s = np.where(t < tau, 0.5 * v * t**2 / tau, v * (t - tau / 2))
    np.testing.assert_allclose(ppass.fraction_reached(t, d, v, tau, sv, "point", 0.0), norm.sf((d - s) / (sv * t)),
                               rtol=1e-9, atol=1e-12)


def test_fraction_reached_against_simulated_trajectories():
    # Monte Carlo of the same kinematics, independent of the convexity shortcut: atoms drawn from the 3D
    # Thomas-Fermi profile (uniform in the ball, accepted with probability 1 - r^2) and a Gaussian velocity offset,
    # stepped through time; "reached" = at or beyond d at any step (common practice, no source)
    rng = np.random.default_rng(20240611)
    pts = rng.uniform(-1, 1, size=(400000, 3))
    r2 = np.sum(pts**2, axis=1)
    keep = (r2 < 1) & (rng.uniform(size=r2.size) < 1 - r2)
    R, v, tau, sv, d = 30e-6, 0.0195, 2e-3, 2e-3, 0.3e-3
    x0 = R * pts[keep, 0][:40000]
    u = sv * rng.standard_normal(x0.size)
    t_end = 16.5e-3
    steps = np.linspace(0.0, t_end, 400)
    s = np.where(steps < tau, 0.5 * v * steps**2 / tau, v * (steps - tau / 2))
    far = np.max(x0[:, None] + s[None, :] + u[:, None] * steps[None, :], axis=1)
    mc = float(np.mean(far >= d))
    got = float(ppass.fraction_reached(t_end, d, v, tau, sv, "thomas-fermi", R))
    assert 0.1 < mc < 0.9
    assert got == pytest.approx(mc, abs=4 * math.sqrt(mc * (1 - mc) / x0.size) + 5e-3)
