"""Depth of optical traps as the lowest escape route in 3-D (seqgen.physics.optical.trap_escape) and the
harmonic frequencies at the minimum.

Closed forms from "Optical dipole traps for neutral atoms", Adv. At. Mol. Opt. Phys. 42, 95 (2000) (ODT
review): U(r) = -Re(alpha) I(r) / (2 eps0 c), peak intensity I0 = 2P/(pi w^2), the paraxial Gaussian beam
I = I0 / (1 + s^2/z_R^2) exp(-2 rho^2 / (w^2 (1 + s^2/z_R^2))), z_R = pi w^2/lambda, and the harmonic
frequencies omega_r = sqrt(4 U0/(m w^2)), omega_z = sqrt(2 U0/(m z_R^2)).

The polarisability alpha is an input here, taken from seqgen.physics.optical.scalar_polarizability_au (tested
against published values in test_optical.py); what these tests check is the search for the minimum and the
lowest barrier, against the closed forms above and independent 1-D root finding.
"""

import numpy as np
import pytest
from scipy import constants as sc
from scipy import optimize

from seqgen.physics import optical as o
from seqgen.physics.atoms import get_species

from ..atom_reference import dipole_u_per_intensity as na_two_line_u_per_i

AU_POL = 4 * np.pi * sc.epsilon_0 * sc.physical_constants["Bohr radius"][0] ** 3
G = sc.g  # standard gravity, 9.80665 m/s^2 exact (SI Brochure)
RB = get_species("Rb87")
NA = get_species("Na23")
LAM = 1064e-9


def peak_u0(sp, power, waist, lam=LAM):
    """U0 = Re(alpha) I0 / (2 eps0 c) > 0 (depth of the light shift at the focus), I0 = 2P/(pi w^2)."""
    alpha = o.scalar_polarizability_au(sp, lam) * AU_POL
    return alpha * (2 * power / (np.pi * waist**2)) / (2 * sc.epsilon_0 * sc.c)


def z_r(waist, lam=LAM):
    return np.pi * waist**2 / lam


def test_polarisability_input_matches_the_two_line_reference():
    # the input of the closed forms below agrees with the D1 + D2 form written out in tests/atom_reference.py
    i0 = 2 * 1.0 / (np.pi * 50e-6**2)
    assert peak_u0(NA, 1.0, 50e-6) == pytest.approx(-na_two_line_u_per_i(LAM) * i0, rel=0.05)


@pytest.mark.parametrize("direction", [(1, 0, 0), (1, 1, 0.2)])
def test_single_beam_without_gravity_is_as_deep_as_its_peak_potential(direction):
    # no barrier at a finite distance: the way out is to infinity, where U = 0, so depth = U0 exactly
    beam = o.GaussianBeam(1.0, 50e-6, LAM, direction=direction)
    u0 = peak_u0(RB, 1.0, 50e-6)
    assert o.trap_depth(RB, beam) == pytest.approx(u0, rel=1e-9)
    esc = o.trap_escape(RB, beam, gravity=False)
    assert esc.depth_j == pytest.approx(u0, rel=1e-9)
    assert esc.kind == "far"
    assert np.linalg.norm(esc.direction) == pytest.approx(1.0, rel=1e-12)


def _guide_dimple_profile(ug, zr_g, ud, wd):
    """U(x) along the guide's axis (x): the guide's axial Lorentzian plus the dimple's radial Gaussian."""
    def u(x):
        return -ug / (1 + x**2 / zr_g**2) - ud * np.exp(-2 * x**2 / wd**2)

    def slope(x):
        return 2 * ug * x / zr_g**2 / (1 + x**2 / zr_g**2) ** 2 + 4 * ud * x / wd**2 * np.exp(-2 * x**2 / wd**2)
    return u, slope


