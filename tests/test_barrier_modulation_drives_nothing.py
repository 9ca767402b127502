"""A barrier's modulation that drives nothing: a transition that changes mF (physics.transition-forbidden, a
warning for a barrier) or whose states hold no atoms (physics.transition-unpopulated), with the off-resonance
warning kept. Lines are written out with the Breit-Rabi formula (tests/atom_reference.py: Sodium D Line Data,
from memory; Phys. Rev. 38, 2082 (1931)) at the demo rig's 1.2 G bias."""

from __future__ import annotations

import re

import pytest

from .atom_reference import BIAS, breit_rabi_hz
from .demo_copy import check, edit

CHANGES_MF = "sequences/faults/barrier_modulation_changes_mf.yaml"
UNPOPULATED = "sequences/faults/barrier_modulation_unpopulated.yaml"
SCATTER = "sequences/na23_barrier_scatter.yaml"
DRIVES_NOTHING = ("physics.transition-forbidden", "physics.transition-unpopulated")
# the sheet's differential light shift moves the line by some tens of Hz (the demo's comment: 1.769946343 GHz
# with it); the modulation must sit within the pulse's Fourier width, 0.886 / 20 ms = 44 Hz, of it
LIGHT_SHIFT_BOUND_HZ = 100.0


def _line(a, b):
    return abs(breit_rabi_hz(*b, BIAS) - breit_rabi_hz(*a, BIAS))


def _flagged(findings, line=18):
    return {f.code for f in findings if f.severity in ("error", "warning") and f.line == line}


def _apply_transition_fix(path, f):
    """The fix names 'transition: [...]' and 'modulation frequency: N Hz': both written into the barrier."""
    tr = re.search(r"transition: (\[\{[^]]*\])", f.hint).group(1)
    hz = re.search(r"frequency: ([0-9.]+) Hz", f.hint).group(1)
    text = open(path, encoding="utf-8").read()
    text = re.sub(r"frequency: [0-9.]+ GHz, depth: 0.2, transition: \[[^]]*\]",
                  f"frequency: {hz} Hz, depth: 0.2, transition: {tr}", text)
    open(path, "w", encoding="utf-8").write(text)
    return tr, float(hz)


def test_a_transition_that_changes_mf_warns_that_the_modulation_drives_nothing(project):
    found = check(CHANGES_MF)
    (f,) = [g for g in found if g.code == "physics.transition-forbidden"]
    assert f.severity == "warning" and f.line == 18
    assert "drives nothing" in f.message and "equal mF" in f.message and "|F=1, mF=-1> (100 %)" in f.message
    # the off-resonance warning stays, against the named pair's Breit-Rabi line
    (off,) = [g for g in found if g.code == "physics.modulation-off-resonance"]
    assert off.data["offset_hz"] == pytest.approx(1.7720e9 - _line((2, 2), (1, 1)), abs=10.0)


@pytest.mark.parametrize("path", [CHANGES_MF, UNPOPULATED])
def test_the_fix_couples_the_populated_state_on_its_line_and_passes(project, path):
    before = check(path)
    f = next(g for g in before if g.code in DRIVES_NOTHING)
    tr, hz = _apply_transition_fix(path, f)
    assert tr == "[{F: 1, mF: -1}, {F: 2, mF: -1}]"
    assert hz == pytest.approx(_line((1, -1), (2, -1)), abs=LIGHT_SHIFT_BOUND_HZ)
    after = check(path)
    assert not _flagged(after) & {*DRIVES_NOTHING, "physics.modulation-off-resonance"}, _flagged(after)
    assert not [g for g in after if g.severity == "error"]


def test_a_modulation_on_empty_states_warns_with_where_the_atoms_are(project):
    (f,) = [g for g in check(UNPOPULATED) if g.code == "physics.transition-unpopulated"]
    assert f.severity == "warning" and "|F=1, mF=+1> -> |F=2, mF=+1>" in f.message
    assert "|F=1, mF=-1> (100 %)" in f.message and "drives nothing" in f.message


def test_the_off_resonance_fix_on_a_pair_that_changes_mf_is_its_bare_line(project):
    found = check(CHANGES_MF)
    off = next(g for g in found if g.code == "physics.modulation-off-resonance")
    hz = float(re.search(r"frequency: ([0-9.]+) Hz", off.hint).group(1))
    assert hz == pytest.approx(_line((2, 2), (1, 1)), abs=10.0)
    edit(CHANGES_MF, "frequency: 1.7720 GHz", f"frequency: {hz:.10g} Hz")
    assert "physics.modulation-off-resonance" not in _flagged(check(CHANGES_MF))


def test_the_demo_modulation_on_the_populated_state_stays_quiet(project):
    assert not {f.code for f in check(SCATTER) if f.severity in ("error", "warning")}


def test_a_pulse_that_fills_the_modulated_pair_first_keeps_it_quiet(project):
    # a pi pulse |1,-1> -> |2,0> after the push, just before the barrier (1 / (2 x 5 kHz) = 100 us at the demo
    # drive's 5 kHz), fills |2,0>: the populations at the barrier count, not the sample state
    edit(UNPOPULATED, "      # the modulation couples",
         f"      - clock_pulse: {{drive: mw, angle: pi, duration: 100 us, frequency: {_line((1, -1), (2, 0)):.10g} Hz, "
         "transition: [{F: 1, mF: -1}, {F: 2, mF: 0}]}\n      # the modulation couples")
    edit(UNPOPULATED, "transition: [{F: 1, mF: 1}, {F: 2, mF: 1}]", "transition: [{F: 2, mF: 0}, {F: 1, mF: 0}]")
    found = check(UNPOPULATED)
    assert any(g.code == "physics.barrier-transmission" and g.line == 19 for g in found)
    assert not _flagged(found, line=19) & set(DRIVES_NOTHING)
