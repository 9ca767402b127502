"""Defects found by trying the forward model on rigs and species unlike the demo's (caesium-133, potassium-41).
Each test states what a user sees and checks it against something outside seqgen: a published formula, the
values written in the file, or the finding's own proposed fix applied to the file."""

import re

import numpy as np
import pytest
import scipy.constants as sc
from scipy.integrate import solve_ivp

import seqgen

from .conftest import SEQUENCES
from .test_faults import check

K41_RIG = SEQUENCES / "good" / "rig_k41.yaml"
CS_RIG = SEQUENCES / "good" / "rig_cs133.yaml"


def _copy_rig(src, tmp_path, name, old=None, new=None):
    text = src.read_text(encoding="utf-8")
    if old is not None:
        assert old in text
        text = text.replace(old, new)
    (tmp_path / "seqgen.toml").write_text("", encoding="utf-8")
    (tmp_path / name).write_text(text, encoding="utf-8")


def test_polarisation_typo_is_not_fixed_to_the_opposite_polarisation(tmp_path):
    # 'sigma_plus' means sigma+; a fix that proposes 'sigma-' drives the other transitions when applied
    _copy_rig(CS_RIG, tmp_path, "rig.yaml", "polarisation: pi", "polarisation: sigma_plus")
    seq = tmp_path / "seq.yaml"
    seq.write_text("seqgen: 1\nrig: rig.yaml\nsample: {species: Cs133, state: {F: 3, mF: 3}, atoms: 2e5, "
                   "temperature: 1 uK}\nblocks:\n  - name: hold\n    at: 1 ms\n    actions:\n"
                   "      - hold: {duration: 1 ms}\n", encoding="utf-8")
    _, found, _ = check(seq)
    bad = [f for f in found if f.code == "schema.bad-value" and "polarisation" in f.message]
    assert bad, [(f.code, f.message) for f in found]
    proposed = re.findall(r"did you mean '([^']+)'", bad[0].hint)
    assert proposed in ([], ["sigma+"]), bad[0].hint


def test_undersampled_ramp_tolerance_fix_passes_when_applied(tmp_path):
    # a 10 ms smooth ramp of a coil to 40 A on a 16-bit card: the fix proposes a looser tolerance, printed to
    # three digits; written into the file as printed, it must silence the warning
    _copy_rig(K41_RIG, tmp_path, "rig.yaml")
    body = ("seqgen: 1\nrig: rig.yaml\nsample: {species: K41, state: {F: 2, mF: 2}, atoms: 1e8, temperature: 4 uK}\n"
            "blocks:\n  - name: hold\n    at: 1 ms\n    actions:\n"
            "      - magnetic_hold: {currents: {quad: 40 A}, duration: 300 ms, ramp_on: 10 ms, shape: smooth%s}\n"
            "      - release: {coils: [quad]}\n")
    seq = tmp_path / "seq.yaml"
    seq.write_text(body % "", encoding="utf-8")
    _, found, _ = check(seq)
    warn = [f for f in found if f.code == "hardware.ramp-undersampled"]
    assert warn, [(f.code, f.message) for f in found]
    m = re.search(r"loosen its tolerance to ([0-9.e+-]+ [A-Za-z]+)", warn[0].hint)
    assert m, warn[0].hint
    seq.write_text(body % f", tolerance: {m.group(1)}", encoding="utf-8")
    _, found, _ = check(seq)
    assert not [f.message for f in found if f.code == "hardware.ramp-undersampled"]


def _castin_dum(omegas, t):
    """Scaling factors of a condensate released at t = 0 from a harmonic trap (Phys. Rev. Lett. 77, 5315 (1996)):
    lambda_i'' = omega_i^2 / (lambda_i lambda_x lambda_y lambda_z), lambda(0) = 1, lambda'(0) = 0."""
    def rhs(_, y):
        lam = y[:3]
        return np.concatenate([y[3:], omegas ** 2 / (lam * np.prod(lam))])
    sol = solve_ivp(rhs, (0.0, t), [1, 1, 1, 0, 0, 0], rtol=1e-10, atol=1e-12)
    return sol.y[:3, -1]