def test_strong_guide_and_weak_dimple_escape_along_the_guide_over_the_dimple():
    # guide along x (1.5 W, 55 um), dimple along y (40 mW, 42 um), no gravity: past a few dimple waists the
    # potential along x only rises on the guide's Rayleigh length (9 mm), so the atoms leave over the dimple's
    # own U0 plus the guide's rise there, of order U_guide (w_dimple/z_R)^2
    wg, wd, pg, pd = 55e-6, 42e-6, 1.5, 0.04
    beams = (o.GaussianBeam(pg, wg, LAM, direction=(1, 0, 0)), o.GaussianBeam(pd, wd, LAM, direction=(0, 1, 0)))
    ug, ud, zg = peak_u0(RB, pg, wg), peak_u0(RB, pd, wd), z_r(wg)
    assert ug > 20 * ud  # a weak dimple
    esc = o.trap_escape(RB, beams, gravity=False)
    assert abs(esc.direction[0]) > 0.999  # along the guide
    assert esc.kind == "shoulder"
    # independent: the shoulder of the 1-D profile along x, where its slope has its interior minimum
    u, slope = _guide_dimple_profile(ug, zg, ud, wd)
    xs = optimize.minimize_scalar(slope, bounds=(wd, 10 * wd), method="bounded", options={"xatol": 1e-12}).x
    assert esc.depth_j == pytest.approx(u(xs) - u(0.0), rel=1e-4)
    # the guide's correction is bounded by its rise over a few dimple waists: (3 w_d / z_R)^2 U_guide
    assert abs(esc.depth_j - ud) < 9 * ug * (wd / zg) ** 2
    assert abs(esc.depth_j - ud) < 0.01 * ud
    assert o.trap_depth(RB, beams) == esc.depth_j
    # the old answer, all beams at the crossing, is more than twenty times too deep
    assert -o.find_trap_minimum(RB, beams, gravity=False).potential_j == pytest.approx(ug + ud, rel=1e-9)


def _vertical_profile(u0, w, m, q=1.0):
    """U(z) = -U0/q exp(-2 z^2 /(w^2 q)) + m g z on the vertical at an axial position with q = 1 + s^2/z_R^2,
    its derivative, and its minimum and barrier (local maximum below) by brentq."""
    def u(z):
        return -u0 / q * np.exp(-2 * z**2 / (w**2 * q)) + m * G * z

    def du(z):
        return u0 / q * 4 * z / (w**2 * q) * np.exp(-2 * z**2 / (w**2 * q)) + m * G

    inflection = -w * np.sqrt(q) / 2  # the steepest point of the Gaussian flank
    if du(inflection) > 0:
        return u, None, None
    return u, optimize.brentq(du, inflection, 0.0, xtol=1e-16), optimize.brentq(du, -6 * w * np.sqrt(q), inflection,
                                                                                  xtol=1e-16)


def test_single_beam_with_gravity_near_threshold_escapes_straight_down():
    # close to the holding threshold the barrier lies w/2..w/sqrt(2) below the axis, where d2U/ds2 > 0 along
    # the beam: there the 1-D tilted-Gaussian barrier on the vertical through the focus is the saddle
    w, p = 50e-6, 0.12
    u0, m = peak_u0(RB, p, w), RB.mass_kg
    u, zmin, ztop = _vertical_profile(u0, w, m)
    a = 2 * ztop**2 / w**2
    assert a < 1  # d2U/ds2 = 2 U0 (1 - a) exp(-a) / z_R^2 > 0 at the barrier: a saddle, not a hilltop
    esc = o.trap_escape(RB, o.GaussianBeam(p, w, LAM))
    assert esc.kind == "saddle"
    assert esc.depth_j == pytest.approx(u(ztop) - u(zmin), rel=1e-6)
    assert esc.direction == pytest.approx([0, 0, -1], abs=1e-6)
    assert esc.barrier_m[2] == pytest.approx(ztop, rel=1e-6)


def test_deep_single_beam_with_gravity_escapes_along_the_beam_where_it_has_widened():
    # deeper, the vertical barrier through the focus is a hilltop along the beam (a > 1): the saddle is where
    # the ridge of barriers U_top(s) on the verticals at axial positions s is lowest (dU_top/ds = dU/ds = 0)
    w, p = 50e-6, 1.0
    u0, m, zr = peak_u0(RB, p, w), RB.mass_kg, z_r(w)

    def top(s):
        u, _, ztop = _vertical_profile(u0, w, m, 1 + s**2 / zr**2)
        return u(ztop)

    def steepest_pull(s):  # > 0 where the beam's steepest flank no longer balances gravity (no ridge)
        q = 1 + s**2 / zr**2
        return m * G - u0 / q * 2 / (w * np.sqrt(q)) * np.exp(-0.5)

    s_hold = optimize.brentq(steepest_pull, 0.0, 10 * zr)  # the beam holds the atoms up to here
    s_star = optimize.minimize_scalar(top, bounds=(0.0, s_hold * (1 - 1e-9)), method="bounded",
                                      options={"xatol": 1e-9}).x
    assert s_star < 0.99 * s_hold  # an interior minimum of the ridge: a saddle
    u, zmin, ztop0 = _vertical_profile(u0, w, m)
    assert 2 * ztop0**2 / w**2 > 1 and s_star > 0.5 * zr
    esc = o.trap_escape(RB, o.GaussianBeam(p, w, LAM))
    assert esc.kind == "saddle"
    assert esc.depth_j == pytest.approx(top(s_star) - u(zmin), rel=1e-6)
    assert abs(esc.barrier_m[0]) == pytest.approx(s_star, rel=1e-4)
    assert esc.depth_j < 0.95 * (u(ztop0) - u(zmin))  # lower than the way straight down
    assert o.effective_depth_with_gravity(RB, o.GaussianBeam(p, w, LAM)) == pytest.approx(u(ztop0) - u(zmin), rel=1e-6)


