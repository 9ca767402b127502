"""Barrier checks (seqgen/check/physics_barrier.py): helper functions against
closed forms, and the pipeline on the demo and on the barrier fault files."""

import math
from pathlib import Path

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.check import physics_barrier as pb
from seqgen.check.physics import report_physics
from seqgen.physics.atoms import get_species
from seqgen.pipeline import preflight

from .conftest import SEQUENCES

NA = get_species("Na23")
M_NA = 22.989769282 * sc.atomic_mass  # AME2020, Chinese Physics C 45, 030003 (2021) (from memory)
DEMO = SEQUENCES / "na23_barrier_scatter.yaml"
RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").resolve()


@pytest.fixture(autouse=True)
def _repo_rig_from_tmp_path(monkeypatch):
    # these sequences live in tmp_path and name the repository's rig by absolute path, outside their project
    # root (schema.rig-outside-root): allowed here, as --allow-outside-root would
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")


MY_CODES = ("physics.barrier-transmission", "physics.barrier-no-signal", "physics.not-tunnelling",
            "physics.barrier-rotation", "physics.drive-too-strong", "physics.rotation-unresolvable")


# ---------------------------------------------------------------- closed forms used below

def _rect_t(E, V0, a, m):
    """Textbook rectangular barrier on [0, a]: t = e^{-ika} / [cos(qa) - i (q^2 + k^2)/(2 k q) sin(qa)]
    (any quantum mechanics text), complex q below the top."""
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
    # (Sodium D Line Data, from memory); I0 = 2P/(pi w w_y) for an elliptical Gaussian beam (any optics text).
    P, w, wy, lam = 0.43e-3, 45e-6, 1.8e-6, 532e-9
    omega = 2 * np.pi * sc.c / lam
    u_per_i = 0.0
    for weight, lam_i, gamma_hz in ((2 / 3, 589.158326e-9, 9.795e6), (1 / 3, 589.755815e-9, 9.765e6)):
        w_i = 2 * np.pi * sc.c / lam_i
        u_per_i -= weight * 3 * np.pi * sc.c**2 / (2 * w_i**3) * 2 * np.pi * gamma_hz * (1 / (w_i - omega) + 1 / (w_i + omega))
    expected = u_per_i * 2 * P / (np.pi * w * wy)
    got = pb.barrier_height(NA, lam, P, w, wy)
    assert got > 0  # 532 nm is blue of both D lines: repulsive
    assert got == pytest.approx(expected, rel=2e-3)


def test_sheet_grid_resolves_a_smooth_barrier_against_poeschl_teller():
    # A barrier of the sheet's width on the grid the checks use, against the exact Poeschl-Teller transmission.
    from seqgen.physics.scattering import transmission

    a = 0.9e-6
    V0 = 7.3e-30
    energies = V0 * np.array([0.7, 0.9, 1.0, 1.1, 1.4])
    k_max = math.sqrt(2 * M_NA * energies.max()) / sc.hbar
    x = pb.sheet_grid(a, k_max, half_width=16.0)  # cosh^-2 tails fall as exp(-2|x|/a): a wider window

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
    x = pb.sheet_grid(wy, math.sqrt(2 * M_NA * E) / sc.hbar)
    r = pb.spin_rotation(x, pb.gaussian_profile(wy), 0.0, omega, np.array([E]), M_NA)
    expected = math.sqrt(math.pi / 2) * omega * wy / v
    assert r.angle[0] == pytest.approx(expected, rel=1e-3)
    assert pb.free_flight_rotation(omega, wy, v) == pytest.approx(expected, rel=1e-12)
    assert r.probability[0] == pytest.approx(1.0, abs=1e-9)


