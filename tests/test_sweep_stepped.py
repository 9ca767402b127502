"""A synth frequency sweep without a tolerance is a staircase told as a note, not a warning against half an LSB
of a 32-bit word; with a tolerance of its own it is held to it, and the bound the note proposes passes.

Outside reference: a step-and-hold output of slope y' with rows h apart is off the line by up to y' h / 2
(A Practical Guide to Splines, Springer (1978)); 200 kHz over 20 ms stepped every 4 us (the demo rig's
synthesizer's minimum interval) is off by at most 1e7 Hz/s x 4 us / 2 = 20 Hz.
"""

import pytest

from seqgen.pipeline import preflight

from .conftest import SEQUENCES

SWEEP = """seqgen: 1
rig: rigs/na23_demo_rig.yaml
blocks:
  - name: rf
    at: 1 ms
    actions:
      - set: {{channel: mw.amp, value: 0.5}}
      - sweep: {{channel: mw.freq, from: 1.7716 GHz, to: 1.7718 GHz, over: 20 ms{extra}}}
      - set: {{channel: mw.amp, value: 0}}
"""


def _check(tmp_path, extra=""):
    (tmp_path / "rigs").mkdir(exist_ok=True)
    rig = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
    (tmp_path / "rigs" / "na23_demo_rig.yaml").write_text(rig, encoding="utf-8")
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")
    seq = tmp_path / "sweep.yaml"
    seq.write_text(SWEEP.format(extra=extra), encoding="utf-8")
    return preflight(seq).findings


def test_a_sweep_without_tolerance_is_a_note_within_the_step_and_hold_bound(tmp_path):
    found = _check(tmp_path)
    assert [(f.code, f.severity) for f in found] == [("hardware.sweep-stepped", "note")]
    err = dict(found[0].data)["max_error"]
    assert 0 < err <= 1e7 * 4e-6 / 2 + 0.35  # the bound plus one LSB of the word (1.5 GHz / 2^32, 0.35 Hz)
    assert found[0].line == 8


@pytest.mark.parametrize("tol, code", [("10 Hz", "hardware.ramp-undersampled"), ("25 Hz", None)])
def test_a_sweep_with_a_tolerance_is_held_to_it(tmp_path, tol, code):
    found = _check(tmp_path, f", tolerance: {tol}")
    assert [f.code for f in found] == ([code] if code else [])


def test_the_proposed_tolerance_passes_when_applied(tmp_path):
    note = _check(tmp_path)[0]
    proposed = note.hint.split("`tolerance: ")[1].split("`")[0]
    assert _check(tmp_path, f", tolerance: {proposed}") == []
