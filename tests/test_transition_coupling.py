"""A drive's polarisation and calibration transition (rig `polarisation`, `calibrated_on`) through the pipeline:
rigs without them behave as before, a pulse's Rabi frequency is scaled by the ratio of magnetic-dipole matrix
elements, and physics.transition-forbidden reports a transition the polarisation cannot drive, with a fix that
passes when applied.

Outside references: the ratios are recomputed here from an exact diagonalisation of the ground-state
Hamiltonian H = A I.J + mu_B (g_J J_z + g_I I_z) B (Rev. Mod. Phys. 49, 31 (1977)) built with numpy's Kronecker
products, and checked against the zero-field Clebsch-Gordan ratio (table of the Review of Particle Physics,
Phys. Rev. D 98, 030001 (2018), section "Clebsch-Gordan coefficients"; from memory): <1 1; 1 1 | 2 2> = 1 and
<1 -1; 1 1 | 2 0> = sqrt(1/6), so |1,+1> -> |2,+2> couples sqrt(6) times more strongly than |1,-1> -> |2,0>.
Rb-87 data: "Rubidium 87 D Line Data" (alkali data compilation): nu_hfs = 6 834 682 610.904 Hz,
g_J = 2.00233113, g_I = -0.0009951414, I = 3/2. Constants from scipy.constants (CODATA).
"""

import math
import re
from pathlib import Path

import numpy as np
import pytest
from scipy import constants as sc

from seqgen.pipeline import preflight
from seqgen.predict.species import coupling_factor
from seqgen.predict.states import pulse_analysis
from seqgen.resolve.sequence import resolve
from seqgen.resolve.sources import load_sources

from .conftest import SEQUENCES
from .demo_copy import check, errors

MU_B = sc.physical_constants["Bohr magneton"][0]
NU, G_J, G_I, I_RB = 6_834_682_610.904, 2.00233113, -0.0009951414, 1.5
GOOD = SEQUENCES / "good" / "rb87_sigma_pulse.yaml"
FAULT = "sequences/faults/transition_forbidden.yaml"
CODE = "physics.transition-forbidden"


def shot_of(path):
    shot, findings = resolve(load_sources(path))
    assert shot is not None, [(f.code, f.message) for f in findings]
    return shot


def spin(j):
    """(J_z, J_+, J_-) for angular momentum j, basis m = j, j-1, ..., -j."""
    m = np.arange(j, -j - 1, -1)
    jp = np.zeros((len(m), len(m)))
    for k in range(1, len(m)):
        jp[k - 1, k] = math.sqrt(j * (j + 1) - m[k] * (m[k] + 1))
    return np.diag(m), jp, jp.T


def rb87_states(B):
    """{(F, mF): eigenvector} of the Rb-87 ground state at field B, from the full 8 x 8 Hamiltonian (J x I)."""
    jz, jp, jm = spin(0.5)
    iz, ip, im = spin(I_RB)
    e2, e4 = np.eye(2), np.eye(4)
    Jz, Jp, Jm = (np.kron(x, e4) for x in (jz, jp, jm))
    Iz, Ip, Im = (np.kron(e2, x) for x in (iz, ip, im))
    a = sc.h * NU / (I_RB + 0.5)
    h = a * (Iz @ Jz + 0.5 * (Ip @ Jm + Im @ Jp)) + MU_B * B * (G_J * Jz + G_I * Iz)
    w, v = np.linalg.eigh(h)
    mz = Jz + Iz
    out = {}
    for m in range(-2, 3):
        cols = [k for k in range(8) if abs(v[:, k] @ mz @ v[:, k] - m) < 1e-6]
        cols.sort(key=lambda k: w[k])
        for F, k in zip((2,) if abs(m) == 2 else (1, 2), cols):
            out[(F, m)] = v[:, k]
    mu_plus = -MU_B * (G_J * (-Jp) + G_I * (-Ip)) / math.sqrt(2)  # spherical q = +1 component of -mu_B (g_J J + g_I I)
    return out, mu_plus


# ----------------------------------------------------------------------------- rigs without the keys


def test_rigs_without_the_keys_keep_the_calibration_exactly():
    shot = shot_of(SEQUENCES / "na23_thermometry.yaml")
    for drive in shot.rig.drives.values():
        assert drive.polarisation is None and drive.calibrated_on is None
        assert coupling_factor(shot, drive) == 1.0
        assert coupling_factor(shot, drive, ((1, -1), (2, -2))) == 1.0


# ----------------------------------------------------------------------------- the scaled Rabi frequency


