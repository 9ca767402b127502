"""The fixes of timing.ramp-too-fast, hardware.out-of-range and hardware.min-interval name a value that passes.

Each test copies the demo sequences into a temporary folder, runs `seqgen check FILE --json`, reads the value
the finding's fix names, writes it into the file, checks again, and asserts that the finding is gone and that
no error appeared in its place. The values the fixes must name are read off the demo rig's own text (its
devices' min_interval, its synth's frequency range, its channels' hard limits), not computed by seqgen.
"""

import re
from pathlib import Path

import pytest

from seqgen.pipeline import preflight

from .demo_copy import check, edit, errors

RIG = "sequences/rigs/na23_demo_rig.yaml"
_SCALE = {"ns": 1e-9, "us": 1e-6, "ms": 1e-3, "s": 1.0}


def one(findings, code):
    hits = [f for f in findings if f.code == code]
    assert hits, [(f.code, f.message) for f in findings]
    return hits[0]


def rig_text(pattern):
    """A value written in the demo rig, found by a regular expression with one group."""
    m = re.search(pattern, Path(RIG).read_text(encoding="utf-8"), re.S)
    assert m, pattern
    return m.group(1)


def seconds(text):
    number, unit = text.split()
    return float(number) * _SCALE[unit]


def assert_clean(path, code):
    after = check(path)
    assert not [g for g in after if g.code == code], [(g.code, g.message) for g in after if g.code == code]
    assert errors(after) == [], [(g.code, g.line, g.message, g.hint) for g in errors(after)]


# --- timing.ramp-too-fast -------------------------------------------------------------------------------------

def _ramp_file(path, at, over, channel="guide_power", to="0.5 W"):
    # the ramp back down keeps safety.left-on quiet; it starts well after the first ramp
    Path(path).write_text(
        "seqgen: 1\nrig: ../rigs/na23_demo_rig.yaml\nblocks:\n  - name: a\n"
        f"    at: {at}\n    actions:\n"
        f"      - ramp: {{channel: {channel}, to: {to}, over: {over}}}\n"
        f"      - ramp: {{channel: {channel}, to: 0 W, over: 1 ms, at: 1 ms}}\n"
        # a last block well after the ramps: the shot's last row stays clear of their latency-moved ends
        "  - name: tail\n    at: 5 ms\n    actions:\n      - set: {channel: guide_power, value: 0 W}\n",
        encoding="utf-8")
    return path


def ramp_fix_length(hint):
    m = re.search(r"make it at least (\S+ \S+) long", hint)
    assert m, hint
    return m.group(1)


def test_ramp_too_fast_fix_is_the_devices_minimum_interval_and_passes(project):
    path = "sequences/faults/ramp_too_fast.yaml"
    f = one(errors(check(path)), "timing.ramp-too-fast")
    length = ramp_fix_length(f.hint)
    # the rig's ao_main card: min_interval 2 us
    assert seconds(length) == pytest.approx(seconds(rig_text(r"ao_main:.*?min_interval: ([^,]+),")))
    edit(path, "over: 1 us}", f"over: {length}}}")
    assert_clean(path, "timing.ramp-too-fast")


@pytest.mark.parametrize("at", ["0.7 s", "3.3 s", "10.5 us", "1.2345678 s"])
def test_ramp_of_exactly_the_minimum_interval_passes_anywhere(project, at):
    # 0.7 s + 2 us - 0.7 s is 1.99999999999e-06 in floats: the check must count ticks, as the device does
    interval = rig_text(r"ao_main:.*?min_interval: ([^,]+),")
    path = _ramp_file("sequences/faults/_ramp_at.yaml", at, interval)
    found = preflight(path).findings
    assert not [f for f in found if f.code == "timing.ramp-too-fast"], [f.message for f in found]


@pytest.mark.parametrize("at,over,channel,to", [("0.7 s", "1.4 us", "guide_power", "0.5 W"),
                                                 ("10.5 us", "0.4 us", "cross_a_power", "1 W"),
                                                 ("0.3 s", "1 us", "sheet_power", "10 mW"),
                                                 ("1 ms", "1.5 us", "guide_power", "0.5 W")])
def test_ramp_too_fast_fix_passes_off_the_tick_and_with_latency(project, at, over, channel, to):
    path = _ramp_file("sequences/faults/_ramp_fast.yaml", at, over, channel, to)
    f = one(errors(check(path)), "timing.ramp-too-fast")
    edit(path, f"over: {over}}}", f"over: {ramp_fix_length(f.hint)}}}")
    assert_clean(path, "timing.ramp-too-fast")


# --- hardware.out-of-range ------------------------------------------------------------------------------------

def range_fix(hint):
    m = re.search(r"(raise|lower) the value to (?:at least|at most) (\S+ [^\s,]+)", hint)
    assert m, hint
    return m.group(1), m.group(2)