def test_stretched_potassium41_condensate_uses_the_triplet_scattering_length(tmp_path):
    # |F=2, mF=2> of 41K is the stretched state, a pure triplet: a = a_T = 60.54 a0 (Phys. Rev. A 78, 012503
    # (2008), from memory); the atom table lists no state-specific length for 41K, and the singlet (85.53 a0)
    # must not stand in for it
    _copy_rig(K41_RIG, tmp_path, "rig.yaml")
    seq = tmp_path / "seq.yaml"
    seq.write_text("seqgen: 1\nrig: rig.yaml\nsample: {species: K41, state: {F: 2, mF: 2}, atoms: 1e5, temperature: "
                   "50 nK, condensed: true, trap_frequencies: [160 Hz, 160 Hz, 224 Hz]}\nblocks:\n"
                   "  - name: release\n    at: 1 ms\n    actions:\n      - release: {}\n"
                   "  - name: image\n    after: release + 15 ms\n    actions:\n"
                   "      - image: {setup: side, probe_power: 20 uW, duration: 30 us}\n", encoding="utf-8")
    res = seqgen.preflight(str(seq))
    cloud = seqgen.cloud_at_image(res.shot, res.shot.actions("image")[0])
    # Thomas-Fermi radii (Rev. Mod. Phys. 71, 463 (1999)): mu = hbar wbar / 2 (15 N a / abar)^(2/5),
    # R_i = sqrt(2 mu / (m omega_i^2)); mass 40.9618253 u (AME2020, from memory)
    m = 40.9618253 * sc.atomic_mass
    omegas = 2 * np.pi * np.array([160.0, 160.0, 224.0])
    wbar = np.prod(omegas) ** (1 / 3)
    abar = np.sqrt(sc.hbar / (m * wbar))
    a = 60.54 * sc.physical_constants["Bohr radius"][0]
    mu = 0.5 * sc.hbar * wbar * (15 * 1e5 * a / abar) ** 0.4
    expected = np.sqrt(2 * mu / (m * omegas ** 2)) * _castin_dum(omegas, 15e-3)
    np.testing.assert_allclose(np.sort(cloud.sizes), np.sort(expected), rtol=0.01)


def test_pulse_spoilt_by_the_next_pulses_early_frequency_write_gets_a_fix_that_names_it(tmp_path):
    # the rig's synth settles in 100 us, so the second pulse (line 12) writes its frequency 100 us ahead: before
    # the first pulse starts. The first pulse already has its `frequency:`; a fix that says "give the clock_pulse
    # its frequency" or "set frequency: <the same value>" changes nothing when applied: it must point at line 12
    _copy_rig(CS_RIG, tmp_path, "rig.yaml")
    seq = tmp_path / "seq.yaml"
    seq.write_text(
        "seqgen: 1\nrig: rig.yaml\nsample: {species: Cs133, state: {F: 3, mF: 3}, atoms: 2e5, temperature: 1 uK}\n"
        "blocks:\n  - name: first\n    at: 1 ms\n    actions:\n"
        "      - clock_pulse: {drive: mw, angle: pi/2, duration: 38 us, frequency: 9.193683078 GHz, "
        "transition: [{F: 3, mF: 3}, {F: 4, mF: 3}]}\n"
        "  - name: second\n    after: first + 20 us\n    actions:\n"
        "      - clock_pulse: {drive: mw, angle: pi/2, duration: 38 us, frequency: 9.193733078 GHz, detuning: 50 kHz, "
        "transition: [{F: 3, mF: 3}, {F: 4, mF: 3}]}\n", encoding="utf-8")
    _, found, _ = check(seq)
    first = [f for f in found if f.line == 8 and f.code in ("hardware.synth-settling", "physics.pulse-detuned")]
    assert first, [(f.code, f.line) for f in found]
    for f in first:
        assert "12" in f.hint or "second" in f.hint, f"{f.code}: {f.hint}"
    # applied: the second block starts the proposed time later. The first pulse ends at 1 ms + 38 us; the second
    # writes 100 us (the rig's settling) before its start, first + 20 us: it must start at least 80 us later
    shifts = set()
    for f in first:
        m = re.search(r"start block 'second' at least ([0-9.]+) us later", f.hint)
        assert m, f"{f.code}: {f.hint}"
        shifts.add(float(m.group(1)))
    (shift,) = shifts
    assert 80.0 <= shift < 81.0
    text = seq.read_text(encoding="utf-8")
    seq.write_text(text.replace("after: first + 20 us", f"after: first + {20 + shift:g} us"), encoding="utf-8")
    _, found, _ = check(seq)
    assert not [(f.code, f.line) for f in found if f.line == 8 and f.severity != "note"]


