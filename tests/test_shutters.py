"""Beam shutters: an image needs its probe beam's shutter open, as played, for the whole probe pulse.

The expected windows come from the fault files' own numbers (the probe pulse's start and duration, the
shutter's edge and its jitter in the rig file), not from the rule under test.
"""

from pathlib import Path

import pytest

from seqgen.pipeline import preflight

from .conftest import SEQUENCES

FAULTS = SEQUENCES / "faults"
GOOD = SEQUENCES / "good"


def _codes(findings, code="hardware.beam-shuttered"):
    return [f for f in findings if f.code == code]


def _copy(tmp_path, name: str, text: str) -> Path:
    """A sequence beside a copy of the caesium rig (inside a project root)."""
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")
    (tmp_path / "good").mkdir(exist_ok=True)
    (tmp_path / "good" / "rig_cs133.yaml").write_text((GOOD / "rig_cs133.yaml").read_text(encoding="utf-8"),
                                                      encoding="utf-8")
    (tmp_path / "faults").mkdir(exist_ok=True)
    path = tmp_path / "faults" / name
    path.write_text(text, encoding="utf-8")
    return path


def test_a_shutter_never_opened_blocks_the_image_for_the_whole_pulse():
    (f,) = _codes(preflight(FAULTS / "shutter_never_opened.yaml").findings)
    assert f.severity == "error" and "for the whole shot" in f.message
    data = dict(f.data)
    assert data["pulse_end_s"] - data["pulse_start_s"] == pytest.approx(40e-6)  # the file's `duration: 40 us`


def test_a_shutter_opened_during_the_pulse_names_when_it_opens():
    (f,) = _codes(preflight(FAULTS / "shutter_opened_late.yaml").findings)
    data = dict(f.data)
    # the set at `at: 20 us` after the pulse's start; its latency is compensated, so it opens then as played
    assert data["closed_at_s"] == pytest.approx(data["pulse_start_s"], abs=2e-6)
    assert f"until t=" in f.message


def test_an_edge_within_the_jitter_is_a_warning_and_the_fix_passes(tmp_path):
    (f,) = _codes(preflight(FAULTS / "shutter_within_jitter.yaml").findings)
    data = dict(f.data)
    assert f.severity == "warning"
    assert data["jitter_s"] == pytest.approx(100e-6)  # rig_cs133.yaml: probe_shutter jitter: 100 us
    assert data["gap_s"] == pytest.approx(70e-6, abs=2e-6)  # the file's `hold: {duration: 70 us}`
    text = (FAULTS / "shutter_within_jitter.yaml").read_text(encoding="utf-8")
    wait = f.hint.split("leave at least ")[1].split(" between")[0]
    fixed = text.replace("hold: {duration: 70 us}", f"hold: {{duration: {wait}}}")
    assert not _codes(preflight(_copy(tmp_path, "fixed.yaml", fixed)).findings)


def test_the_proposed_opening_passes_when_applied(tmp_path):
    f = _codes(preflight(FAULTS / "shutter_never_opened.yaml").findings)[0]
    command = f.hint.split("`")[1]  # `- set: {channel: probe_shutter, value: 1}`
    lead = f.hint.split("at least ")[1].split(" before")[0]
    text = (FAULTS / "shutter_never_opened.yaml").read_text(encoding="utf-8")
    fixed = text.replace("      - hold: {duration: 100 us}\n      - image:",
                         f"      {command}\n      - hold: {{duration: {lead}}}\n      - image:")
    assert fixed != text
    assert not _codes(preflight(_copy(tmp_path, "fixed.yaml", fixed)).findings)


def test_the_good_sequences_with_shuttered_probes_stay_quiet():
    for name in ("cs133_crossed_clock_sg.yaml", "k41_bec_rf_sg.yaml"):
        assert not _codes(preflight(GOOD / name).findings), name


