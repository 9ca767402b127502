"""A synth's frequency settling time (rig: `settling`): the amplitude must not rise before the frequency written
last has settled. The expected times come from the rig file (200 us) and the sequence (pulse at 5 ms)."""

import pytest

from seqgen import preflight

from .conftest import SEQUENCES

SETTLING_S = 200e-6  # sequences/faults/rig_rb87_microwave.yaml
PULSE_AT_S = 5e-3  # the 'flip' block starts 5 ms after 'hold'


def _codes(path):
    return [f for f in preflight(path).findings if f.code == "hardware.synth-settling"]


def test_frequency_written_with_the_pulse_is_reported_with_both_lines():
    found = _codes(SEQUENCES / "faults" / "synth_settling.yaml")
    assert len(found) == 1
    f = found[0]
    assert f.line == 15 and "synth_settling.yaml:14" in f.message
    assert dict(f.data)["gap_s"] == pytest.approx(0.0, abs=1e-12)
    assert "4.8 ms" in f.hint  # 5 ms - 200 us


@pytest.mark.parametrize("lead_us,fires", [(200, False), (150, True), (250, False)])
def test_applying_the_fix_silences_it(tmp_path, lead_us, fires):
    src = (SEQUENCES / "faults" / "synth_settling.yaml").read_text(encoding="utf-8")
    rig = (SEQUENCES / "faults" / "rig_rb87_microwave.yaml").read_text(encoding="utf-8")
    (tmp_path / "rig_rb87_microwave.yaml").write_text(rig, encoding="utf-8")
    # the fix: the frequency in a block of its own, `lead_us` before the pulse
    moved = src.replace("      - set: {channel: mw.freq, value: 6.834683 GHz}\n", "").replace(
        "  - name: flip\n",
        f"  - name: tune\n    after: hold + {5000 - lead_us} us\n    actions:\n"
        f"      - set: {{channel: mw.freq, value: 6.834683 GHz}}\n  - name: flip\n")
    path = tmp_path / "moved.yaml"
    path.write_text(moved, encoding="utf-8")
    assert bool(_codes(path)) is fires


def test_a_pulse_with_its_own_frequency_writes_it_a_settling_time_ahead():
    res = preflight(SEQUENCES / "good" / "rb87_clock_pulse_settled.yaml")
    freq = [s for s in res.shot.segments if s.output == "mw.freq"]
    amp_on = [s for s in res.shot.segments if s.output == "mw.amp" and s.v1 > 0]
    assert [s.t0 for s in freq] == pytest.approx([PULSE_AT_S - SETTLING_S])
    assert [s.t0 for s in amp_on] == pytest.approx([PULSE_AT_S])
    assert not _codes(SEQUENCES / "good" / "rb87_clock_pulse_settled.yaml")