def test_strong_resonant_coupling_rotates_by_the_full_pulse_area():
    # A resonant pulse rotates the Bloch vector by its area (Phys. Rev. 51, 652 (1937)); here area = 1.3 rad,
    # with the kinetic energy far above hbar Omega (a wide coupling region) so the motion is unaffected.
    wy, v = 20e-6, 0.0195
    E = 0.5 * M_NA * v**2
    area = 1.3
    omega = area * v / (math.sqrt(math.pi / 2) * wy)
    assert sc.hbar * omega < 2e-2 * E
    x = pb.sheet_grid(wy, math.sqrt(2 * M_NA * E) / sc.hbar)
    r = pb.spin_rotation(x, pb.gaussian_profile(wy), 0.0, omega, np.array([E]), M_NA)
    assert r.angle[0] == pytest.approx(area, rel=1e-3)


@pytest.mark.parametrize("ratio", [0.8, 1.0, 1.25])
def test_rotation_in_a_rectangular_barrier_matches_the_dressed_state_closed_form(ratio):
    # Coupling hbar Omega sigma_x / 2 with the barrier's own profile: the sigma_x eigenstates see barriers
    # V0 +/- hbar Omega / 2 (Larmor clock construction, Phys. Rev. B 27, 6178 (1983)); from |down> the
    # transmitted spinor is ((t+ - t-)/2, (t+ + t-)/2), so tan(theta/2) = |t+ - t-| / |t+ + t-|,
    # with t+/- the textbook rectangular amplitudes.
    a = 2.0e-6
    V0 = 7.3e-30
    E = ratio * V0
    omega = 0.05 * V0 / sc.hbar
    x = np.linspace(0.0, a, 9)
    r = pb.spin_rotation(x, lambda xx: np.ones_like(np.asarray(xx, dtype=float)), V0, omega, np.array([E]), M_NA)
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
    x = pb.sheet_grid(wy, k_max)
    g = pb.gaussian_profile(wy)
    on = pb.spin_rotation(x, g, 0.0, omega, np.array([E]), M_NA).angle[0]
    off = pb.spin_rotation(x, g, 0.0, omega, np.array([E]), M_NA, partner_offset_j=-sign * sc.hbar * delta).angle[0]
    assert off / on == pytest.approx(math.exp(-(delta * wy / v) ** 2 / 8), rel=2e-2)