def test_clock_pulse_frequency_write_before_t0_is_called_settling_and_its_fix_passes(tmp_path):
    # a clock pulse at t = 0 on a synth whose rig entry says `settling: 100 us`: its frequency is written 100 us
    # ahead of the pulse, before t = 0. That lead is the synth's settling time, not a latency, and the fix must
    # name the start the pulse needs (at least the settling time after t = 0)
    _copy_rig(CS_RIG, tmp_path, "rig.yaml")
    rig = (tmp_path / "rig.yaml").read_text(encoding="utf-8")
    assert re.search(r"^\s+settling: 100 us$", rig, re.M)
    body = ("seqgen: 1\nrig: rig.yaml\nsample: {species: Cs133, state: {F: 3, mF: 3}, atoms: 2e5, temperature: 1 uK}\n"
            "blocks:\n  - name: first\n    at: %s\n    actions:\n"
            "      - clock_pulse: {drive: mw, angle: pi/2, duration: 38 us, frequency: 9.193683078 GHz, "
            "transition: [{F: 3, mF: 3}, {F: 4, mF: 3}]}\n")
    seq = tmp_path / "seq.yaml"
    seq.write_text(body % "0 ms", encoding="utf-8")
    _, found, _ = check(seq)
    early = [f for f in found if f.code == "timing.before-start"]
    assert early, [(f.code, f.message) for f in found]
    assert "settling time" in early[0].message and "latency" not in early[0].message, early[0].message
    assert "100 us" in early[0].message, early[0].message
    m = re.search(r"start the pulse at least ([0-9.]+ [a-z]+) after t = 0", early[0].hint)
    assert m and m.group(1) == "100 us", early[0].hint
    seq.write_text(body % m.group(1), encoding="utf-8")
    _, found, _ = check(seq)
    assert not [f.message for f in found if f.code == "timing.before-start"]


def test_pulse_swept_during_reads_as_one_sentence():
    # a sweep of the pulse's synth starts during the pulse: the message gives the played frequency, its
    # distance from the line and the change during the pulse as one readable sentence
    _, found, _ = check(SEQUENCES / "faults" / "pulse_swept_during.yaml")
    hit = [f for f in found if f.code == "physics.pulse-detuned"]
    assert hit, [(f.code, f.message) for f in found]
    msg = hit[0].message
    m = re.search(r"plays ([0-9.]+) GHz at the middle of the pulse, ([0-9.]+) kHz from the .+ line at ([0-9.]+) GHz "
                  r"\(.+ bias\), and its synth changes by [0-9.]+ kHz during it \(sweep at line 11\); transfer", msg)
    assert m, msg
    assert " is " not in msg.split("during it")[1].split(";")[0], msg
    # the distance it names is the difference of the two frequencies it names (to the digits printed)
    assert abs(abs(float(m.group(1)) - float(m.group(3))) * 1e6 - float(m.group(2))) < 0.2, msg

def test_scattering_length_of_a_state_is_its_own_or_the_triplet_of_a_stretched_state():
    # stretched states (|mF| = F = I + 1/2) collide as a pure triplet; values (from memory): K-41 triplet 60.54 a0
    # (Phys. Rev. A 78, 012503 (2008)), Cs-133 triplet 2858.8 a0 (Phys. Rev. A 87, 032517 (2013)), Rb-87
    # |1,-1> 100.40 a0 (Phys. Rev. Lett. 88, 093201 (2002)); a state that is neither tabulated nor stretched has
    # no known length (the singlet and triplet alone do not give it)
    from seqgen.physics.atoms import get_species
    from seqgen.predict.species import scattering_length

    a0 = sc.physical_constants["Bohr radius"][0]
    k41, cs, rb = get_species("K41"), get_species("Cs133"), get_species("Rb87")
    assert scattering_length(k41, (2, 2)) / a0 == pytest.approx(60.54, rel=1e-6)
    assert scattering_length(k41, (2, -2)) / a0 == pytest.approx(60.54, rel=1e-6)
    assert scattering_length(cs, (4, 4)) / a0 == pytest.approx(2858.8, rel=1e-6)
    assert scattering_length(rb, (1, -1)) / a0 == pytest.approx(100.40, rel=1e-6)
    assert scattering_length(k41, (1, -1)) is None and scattering_length(cs, (3, 3)) is None
