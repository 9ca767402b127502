"""physics.probe-off-resonance and physics.repulsive-trap-beam through the pipeline: the predictions
against hand formulas (scipy.constants, the D-line data compilations from memory), the fault files'
findings and wording, and the demos staying quiet.

Formulas: nu = c / lambda; steady-state scattering rate R = (Gamma/2) s / (1 + s + 4 Delta^2/Gamma^2)
(Laser Cooling and Trapping, Springer (1999), from memory); dipole potential of the D lines
(Adv. At. Mol. Opt. Phys. 42, 95 (2000)), written out in tests/atom_reference.py.
"""

import math

import pytest
from scipy import constants as sc

from seqgen.pipeline import preflight
from seqgen.predict.imaging import probe_analysis, probe_line
from seqgen.predict.traps import trap_beam_shifts, trap_stage_prediction
from seqgen.resolve.sequence import resolve
from seqgen.resolve.sources import load_sources

from .atom_reference import dipole_u_per_intensity
from .conftest import SEQUENCES

FAULTS = SEQUENCES / "faults"
DEMOS = (SEQUENCES / "na23_thermometry.yaml", SEQUENCES / "na23_barrier_scatter.yaml")
NEW = {"physics.probe-off-resonance", "physics.repulsive-trap-beam"}

RB_D2 = 780.241209686e-9  # Rubidium 87 D Line Data (from memory)
RB_GAMMA_HZ = 6.0666e6  # same compilation (from memory)
RB_ISAT = 16.6933  # W/m^2 = 1.66933 mW/cm^2, same compilation (from memory)
NA_D2 = 589.1583264e-9  # Sodium D Line Data (from memory)


def shot_of(path):
    shot, findings = resolve(load_sources(path))
    assert shot is not None, [f.code for f in findings]
    return shot


def image(shot):
    (act,) = shot.actions("image")
    return act


def test_sodium_probe_on_rubidium_scatters_with_the_lorentzian():
    shot = shot_of(FAULTS / "probe_off_resonance.yaml")
    act = image(shot)
    line = probe_line(shot, act)
    delta = sc.c / 589.158e-9 - sc.c / RB_D2  # the rig's probe against the Rb-87 D2 line
    assert line.line == "D2" and not line.on_line
    assert line.detuning_hz == pytest.approx(delta, rel=1e-9)
    assert line.detuning_linewidths == pytest.approx(delta / RB_GAMMA_HZ, rel=1e-9)
    rep = probe_analysis(shot, act)
    s0 = 2 * 40e-6 / (math.pi * 2.5e-3**2) / RB_ISAT  # 40 uW in a 2.5 mm waist (the fault file and rig)
    gamma = 2 * math.pi * RB_GAMMA_HZ
    rate = gamma / 2 * s0 / (1 + s0 + 4 * (2 * math.pi * delta) ** 2 / gamma**2)
    assert rep.saturation == pytest.approx(s0, rel=1e-4)
    assert rep.photons == pytest.approx(rate * 30e-6, rel=1e-4)
    assert rep.photons < 1e-10  # nothing to image


def test_demo_probe_counts_as_on_its_line():
    # 589.158 nm is 0.33 pm from the sodium D2 line; a wavelength written to 0.001 nm names the line, the
    # lock sets the frequency: the rate stays the resonant one (tests/test_physics_state_checks.py)
    shot = shot_of(DEMOS[0])
    act = image(shot)
    line = probe_line(shot, act)
    assert line.line == "D2" and line.on_line
    assert line.detuning_hz == pytest.approx(sc.c / 589.158e-9 - sc.c / NA_D2, rel=1e-6)
    assert line.tolerance_hz == pytest.approx(sc.c * 0.5e-12 / NA_D2**2, rel=1e-9)
    assert probe_analysis(shot, act).detuning_hz == 0.0


def test_probe_off_resonance_finding_names_the_detuning_and_the_fix():
    res = preflight(FAULTS / "probe_off_resonance.yaml", compile_tables=False)
    (hit,) = [f for f in res.findings if f.code == "physics.probe-off-resonance"]
    assert hit.severity == "error" and hit.line == 12  # the image action's line in the fault file
    assert "124.6 THz blue" in hit.message and "D2 line at 780.2412 nm" in hit.message
    assert "780.2412097 nm" in hit.hint