def test_held_trap_numbers_are_the_escape_and_the_minimum():
    beams = (o.GaussianBeam(1.1, 55e-6, LAM, direction=(1, 0, 0)), o.GaussianBeam(0.05, 42e-6, LAM, direction=(0, 1, 0)))
    h = o.held_trap_escape(RB, beams)
    ud = peak_u0(RB, 0.05, 42e-6)
    # gravity tilts the dimple's shoulder a little (sag ~ um, far below its waist): the dimple's U0 to 1 %
    assert h.depth_j == pytest.approx(ud, rel=0.01)
    assert abs(h.escape[0]) > 0.999
    depth, omegas = o.held_trap(RB, beams)
    assert depth == h.depth_j and np.array_equal(omegas, h.omegas_rad_s)
    weak = o.GaussianBeam(0.9 * o.minimum_power_to_hold(RB, 55e-6, LAM), 55e-6, LAM)
    assert o.held_trap_escape(RB, weak).depth_j == 0.0 and o.held_trap_escape(RB, weak).escape is None


def _beam_hessian(u0, w, zr, k):
    """Harmonic expansion of one round Gaussian beam at its focus: 4 U0/w^2 across, 2 U0/z_R^2 along k."""
    k = np.asarray(k, dtype=float) / np.linalg.norm(k)
    kk = np.outer(k, k)
    return 4 * u0 / w**2 * (np.eye(3) - kk) + 2 * u0 / zr**2 * kk


def test_frequencies_and_axes_of_a_tilted_crossed_trap_from_the_harmonic_expansion():
    # two beams crossing at their foci at an oblique angle, both tilted out of the horizontal plane: the
    # curvatures add, so the Hessian is the sum of the beams' expansions; its eigenvalues m omega^2 and
    # eigenvectors are the frequencies and principal axes
    beams = [(2.0, 60e-6, (1.0, 0.2, 0.3)), (1.0, 40e-6, (-0.3, 1.0, -0.4))]
    hess = sum(_beam_hessian(peak_u0(RB, p, w), w, z_r(w), k) for p, w, k in beams)
    lam, vec = np.linalg.eigh(hess)
    trap = o.find_trap_minimum(RB, [o.GaussianBeam(p, w, LAM, direction=k) for p, w, k in beams], gravity=False)
    assert trap.omegas_rad_s == pytest.approx(np.sqrt(lam / RB.mass_kg), rel=1e-5)
    for i in range(3):
        assert abs(trap.axes[:, i] @ vec[:, i]) == pytest.approx(1.0, abs=1e-6)
    # one beam: omega_r = sqrt(4 U0/(m w^2)), omega_z = sqrt(2 U0/(m z_R^2)) (ODT review)
    single = o.find_trap_minimum(RB, o.GaussianBeam(2.0, 60e-6, LAM, direction=(1.0, 0.2, 0.3)), gravity=False)
    u0 = peak_u0(RB, 2.0, 60e-6)
    assert single.omegas_rad_s == pytest.approx([np.sqrt(2 * u0 / (RB.mass_kg * z_r(60e-6) ** 2)),
                                                 *[np.sqrt(4 * u0 / (RB.mass_kg * 60e-6**2))] * 2], rel=1e-5)


def test_potential_gradient_is_the_derivative_of_the_potential():
    # the analytic gradient used by the minimiser and the saddle refinement, against central differences
    beams = (o.GaussianBeam(1.0, 50e-6, LAM, direction=(1, 1, 0.2), waist2_m=70e-6),
             o.GaussianBeam(0.3, 30e-6, LAM, direction=(0, 1, 0), focus_m=(10e-6, 0, -5e-6)))
    rng = np.random.default_rng(1)
    pts = rng.normal(scale=40e-6, size=(20, 3)) + rng.normal(scale=2e-3, size=(20, 1)) * np.array([1, 1, 0.2])
    h = 1e-9
    num = np.stack([(o.total_potential(RB, beams, pts + h * e) - o.total_potential(RB, beams, pts - h * e)) / (2 * h)
                    for e in np.eye(3)], axis=-1)
    ana = o.potential_gradient(RB, beams, pts)
    scale = np.max(np.abs(num))
    assert np.max(np.abs(ana - num)) < 1e-6 * scale