@pytest.mark.parametrize("shutter, code", [("probe_power", "schema.bad-rig"), ("probe_shuter", "schema.unknown-name")])
def test_a_bad_shutter_in_the_rig_is_a_finding_at_its_line(tmp_path, shutter, code):
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")
    rig = (GOOD / "rig_cs133.yaml").read_text(encoding="utf-8").replace("shutter: probe_shutter", f"shutter: {shutter}")
    (tmp_path / "rig.yaml").write_text(rig, encoding="utf-8")
    seq = (GOOD / "cs133_crossed_clock_sg.yaml").read_text(encoding="utf-8").replace("rig: rig_cs133.yaml", "rig: rig.yaml")
    (tmp_path / "s.yaml").write_text(seq, encoding="utf-8")
    found = [f for f in preflight(tmp_path / "s.yaml").findings if f.code == code]
    line = next(i for i, ln in enumerate(rig.splitlines(), 1) if f"shutter: {shutter}" in ln)
    assert found and found[0].file.endswith("rig.yaml") and found[0].line == line


def _with_close(tmp_path, name: str, close_at: str) -> Path:
    """The caesium good sequence with its probe shutter closed `close_at` after the image action starts."""
    text = (GOOD / "cs133_crossed_clock_sg.yaml").read_text(encoding="utf-8").replace("rig: rig_cs133.yaml",
                                                                                      "rig: ../good/rig_cs133.yaml")
    old = ("      - image: {setup: side, probe_power: 30 uW, duration: 40 us}\n      - hold: {duration: 1 ms}\n"
           "      - set: {channel: probe_shutter, value: 0}")
    assert old in text
    new = ("      - image: {setup: side, probe_power: 30 uW, duration: 40 us}\n"
           f"      - set: {{channel: probe_shutter, value: 0, at: {close_at}}}")
    return _copy(tmp_path, name, text.replace(old, new))


def test_a_shutter_closed_during_the_pulse_says_to_close_it_later_and_that_passes(tmp_path):
    """Open before the 40 us pulse, closed 10 us into it: the fix is a later close, by at least the 100 us
    jitter after the pulse's end (rig_cs133.yaml), counted from the image's start: 140 us (+1 us margin)."""
    (f,) = _codes(preflight(_with_close(tmp_path, "closed.yaml", "110 us")).findings)
    assert f.severity == "error" and "close the shutter after the pulse" in f.hint
    wait = f.hint.split("to at least ")[1].split(" after")[0]
    assert wait.endswith("us") and float(wait.split()[0]) >= 100
    # the image starts at the action after the 100 us hold: the pulse runs from 100 us to 140 us in the block
    later = float(wait.split()[0]) + 140
    assert not _codes(preflight(_with_close(tmp_path, "later.yaml", f"{later:g} us")).findings)


def test_a_close_exactly_one_jitter_after_the_pulse_is_quiet(tmp_path):
    """The fix of the jitter warning moves the close to exactly the jitter after the pulse: that passes."""
    (f,) = _codes(preflight(_with_close(tmp_path, "near.yaml", "200 us")).findings)
    assert f.severity == "warning"
    assert not _codes(preflight(_with_close(tmp_path, "exact.yaml", "240 us")).findings)  # 140 us + 100 us jitter


def test_an_edge_under_half_the_jitter_from_the_pulse_is_an_error(tmp_path):
    """20 us between the shutter's opening and the pulse against its 100 us jitter (rig_cs133.yaml): under half
    the jitter, an error (about half the shots or more lose part of the pulse)."""
    text = (FAULTS / "shutter_within_jitter.yaml").read_text(encoding="utf-8").replace("hold: {duration: 70 us}",
                                                                                       "hold: {duration: 20 us}")
    (f,) = _codes(preflight(_copy(tmp_path, "close.yaml", text)).findings)
    assert f.severity == "error" and dict(f.data)["gap_s"] == pytest.approx(20e-6, abs=2e-6)