def test_sigma_pulse_on_another_transition_is_scaled_by_the_matrix_element_ratio():
    shot = shot_of(GOOD)
    drive = shot.rig.drives["mw"]
    assert drive.polarisation == "sigma+" and drive.calibrated_on == ((1, -1), (2, 0))
    B = shot.rig.bias_field_t
    assert B == pytest.approx(3e-4)
    states, mu_plus = rb87_states(B)
    ratio = abs(states[(2, 2)] @ mu_plus @ states[(1, 1)]) / abs(states[(2, 0)] @ mu_plus @ states[(1, -1)])
    assert ratio == pytest.approx(math.sqrt(6), rel=3e-3)  # zero-field Clebsch-Gordan ratio; 3 G mixes ~1e-3
    assert coupling_factor(shot, drive) != ratio  # the sample's own pair |1,1> -> |2,1> is pi: not this drive's
    act = next(a for a in shot.phys if a.kind == "clock_pulse")
    rep = pulse_analysis(shot, act)
    # the pulse asks for the amplitude of a pi pulse at 2 kHz x ratio per unit amplitude; the synth plays the
    # nearest code of its 14-bit word over [0, 1] (LSB 2^-14, ties up, the top code 1 - 2^-14: IEEE Std
    # 1658-2011, DAC terminology)
    asked = 0.5 / (2e3 * ratio * 102.06e-6)
    amp = min(math.floor(asked * 2 ** 14 + 0.5), 2 ** 14 - 1) / 2 ** 14
    assert rep.peak_rabi_hz == pytest.approx(2e3 * ratio * amp, rel=1e-9)
    assert rep.area == pytest.approx(2 * math.pi * 2e3 * ratio * amp * 102.06e-6, rel=1e-6)
    assert rep.area == pytest.approx(math.pi, rel=0.05)


def test_a_direction_splits_pi_and_sigma(tmp_path):
    # a linearly polarised field at 45 degrees to the bias axis: the clock transition gets cos 45 of the pi
    # element, |1,-1> -> |2,-2> sin 45 / sqrt 2 of its sigma- element
    rig = (SEQUENCES / "faults" / "rig_rb87_pi.yaml").read_text(encoding="utf-8")
    rig = rig.replace("polarisation: pi,", "polarisation: [1, 0, 1],")
    (tmp_path / "rig_rb87_pi.yaml").write_text(rig, encoding="utf-8")
    seq = (tmp_path / "s.yaml")
    seq.write_text("seqgen: 1\nrig: rig_rb87_pi.yaml\n"
                   "sample: {species: Rb87, state: {F: 1, mF: -1}, atoms: 2.0e5, temperature: 200 nK}\n"
                   "blocks:\n  - name: a\n    actions:\n      - set: {channel: mw.amp, value: 0}\n",
                   encoding="utf-8")
    shot = shot_of(seq)
    drive = shot.rig.drives["mw"]
    assert drive.polarisation == pytest.approx((math.sqrt(0.5), 0.0, math.sqrt(0.5)))
    # |<2,-2| mu_-1 |1,-1>| / |<2,0| mu_0 |1,0>| = 1 / sqrt(2/3) at zero field (PDG 1 x 1 table, from memory)
    got = coupling_factor(shot, drive, ((1, -1), (2, -2)))
    assert got == pytest.approx((math.sqrt(0.5) / math.sqrt(2)) / (math.sqrt(0.5) * math.sqrt(2 / 3)), rel=3e-3)


# ----------------------------------------------------------------------------- bad rig entries


@pytest.mark.parametrize("entry, code", [
    ("polarisation: circular,", "schema.bad-value"),
    ("polarisation: [0, 0, 0],", "schema.bad-rig"),
])
def test_bad_polarisation_is_a_finding_not_a_traceback(tmp_path, entry, code):
    rig = (SEQUENCES / "faults" / "rig_rb87_pi.yaml").read_text(encoding="utf-8")
    (tmp_path / "rig_rb87_pi.yaml").write_text(rig.replace("polarisation: pi,", entry), encoding="utf-8")
    seq = tmp_path / "s.yaml"
    seq.write_text((SEQUENCES / "faults" / "transition_forbidden.yaml").read_text(encoding="utf-8"), encoding="utf-8")
    found = errors(check(seq))
    assert found and found[0].file.endswith("rig_rb87_pi.yaml"), [(f.code, f.message) for f in found]
    assert found[0].line == 14 and found[0].hint


def test_calibrated_on_needs_a_polarisation(tmp_path):
    rig = (SEQUENCES / "faults" / "rig_rb87_pi.yaml").read_text(encoding="utf-8")
    (tmp_path / "rig_rb87_pi.yaml").write_text(rig.replace(" polarisation: pi,", ""), encoding="utf-8")
    seq = tmp_path / "s.yaml"
    seq.write_text((SEQUENCES / "faults" / "transition_forbidden.yaml").read_text(encoding="utf-8"), encoding="utf-8")
    found = errors(check(seq))
    assert [f.code for f in found] and "polarisation" in found[0].message


# ----------------------------------------------------------------------------- physics.transition-forbidden