def test_green_trap_beam_repels_rubidium():
    shot = shot_of(FAULTS / "repulsive_trap_beam.yaml")
    shifts = {s.beam: s for s in trap_beam_shifts(shot)}
    sh = shifts["trap"]
    assert sh.repulsive and not shifts["near"].repulsive  # 800 nm is red of both Rb lines
    # Rb-87 D lines, weights 1/3 and 2/3, written out by hand with the Rb data
    w = 2 * math.pi * sc.c / 532e-9
    ref = 0.0
    for weight, lam_i, g_hz in ((1 / 3, 794.978851156e-9, 5.75e6), (2 / 3, RB_D2, RB_GAMMA_HZ)):
        wi = 2 * math.pi * sc.c / lam_i
        ref -= weight * 3 * math.pi * sc.c**2 / (2 * wi**3) * 2 * math.pi * g_hz * (1 / (wi - w) + 1 / (wi + w))
    # plus 5s -> 6p, 7p, 8p (vacuum wavelengths, NIST Atomic Spectra Database, and reduced matrix elements in
    # e a0, Phys. Rev. A 60, 4476 (1999), from memory) and the static Rb+ core, 9.08 a.u. (Phys. Rev. A 69,
    # 022509 (2004), from memory): U/I = -alpha / (2 eps0 c), alpha_i = d_i^2 / (6 hbar) [1/(w_i - w) + 1/(w_i + w)]
    au_d = sc.e * sc.physical_constants["Bohr radius"][0]
    au_alpha = 4 * math.pi * sc.epsilon_0 * sc.physical_constants["Bohr radius"][0] ** 3
    alpha = 9.08 * au_alpha
    for lam_i, d in ((421.67e-9, 0.333), (420.30e-9, 0.541), (359.26e-9, 0.115), (358.81e-9, 0.202),
                     (335.18e-9, 0.059), (334.97e-9, 0.111)):
        wi = 2 * math.pi * sc.c / lam_i
        alpha += (d * au_d) ** 2 / (6 * sc.hbar) * (1 / (wi - w) + 1 / (wi + w))
    ref -= alpha / (2 * sc.epsilon_0 * sc.c)
    assert ref > 0
    assert sh.potential_per_intensity == pytest.approx(ref, rel=2e-4, abs=0)
    assert sh.polarizability_au == pytest.approx(-2 * sc.epsilon_0 * sc.c * ref / au_alpha, rel=2e-4, abs=0)


def test_repulsive_beam_finding_and_trap_lost_no_longer_asks_for_power():
    res = preflight(FAULTS / "repulsive_trap_beam.yaml", compile_tables=False)
    (rep,) = [f for f in res.findings if f.code == "physics.repulsive-trap-beam"]
    assert rep.severity == "error" and rep.line == 9 and "1064 nm" in rep.hint
    # the plain set that turns the beam on (line 9) loses the trap too: every write to a trap beam is checked
    lost_lines = sorted(f.line for f in res.findings if f.code == "physics.trap-lost")
    assert lost_lines == [9, 12]
    (lost,) = [f for f in res.findings if f.code == "physics.trap-lost" and f.line == 12]
    assert "higher power" not in lost.hint and "wavelength red of the D1 line" in lost.hint


def test_trap_lost_of_an_attractive_beam_keeps_its_hint():
    res = preflight(FAULTS / "trap_lost.yaml", compile_tables=False)
    hits = [f for f in res.findings if f.code == "physics.trap-lost"]
    assert hits and all(f.hint == "end the ramp at a higher power" for f in hits)
    assert not [f for f in res.findings if f.code in NEW]


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_demos_trap_beams_attract_and_raise_no_new_code(path):
    shot = shot_of(path)
    shifts = trap_beam_shifts(shot)
    assert shifts and all(not s.repulsive for s in shifts)
    for s in shifts:  # sodium at the rig's 1064 nm: the hand formula of tests/atom_reference.py
        assert s.potential_per_intensity == pytest.approx(dipole_u_per_intensity(s.wavelength), rel=1e-6)
    res = preflight(path, compile_tables=False)
    assert not [f.code for f in res.findings if f.code in NEW]


def test_trap_heating_over_the_ramp_against_hand_formula():
    # 800 nm, 55 um waist, 0.2 W -> 0.1 W over 1 s (rig_rb87_traps.yaml, trap_heating.yaml); the sag (< 1 um)
    # is neglected: dT/dt = T_rec Gamma_sc(I0) / 3 (Adv. At. Mol. Opt. Phys. 42, 95 (2000)), proportional to
    # the power, and a smooth ramp symmetric about its middle has mean power 0.15 W
    shot = shot_of(FAULTS / "trap_heating.yaml")
    (act,) = shot.actions("trap_ramp")
    rep = trap_stage_prediction(shot, act)
    lam, w = 800e-9, 55e-6
    om = 2 * math.pi * sc.c / lam
    per_i = 0.0
    for weight, lam_i, g_hz in ((1 / 3, 794.978851156e-9, 5.75e6), (2 / 3, RB_D2, RB_GAMMA_HZ)):
        wi, gi = 2 * math.pi * sc.c / lam_i, 2 * math.pi * g_hz
        per_i += weight * 3 * math.pi * sc.c**2 / (2 * sc.hbar * wi**3) * (om / wi) ** 3 * gi**2 * (
            1 / (wi - om) + 1 / (wi + om)) ** 2
    mass = 86.909180531 * sc.physical_constants["atomic mass constant"][0]  # AME2020 (from memory)
    t_rec = sc.hbar**2 * (2 * math.pi / lam) ** 2 / (mass * sc.k)
    rate_per_w = t_rec * per_i * 2 / (math.pi * w**2) / 3
    assert rep.heating_rate == pytest.approx(rate_per_w * 0.2, rel=2e-3)
    assert rep.heating == pytest.approx(rate_per_w * 0.15 * 1.0, rel=2e-2)
    res = preflight(FAULTS / "trap_heating.yaml", compile_tables=False)
    (hit,) = [f for f in res.findings if f.code == "physics.trap-heating"]
    assert hit.severity == "warning" and hit.line == 12


@pytest.mark.parametrize("path", DEMOS, ids=lambda p: p.stem)
def test_demo_trap_heating_stays_below_the_sample_temperature(path):
    shot = shot_of(path)
    for act in shot.actions("trap_ramp"):
        assert 0 < trap_stage_prediction(shot, act).heating < shot.sample.temperature_k
    assert not [f for f in preflight(path, compile_tables=False).findings if f.code == "physics.trap-heating"]