def test_synth_frequency_below_range_is_raised_to_the_lower_limit(project):
    path = "sequences/faults/out_of_range_low.yaml"
    f = one(errors(check(path)), "hardware.out-of-range")
    direction, value = range_fix(f.hint)
    assert direction == "raise"
    assert value == "1 GHz" and rig_text(r"frequency: \{range: \[([\d.]+) GHz") in ("1", "1.0")
    edit(path, "value: 500 MHz", f"value: {value}")
    assert_clean(path, "hardware.out-of-range")


def test_synth_frequency_above_range_is_lowered_to_the_upper_limit(project):
    path = "sequences/faults/out_of_range.yaml"
    f = one(errors(check(path)), "hardware.out-of-range")
    direction, value = range_fix(f.hint)
    assert direction == "lower"
    assert value == rig_text(r"frequency: \{range: \[[\d.]+ GHz, ([\d.]+ GHz)\]")
    edit(path, "value: 3 GHz", f"value: {value}")
    assert_clean(path, "hardware.out-of-range")


@pytest.mark.parametrize("channel,given,direction,expected", [
    # 12.5 V on a 0..10 V output at 5 V/W: the range ends at 2 W, but the rig's hard limit is 1.8 W
    ("guide_power", "2.5 W", "lower", r"guide_power:.*?hard_limit: \{min: 0 W, max: ([\d.]+ W)\}"),
    # -12 V on a -10..10 V output at 2 V/W: the range starts at -5 W, the hard limit at 0 W
    ("cross_a_power", "-6 W", "raise", r"cross_a_power:.*?hard_limit: \{min: ([\d.]+ W),"),
])
def test_calibrated_value_out_of_range_fix_names_a_value_in_the_channels_unit_that_passes(
        project, channel, given, direction, expected):
    path = Path("sequences/faults/_range.yaml")
    path.write_text("seqgen: 1\nrig: ../rigs/na23_demo_rig.yaml\nblocks:\n  - name: a\n    at: 0 s\n    actions:\n"
                    f"      - set: {{channel: {channel}, value: {given}}}\n"
                    f"      - set: {{channel: {channel}, value: 0 W, at: 1 ms}}\n", encoding="utf-8")
    f = one(errors(check(path)), "hardware.out-of-range")
    got_direction, value = range_fix(f.hint)
    assert got_direction == direction
    want = re.search(expected, Path(RIG).read_text(encoding="utf-8"), re.S).group(1)
    assert float(value.split()[0]) == pytest.approx(float(want.split()[0])) and value.split()[1] == "W"
    edit(path, f"value: {given}", f"value: {value}")
    assert_clean(path, "hardware.out-of-range")


# --- hardware.min-interval ------------------------------------------------------------------------------------

def shift_of(hint):
    m = re.search(r"move this edge at least (\S+ \S+) later", hint)
    assert m, hint
    return seconds(m.group(1))


def test_min_interval_blames_the_output_moved_by_its_latency_and_its_fix_passes(project):
    path = "sequences/faults/min_interval.yaml"
    f = one(errors(check(path)), "hardware.min-interval")
    # the shutter's block 'b' (line 13 writes its pulse), not block 'a' whose camera pulse was there first
    assert f.block == "b" and f.line == 13
    assert "'probe_shutter'" in f.message and "'camera'" in f.message
    # the rig gives the shutter a 3.2 ms rising latency: 13.2001 ms - 3.2 ms = 10.0001 ms
    assert rig_text(r"probe_shutter:.*?rise: ([\d.]+ ms)") == "3.2 ms"
    assert "latency 3.2 ms moved this edge from 13.2001 ms to 10.0001 ms" in f.message
    start = 13.2001e-3 + shift_of(f.hint)
    edit(path, "at: 13.2001 ms", f"at: {start * 1e3:.7g} ms")
    assert_clean(path, "hardware.min-interval")


def test_min_interval_names_the_block_that_wrote_the_row_not_the_one_spanning_it(project):
    path = "sequences/faults/min_interval_other_block.yaml"
    f = one(errors(check(path)), "hardware.min-interval")
    assert f.block == "c" and f.line == 21 and "'sheet_power'" in f.message and "'probe_power'" in f.message
    assert rig_text(r"sheet_power:.*?latency: (\S+ ns)") == "300 ns" and "latency 0.3 us moved" in f.message
    start = 5.0013e-3 + shift_of(f.hint)
    edit(path, "at: 5.0013 ms", f"at: {start * 1e3:.7g} ms")
    assert_clean(path, "hardware.min-interval")


def test_ramp_crowding_its_own_rows_asks_for_a_longer_ramp(project):
    path = "sequences/faults/ramp_too_fast.yaml"
    f = one(errors(check(path)), "hardware.min-interval")
    assert f.line == 8 and "'guide_power'" in f.message
    m = re.search(r"make the ramp at least (\S+ \S+) long", f.hint)
    assert m and seconds(m.group(1)) == pytest.approx(seconds(rig_text(r"ao_main:.*?min_interval: ([^,]+),")))
    edit(path, "over: 1 us}", f"over: {m.group(1)}}}")
    assert_clean(path, "hardware.min-interval")