def _apply_pulse_fix(path, hint):
    """Write the transition, duration and frequency a hint names into the pulse line of `path`."""
    p = Path(path)
    text = p.read_text(encoding="utf-8")
    for key, rx in (("transition", r"transition: (\[\{.*?\}\])"), ("duration", r"duration: ([0-9.]+ [a-z]+)"),
                    ("frequency", r"frequency: ([0-9.e+]+ Hz)")):
        m = re.search(rx, hint)
        assert m, (key, hint)
        value = m.group(1)
        pattern = rf"{key}: (\[\{{.*?\}}\])" if key == "transition" else rf"{key}: [^,}}]+"
        text, n = re.subn(pattern, f"{key}: {value}", text, count=1)
        assert n == 1, key
    p.write_text(text, encoding="utf-8")


def test_forbidden_pulse_fix_passes_when_applied(project):
    before = check(FAULT)
    hits = [f for f in before if f.code == CODE]
    assert len(hits) == 1 and hits[0].severity == "error" and hits[0].line == 9
    # pi polarisation from |1,-1> drives only |2,-1>; its element is sqrt(1/2) / sqrt(2/3) of the clock
    # transition's (PDG 1 x 1 table, from memory), so the pi pulse of the 8 kHz calibration stretches by that
    assert "{F: 2, mF: -1}" in hits[0].hint
    d = float(re.search(r"duration: ([0-9.]+) us", hits[0].hint).group(1)) * 1e-6
    assert d == pytest.approx(62.5e-6 / (math.sqrt(0.5) / math.sqrt(2 / 3)), rel=3e-3)
    _apply_pulse_fix(FAULT, hits[0].hint)
    after = check(FAULT)
    loud = [(f.code, f.message) for f in after
            if f.severity == "error" or (f.severity == "warning" and f.code.startswith("physics."))]
    assert loud == []


def test_sweep_on_a_forbidden_line_reports_once(tmp_path):
    rig = (SEQUENCES / "good" / "rig_rb87_sigma.yaml").read_text(encoding="utf-8")
    (tmp_path / "rig_rb87_pi.yaml").write_text(rig, encoding="utf-8")
    seq = tmp_path / "s.yaml"
    # |1,-1> -> |2,-1> near 6.8305 GHz at 3 G: a sigma+ horn cannot drive it
    seq.write_text("seqgen: 1\nrig: rig_rb87_pi.yaml\n"
                   "sample: {species: Rb87, state: {F: 1, mF: -1}, atoms: 2.0e5, temperature: 200 nK}\n"
                   "blocks:\n  - name: passage\n    at: 1 ms\n    actions:\n"
                   "      - set: {channel: mw.amp, value: 1}\n"
                   "      - sweep: {channel: mw, from: 6.8300 GHz, to: 6.8310 GHz, over: 10 ms}\n"
                   "      - set: {channel: mw.amp, value: 0}\n", encoding="utf-8")
    found = preflight(seq).findings
    assert [f.line for f in found if f.code == CODE] == [9]  # the sweep
    assert not [f for f in found if f.code == "physics.sweep-not-adiabatic"]


def test_calibration_on_a_transition_the_polarisation_cannot_drive(tmp_path):
    # sigma+ cannot drive the clock transition (Delta mF = 0): the calibration is contradictory, reported at the
    # rig's drive, and the Rabi frequency is used unscaled
    rig = (SEQUENCES / "good" / "rig_rb87_sigma.yaml").read_text(encoding="utf-8")
    bad = rig.replace("calibrated_on: {from: {F: 1, mF: -1}, to: {F: 2, mF: 0}}",
                      "calibrated_on: {from: {F: 1, mF: 0}, to: {F: 2, mF: 0}}")
    (tmp_path / "rig_rb87_sigma.yaml").write_text(bad, encoding="utf-8")
    seq = tmp_path / "rb87_sigma_pulse.yaml"
    seq.write_text(GOOD.read_text(encoding="utf-8"), encoding="utf-8")
    hits = [f for f in check(seq) if f.code == CODE]
    assert len(hits) == 1 and hits[0].file.endswith("rig_rb87_sigma.yaml") and hits[0].severity == "error"
    assert bad.split("\n")[hits[0].line - 1].strip() == "mw:"
    assert "polarisation" in hits[0].hint and "calibrated_on" in hits[0].hint
    shot = shot_of(seq)
    act = next(a for a in shot.phys if a.kind == "clock_pulse")
    # unscaled, the pi pulse asks for an amplitude above 1: the synth plays the top code of its 14-bit word over
    # [0, 1], 1 - 2^-14 (IEEE Std 1658-2011, DAC terminology)
    assert pulse_analysis(shot, act).peak_rabi_hz == pytest.approx(2e3 * (2 ** 14 - 1) / 2 ** 14, rel=1e-12)
