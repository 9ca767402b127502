"""Findings that read what the hardware plays (`seqgen.predict.played`): a pulse's detuning from the frequency
its synth plays, a write inside a pulse or a trap ramp named beside the action's own line, magnetic holds of
the populated state. The numbers expected are the corpus files' own (their comments say why)."""

import pytest

from seqgen import predict as pr
from seqgen.pipeline import preflight

from .conftest import SEQUENCES

FAULTS = SEQUENCES / "faults"


def _hits(res, code):
    return [f for f in res.findings if f.code == code]


def test_a_pulse_without_frequency_plays_the_synth_idle_frequency():
    res = preflight(FAULTS / "pulse_without_frequency.yaml")
    rep = pr.pulse_analysis(res.shot, res.shot.actions("clock_pulse")[0])
    # the demo rig's mw synth spans 1.0 .. 2.5 GHz and idles at the bottom of its range, code 0
    assert rep.detuning_source == "played" and rep.frequency_hz == 1.0e9 and rep.source == pr.PLAYED
    (hit,) = _hits(res, "physics.pulse-detuned")
    assert hit.line == 10 and "without 'frequency:'" in hit.message and "idle" in hit.message


def test_a_sweep_during_a_pulse_is_named_beside_the_pulse():
    res = preflight(FAULTS / "pulse_swept_during.yaml")
    (hit,) = _hits(res, "physics.pulse-detuned")
    assert hit.line == 10 and "line 11" in hit.message and dict(hit.data)["other_line"] == 11
    rep = pr.pulse_analysis(res.shot, res.shot.actions("clock_pulse")[0])
    assert rep.freq_span_hz > 0 and rep.transfer < 0.5


def test_a_set_inside_a_trap_ramp_is_checked_as_played_and_named():
    res = preflight(FAULTS / "trap_ramp_overridden.yaml")
    lost = _hits(res, "physics.trap-lost")
    assert [f.line for f in lost] == [15]
    assert "line 16" in lost[0].message and dict(lost[0].data)["other_line"] == 16
    # the played power at the glitch is the set's 5 mW (0.05 V through the guide's 5 V/W, 16 bits over
    # 0..10 V, LSB 10 V / 2^16 (IEEE Std 1658-2011): the nearest code), not the ramp's
    lsb = 10.0 / 2 ** 16
    assert "5.005 mW" in lost[0].message and abs(round(0.025 / lsb) * lsb / 5 - 5.005e-3) < 5e-7


def test_plain_ramps_of_crossed_beams_are_checked_together():
    res = preflight(FAULTS / "plain_ramp_trap_lost.yaml")
    (hit,) = _hits(res, "physics.trap-lost")
    assert hit.line == 16 and "'cross_a'" in hit.message and "'cross_b'" in hit.message
    ws = [w for w in pr.trap_writes(res.shot) if w.t1 > w.t0]
    assert [w.beams for w in ws] == [("cross_a", "cross_b")]


def test_a_magnetic_hold_after_a_pi_pulse_holds_the_transferred_state():
    res = preflight(FAULTS / "magnetic_hold_after_pi_pulse.yaml")
    rep = pr.hold_analysis(res.shot, res.shot.actions("magnetic_hold")[0])
    assert rep.state == (2, -2) and rep.trappable is False
    (hit,) = _hits(res, "physics.state-not-trappable")
    assert hit.line == 14 and "|F=2, mF=-2>" in hit.message


def test_a_frequency_set_before_the_pulse_is_played_on_the_line():
    res = preflight(SEQUENCES / "good" / "rb87_frequency_set_before_pulse.yaml")
    rep = pr.pulse_analysis(res.shot, res.shot.actions("clock_pulse")[0])
    assert rep.detuning_source == "played" and abs(rep.detuning_hz) < 1.0
    assert rep.transfer == pytest.approx(0.5, abs=1e-3)  # a resonant pi/2 pulse (Rabi formula)