def test_path_frequency_of_a_harmonic_trap():
    # Curvature along a direction d of V = (m/2) sum w_i^2 x_i^2 is m sum d_i^2 w_i^2 (harmonic oscillator, textbook).
    w = np.array([2.0, 300.0, 310.0])
    assert pb.path_frequency(w, None, (1, 0, 0)) == pytest.approx(2.0)
    assert pb.path_frequency(w, None, (1, 1, 0)) == pytest.approx(math.sqrt((4.0 + 300.0**2) / 2))
    rot = np.array([[0.0, 1.0, 0.0], [1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])  # principal axes as columns: x <-> y
    assert pb.path_frequency(w, rot, (1, 0, 0)) == pytest.approx(300.0)


# ---------------------------------------------------------------- pipeline

@pytest.fixture(scope="module")
def demo():
    res = preflight(DEMO, compile_tables=False)
    assert res.shot is not None
    return res


def _rep(res):
    act = next(a for a in res.shot.phys if a.kind == "barrier")
    return pb.analyse(res.shot, act)


def test_demo_incident_velocity_is_the_magnetic_kick(demo):
    # |v| = |mu| b' tau / m with mu = -dE/dB of |F=1, mF=-1> at the rig's 1.2 G bias, from the Breit-Rabi formula
    # (Phys. Rev. 38, 2082 (1931)) written out: E = -h nu/(2(2I+1)) + g_I mu_B m B - (h nu/2) sqrt(1 + 4 m x/(2I+1)
    # + x^2), x = (g_J - g_I) mu_B B/(h nu); nu = 1 771 626 128.8 Hz, g_J = 2.00229600, g_I = -0.00080461, I = 3/2
    # (Sodium D Line Data, from memory); b' = 8 G/cm, tau = 2 ms. At B = 0 this is |g_F m_F| mu_B, g_F = -1/2 + ...
    mu_b, nu, g_j, g_i, m = sc.physical_constants["Bohr magneton"][0], 1771626128.8, 2.00229600, -0.00080461, -1

    def energy(b):
        x = (g_j - g_i) * mu_b * b / (sc.h * nu)
        return -sc.h * nu / 8 + g_i * mu_b * m * b - 0.5 * sc.h * nu * math.sqrt(1 + m * x + x * x)

    moment = -(energy(1.2e-4 + 1e-8) - energy(1.2e-4 - 1e-8)) / 2e-8
    v = abs(moment) * 0.08 * 2e-3 / M_NA
    rep = _rep(demo)
    assert rep["speed"] == pytest.approx(v, rel=2e-4)
    g_f = -2.00229600 / 4 + 5 * (-0.00080461) / 4  # Lande formula, low-field limit: within 0.5 % at 1.2 G
    assert abs(moment) == pytest.approx(abs(g_f) * mu_b, rel=5e-3)
    # the low-field seeker |1,-1> (moment -dE/dB < 0, the seqgen.physics convention) is pushed towards weaker
    # field by a positive gradient of |B| (common practice, no source), the same sign as physics.push-velocity's
    from seqgen.check import physics_states as ps

    push = next(a for a in demo.shot.phys if a.kind == "push")
    assert rep["signed"] < 0 and ps.push_analysis(demo.shot, push)["velocity"] < 0
    assert rep["E_mean"] == pytest.approx(0.5 * M_NA * (v**2 + rep["sigma_v"] ** 2), rel=5e-4)


def test_demo_reports_a_meaningful_transmission_and_a_resolvable_weak_rotation(demo):
    codes = [f.code for f in demo.findings]
    assert "physics.barrier-transmission" in codes and "physics.barrier-rotation" in codes
    warnings = [f for f in demo.findings if f.code in MY_CODES and f.severity != "note"]
    assert not warnings, [f.message for f in warnings]
    note = next(f for f in demo.findings if f.code == "physics.barrier-transmission")
    data = dict(note.data)
    assert 0.1 < data["transmission"] < 0.9
    # expect: tunnelling in the demo: mean kinetic energy below the top
    assert data["mean_kinetic_energy_J"] < data["V0_J"]
    rot = dict(next(f for f in demo.findings if f.code == "physics.barrier-rotation").data)
    n_t = demo.shot.sample.atoms * data["transmission"]
    # weak probe (limits.weak_probe_angle) yet above atom shot noise 1/sqrt(N) (common practice, no source)
    assert 1 / math.sqrt(n_t) < rot["rotation_rad"] < demo.shot.limits.weak_probe_angle


def test_show_physics_lists_transmission_and_rotation(demo, capsys):
    from seqgen.cli import main

    rows = [r for r in report_physics(demo.shot) if r["kind"] == "barrier"]
    assert len(rows) == 1
    text = " ".join(rows[0]["items"])
    assert "transmitted fraction" in text and "rotation" in text
    assert main(["show", str(DEMO), "--physics"]) == 0
    out = capsys.readouterr().out
    assert "transmitted fraction" in out and "rotation of the transmitted spin" in out


def test_barrier_top_at_the_kinetic_energy_transmits_about_half(demo):
    # Near E = V0 a smooth wide barrier transmits about half (common practice, no source); an inverted parabola
    # gives exactly 1/2 at its top (Phys. Rev. 48, 549 (1935), from memory).
    from dataclasses import replace

    shot = demo.shot
    act = next(a for a in shot.phys if a.kind == "barrier")
    rep = _rep(demo)
    power = act.args["power"] * rep["E_mean"] / rep["V0"]
    act2 = replace(act, args={**act.args, "power": power}, index=act.index + 1000)
    shot2 = replace(shot, phys=tuple(act2 if a is act else a for a in shot.phys))
    assert pb.analyse(shot2, act2)["T"] == pytest.approx(0.5, abs=0.05)


def _fault(name):
    return SEQUENCES / "faults" / name


@pytest.mark.parametrize("name,code", [
    ("barrier_not_tunnelling.yaml", "physics.not-tunnelling"),
    ("barrier_no_signal.yaml", "physics.barrier-no-signal"),
    ("barrier_drive_too_strong.yaml", "physics.drive-too-strong"),
    ("barrier_rotation_unresolvable.yaml", "physics.rotation-unresolvable"),
])
def test_barrier_faults_fire_only_as_warnings(name, code):
    res = preflight(_fault(name), compile_tables=False)
    hits = [f for f in res.findings if f.code == code]
    assert hits and all(f.severity == "warning" and f.line for f in hits)
    assert not [f for f in res.findings if f.severity == "error"], [str(f) for f in res.findings]


def _write(tmp_path, sample):
    text = f"""seqgen: 1
rig: {RIG.as_posix()}
sample: {sample}
blocks:
  - name: guide
    at: 1 ms
    actions:
      - set: {{channel: guide_power, value: 0.65 W}}
      - hold: {{duration: 20 ms}}
      - push: {{coil: kick_coil, gradient: 8 G/cm, duration: 2 ms}}
  - name: scatter
    after: guide + 3 ms
    actions:
      - barrier: {{beam: sheet, power: 0.43 mW, duration: 12 ms}}
      - set: {{channel: guide_power, value: 0 W}}
"""
    p = Path(tmp_path) / "seq.yaml"
    p.write_text(text, encoding="utf-8")
    return preflight(p, compile_tables=False)


def test_thermal_spread_is_maxwell_boltzmann(tmp_path):
    # 1D velocity spread sqrt(k_B T / m) of a thermal cloud (Maxwell-Boltzmann, textbook); a broad distribution
    # smooths the transmission step, so the mean sits strictly between 0 and 1.
    res = _write(tmp_path, "{species: Na23, state: {F: 1, mF: -1}, atoms: 1.0e5, temperature: 200 nK}")
    rep = _rep(res)
    assert rep["sigma_v"] == pytest.approx(math.sqrt(sc.k * 200e-9 / M_NA), rel=1e-4)
    assert 0.1 < rep["T"] < 0.9 and rep["T_spread"] > 0.1


def test_condensate_spread_uses_the_thomas_fermi_radius_along_the_path(tmp_path):
    # mu = (hbar w_bar / 2)(15 N a / a_ho)^(2/5), R = sqrt(2 mu / (m w_x^2)) (Bose-Einstein Condensation in
    # Dilute Gases, 2nd ed., Cambridge University Press (2008), Thomas-Fermi chapter); a(|1,-1>) = 54.5 a0 (Phys. Rev. A 83, 042704 (2011),
    # from memory); the kick is along x; sigma_v = 1.602 hbar / (m R) is seqgen's Gaussian-equivalent width.
    res = _write(tmp_path, "{species: Na23, state: {F: 1, mF: -1}, atoms: 1.0e5, condensed: true, "
                           "trap_frequencies: [5 Hz, 300 Hz, 300 Hz]}")
    w = 2 * np.pi * np.array([5.0, 300.0, 300.0])
    wbar = np.prod(w) ** (1 / 3)
    a_ho = math.sqrt(sc.hbar / (M_NA * wbar))
    mu = 0.5 * sc.hbar * wbar * (15 * 1e5 * 54.5 * sc.physical_constants["Bohr radius"][0] / a_ho) ** 0.4
    radius = math.sqrt(2 * mu / (M_NA * w[0] ** 2))
    rep = _rep(res)
    assert rep["sigma_v"] == pytest.approx(1.60222 * sc.hbar / (M_NA * radius), rel=5e-3)


def test_explain_shows_every_barrier_code():
    from seqgen.registry import explain

    for code in MY_CODES:
        text = explain(code)
        assert text and "Source:" in text and len(text.splitlines()) > 3
