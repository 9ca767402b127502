"""physics.nothing-imaged: a state-selective image (the rig's `imaged_F`) of a level that holds no atoms.

Expected values are written out here: the demo's probe saturation 2 P / (pi w^2) / I_sat at the cloud's centre
(Sodium D Line Data, from memory: tests/atom_reference.py; the demo's 40 uW and the rig's 2.5 mm waist), and
the |F=1, mF=-1> -> |F=2, mF=-2> line of the demo's own `clock_freq` (1.7691054 GHz at its 1.2 G bias)."""

from __future__ import annotations

import math

import pytest

import seqgen
from seqgen.predict.images import NONE_IMAGED, predicted_image

from .atom_reference import I_SAT
from .demo_copy import check, edit

FAULT = "sequences/faults/nothing_imaged.yaml"
FAULT_RIG = "sequences/faults/rig_na23_state_selective.yaml"
DEMO_RIG = "sequences/rigs/na23_demo_rig.yaml"
THERMO = "sequences/na23_thermometry.yaml"
CODE = "physics.nothing-imaged"
WAIST = 2.5e-3  # the demo rig's probe beam


def _hits(path):
    return [f for f in check(path) if f.code == CODE]


def _flagged(findings):
    return {(f.code, f.line) for f in findings if f.severity in ("error", "warning")}


def test_the_fault_warns_with_the_level_and_where_the_atoms_are(project):
    (f,) = _hits(FAULT)
    assert f.severity == "warning" and f.line == 10
    assert "F=2" in f.message and "|F=1, mF=-1> (100 %)" in f.message
    assert "'imaged_F: 1'" in f.hint and f.data["imaged_F"] == 2


def test_imaging_the_populated_level_passes(project):
    before = check(FAULT)
    edit(FAULT_RIG, "imaged_F: 2}", "imaged_F: 1}")
    after = check(FAULT)
    assert not [g for g in after if g.code == CODE]
    assert _flagged(after) <= _flagged(before)


def test_a_repumped_probe_passes(project):
    edit(FAULT_RIG, ", imaged_F: 2}", "}")
    assert not _hits(FAULT)


def test_a_pi_pulse_into_the_imaged_level_passes(project):
    # 5 kHz at amplitude 1 (the helper rig): a pi pulse lasts 1 / (2 x 5 kHz) = 100 us
    edit(FAULT, "      - image:", "      - clock_pulse: {drive: mw, angle: pi, duration: 100 us, frequency: 1.7691054 GHz,"
                                   " transition: [{F: 1, mF: -1}, {F: 2, mF: -2}]}\n      - image:")
    assert not _hits(FAULT)


def test_a_pulse_that_leaves_the_imaged_level_below_the_detection_floor_still_warns(project):
    # an area of 2 pi x 5 kHz x 0.05 x 4 us = 6.3e-3 moves sin^2(3.1e-3) = 1e-5 of 6e5 atoms, 6 atoms: below
    # the 100-atom floor
    edit(FAULT, "      - image:", "      - clock_pulse: {drive: mw, amplitude: 0.05, duration: 4 us, "
                                   "frequency: 1.7691054 GHz, transition: [{F: 1, mF: -1}, {F: 2, mF: -2}]}\n"
                                   "      - image:")
    (f,) = _hits(FAULT)
    assert "below the detection floor" in f.message and "|F=2, mF=-2>" in f.message


def test_the_demo_copied_with_a_state_selective_camera_warns_and_keeps_the_probe_saturation(project):
    shot0 = seqgen.preflight(THERMO).shot
    img0 = shot0.actions("image")[0]
    plain = predicted_image(shot0, img0)
    edit(DEMO_RIG, "lens_distance: 60 mm", "lens_distance: 60 mm, imaged_F: 2")
    assert _hits(THERMO)
    res = seqgen.preflight(THERMO)
    img = res.shot.actions("image")[0]
    pred = predicted_image(res.shot, img)
    assert pred.peak_od == 0 and NONE_IMAGED in pred.flags
    # the probe still shines on the atoms: I/I_sat there as without imaged_F, from the probe's Gaussian beam
    x, _, z = seqgen.image_prediction(res.shot, img).components[0].positions[0]
    s = 2 * 40e-6 / (math.pi * WAIST ** 2) / I_SAT * math.exp(-2 * (x * x + z * z) / WAIST ** 2)
    assert pred.saturation_at_atoms == pytest.approx(s, rel=1e-3)
    assert pred.saturation_at_atoms == pytest.approx(plain.saturation_at_atoms, rel=1e-9)
    assert pred.saturation_at_atoms == pytest.approx(0.063, abs=0.0005)  # README: 0.063 at the atoms


def test_the_barrier_demo_with_a_state_selective_camera_stays_quiet(project):
    # its analysis pulse puts half of the atoms in |F=2, mF=-2>, which an F=2 camera sees
    edit(DEMO_RIG, "lens_distance: 60 mm", "lens_distance: 60 mm, imaged_F: 2")
    assert not _hits("sequences/na23_barrier_scatter.yaml")


def test_explain_names_the_code():
    from seqgen.codes import explain

    text = explain(CODE)
    assert "imaged_F" in text and "Rev. Mod. Phys. 49, 31 (1977)" in text
