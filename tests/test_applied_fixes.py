"""Every fix a finding proposes must pass when applied.

Each test breaks one line of a demo (copied into a temporary folder), runs `seqgen check FILE --json`, takes
the value the finding's fix names ("write '30 uW'", "did you mean 'dio_main'?"), writes it into the file at
the finding's line and column, checks again, and asserts that the finding is gone and that no error
appeared in its place. The units the fixes are expected to name are those the demo rig's own text uses
(its probe channel is calibrated in uW, its beam waists are written in um), read off the file, not
computed by seqgen.
"""

import math
import re
from pathlib import Path

import pytest

from seqgen.pipeline import preflight

from .demo_copy import check, edit, errors, proposal, scalar_end, si, write_key

THERMO = "sequences/na23_thermometry.yaml"
SCATTER = "sequences/na23_barrier_scatter.yaml"
RIG = "sequences/rigs/na23_demo_rig.yaml"
PREP = "sequences/common/na23_prep.yaml"


_PROPOSED = (re.compile(r"\bwrite '([^']+)'"), re.compile(r"\be\.g\. '([^']+)'"),
             re.compile(r"did you mean '([^']+)'\?"))


def proposed(hint: str) -> str:
    """The value a fix names: the first quoted text after 'write', 'e.g.' or 'did you mean'."""
    for rx in _PROPOSED:
        m = rx.search(hint or "")
        if m:
            return m.group(1)
    raise AssertionError(f"the fix names no value to write: {hint!r}")


def apply_fix(f) -> str:
    """Write the value the fix of finding `f` names into its file, at its line: at its column (after the key
    that stands there), or after the key a 'key: value' fix names. Returns the value written."""
    value = proposed(f.hint)
    p = Path(f.file)
    lines = p.read_text(encoding="utf-8").split("\n")
    line = lines[f.line - 1]
    m = re.fullmatch(r"([A-Za-z_][A-Za-z0-9_]*): (.+)", value)
    if m:
        key, value = m.groups()
        at = re.search(rf"\b{key}:\s*(\{{\s*value:\s*)?", line)
        assert at, (key, line)
        start = at.end()
    else:
        start = f.column - 1
        at = re.compile(r"[A-Za-z_][A-Za-z0-9_]*:\s+").match(line, start)  # the position of a key: its value
        start = at.end() if at else start
    lines[f.line - 1] = line[:start] + value + line[scalar_end(line, start):]
    p.write_text("\n".join(lines), encoding="utf-8")
    return value


def fix_and_recheck(path, code, line=None):
    """Check `path`: one error `code` (at `line`); apply its fix; check again. Returns (finding, value written,
    findings after)."""
    before = errors(check(path))
    hits = [f for f in before if f.code == code and (line is None or f.line == line)]
    assert hits, [(f.code, f.line, f.message) for f in before]
    f = hits[0]
    value = apply_fix(f)
    after = check(path)
    assert not [g for g in after if g.code == code and g.file == f.file and g.line == f.line]
    assert errors(after) == [], [(g.code, g.line, g.message, g.hint) for g in errors(after)]
    return f, value, after


# ----------------------------------------------------------------------------- 1. units of missing / wrong-unit fixes


def test_probe_power_without_unit_takes_the_channels_unit(project):
    # the rig calibrates probe_power in uW (calibration: {quantity: uW, ...}, hard_limit: {max: 90 uW})
    edit(THERMO, "probe_power: 40 uW", "probe_power: 30")
    f, value, _ = fix_and_recheck(THERMO, "schema.missing-unit")
    assert value == "30 uW"


def test_power_param_without_unit_fits_the_channels_hard_limit(project):
    # cross_b_power is calibrated in W with hard_limit max 4.5 W: a 20 W dimple would be refused, 20 mW is meant
    edit(SCATTER, "dimple_power: 20 mW", "dimple_power: 20")
    f, value, _ = fix_and_recheck(SCATTER, "schema.missing-unit")
    assert value == "20 mW"


def test_waist_in_a_power_unit_is_read_as_the_length_one_letter_away(project):
    edit(RIG, "waist: 45 um, waist_y", "waist: 60 uW, waist_y")
    f, value, _ = fix_and_recheck(THERMO, "schema.wrong-dimension")
    assert "did you mean um" in f.message
    assert value == "60 um"


def test_bare_waist_takes_the_unit_of_the_other_waists(project):
    # the rig writes the waists of its trap and barrier beams in um
    edit(RIG, "waist: 45 um, waist_y", "waist: 60, waist_y")
    f, value, _ = fix_and_recheck(THERMO, "schema.missing-unit")
    assert value == "60 um"


def test_voltage_unit_for_a_power_is_read_as_the_power_unit(project):
    edit(SCATTER, "sheet_power: 0.48 mW", "sheet_power: 0.48 mV")
    f, value, _ = fix_and_recheck(SCATTER, "schema.wrong-dimension")
    assert "did you mean mW" in f.message
    assert value == "0.48 mW"


def test_mass_unit_for_a_frequency_is_read_as_the_frequency_unit(project):
    edit(RIG, "rabi_per_amplitude: 5 kHz", "rabi_per_amplitude: 5 kg")
    f, value, _ = fix_and_recheck(THERMO, "schema.wrong-dimension")
    assert value == "5 kHz"


def test_bare_synth_frequency_takes_the_unit_of_the_synth_range(project):
    # the rig's sheet_eom synth spans 1.0 GHz to 2.5 GHz
    edit(SCATTER, "mod_freq: 1.769946343 GHz", "mod_freq: 1.769946343")
    f, value, _ = fix_and_recheck(SCATTER, "schema.missing-unit")
    assert "'mod_freq: 1.769946343 GHz'" in f.hint
    assert value == "1.769946343 GHz"


_QTY_SPOT = re.compile(r"(?<=[:\[,] )([-+]?\d+(?:\.\d*)?(?:[eE][-+]?\d+)?) ([A-Za-z][A-Za-z/^0-9]*)(?=[,}\]]|\s*$|\s+#)")


def _spots(rel):
    """(line index, start, end, number) of every '<number> <unit>' written as a whole value in `rel`."""
    out = []
    for i, line in enumerate(Path(rel).read_text(encoding="utf-8").split("\n")):
        code = line.split(" #")[0]
        for m in _QTY_SPOT.finditer(code):
            if float(m.group(1)) != 0:  # a bare 0 fits every dimension: no finding to fix
                out.append((i, m.start(), m.end(), m.group(1)))
    return out


def _errors_of(main_files):
    return [f for path in main_files for f in errors(preflight(path).findings)]


@pytest.mark.parametrize("rel, main_files", [(THERMO, (THERMO,)), (SCATTER, (SCATTER,)), (PREP, (SCATTER,)),
                                             (RIG, (THERMO,))])
def test_every_quantity_of_the_demos_written_without_its_unit_is_fixed_by_the_hint(project, rel, main_files):
    """Each '<number> <unit>' value of a demo file, written as its bare number, gives a missing-unit finding
    whose fix, applied, leaves no error (the scan of the scatter demo is read at its params' values)."""
    path = Path(rel)
    original = path.read_text(encoding="utf-8")
    spots = _spots(rel)
    assert len(spots) >= 5
    failures = []
    for i, start, end, number in spots:
        lines = original.split("\n")
        lines[i] = lines[i][:start] + number + lines[i][end:]
        path.write_text("\n".join(lines), encoding="utf-8")
        found = [f for f in _errors_of(main_files) if f.code in ("schema.missing-unit", "schema.wrong-dimension")]
        if not found and ("scan:" in lines[i] or (rel == PREP and "evap_end:" in lines[i])):
            continue  # read by the scan, not by one preflight; evap_end of the prep is given by both use entries
        # a param used twice gives one finding per use, all at its definition with the same fix
        if {(f.code, f.file, f.line, f.hint) for f in found} != {("schema.missing-unit", found[0].file, found[0].line,
                                                                   found[0].hint)} if found else True:
            failures.append((i + 1, lines[i].strip(), [(f.code, f.message) for f in found]))
            continue
        value = apply_fix(found[0])
        left = _errors_of(main_files)
        if left:
            failures.append((i + 1, lines[i].strip(), value, [(f.code, f.message) for f in left]))
    path.write_text(original, encoding="utf-8")
    assert failures == []


# ----------------------------------------------------------------------------- 2. a channel refused for its device


def test_channel_on_a_misspelt_device_gives_no_unknown_channel_finding(project):
    # the camera trigger channel is defined, but on a device that does not exist
    text = Path(RIG).read_text(encoding="utf-8")
    at = text.index("  camera:\n")
    Path(RIG).write_text(text[:at] + text[at:].replace("device: dio_main", "device: dio_mian", 1), encoding="utf-8")
    before = errors(check(THERMO))
    assert [f.code for f in before] == ["schema.bad-rig"]
    assert "'camera'" in before[0].message
    f, value, _ = fix_and_recheck(THERMO, "schema.bad-rig")
    assert value == "dio_main"


def test_channel_on_an_unknown_device_is_reported_once(project):
    text = Path(RIG).read_text(encoding="utf-8")
    at = text.index("  camera:\n")
    Path(RIG).write_text(text[:at] + text[at:].replace("device: dio_main", "device: do_crad", 1), encoding="utf-8")
    found = errors(check(THERMO))
    assert [f.code for f in found] == ["schema.bad-rig"]
    assert not any("unknown channel" in f.message for f in found)


# ----------------------------------------------------------------------------- 3. scan.combine: zip


@pytest.mark.parametrize("choice", [0, 1])
def test_combine_zip_names_lockstep_and_grid(project, choice):
    path = "sequences/faults/scan_combine_zip.yaml"
    found = errors(check(path))
    assert [f.code for f in found] == ["schema.bad-value"]
    f = found[0]
    assert "former name of lockstep" in f.message and "must be" not in f.message
    named = re.findall(r"'([^']+)'", f.hint)
    assert named == ["lockstep", "grid"]
    edit(path, "combine: zip", f"combine: {named[choice]}")
    assert errors(check(path)) == []


# ----------------------------------------------------------------------------- 4. overrides


@pytest.mark.parametrize("name, given, code", [("tof", "twelve", "schema.undefined-param"),
                                               ("tof", "12", "schema.missing-unit"),
                                               ("evap_time", "2", "schema.missing-unit")])
def test_override_fix_applied_to_the_override_passes(project, name, given, code):
    found = errors(preflight(THERMO, overrides={name: given}).findings)
    assert [f.code for f in found] == [code]
    assert "define it under params" not in found[0].hint
    value = proposed(found[0].hint)
    assert errors(preflight(THERMO, overrides={name: value}).findings) == []


def test_override_fix_takes_the_unit_the_file_writes(project):
    # the demo writes tof in ms and evap_time (its use entry) in s
    assert proposed(errors(preflight(THERMO, overrides={"tof": "twelve"}).findings)[0].hint).endswith(" ms")
    assert proposed(errors(preflight(THERMO, overrides={"evap_time": "2"}).findings)[0].hint) == "2 s"


# ----------------------------------------------------------------------------- 5. a barrier's reflected part


def test_reflected_part_out_of_view_fix_images_it_earlier(project):
    # only the part the sheet reflects leaves the view; the fix names the image's `at:` from its block's start
    path = "sequences/faults/barrier_reflected_out_of_view.yaml"
    found = [f for f in errors(check(path)) if f.code == "physics.cloud-outside-view"]
    assert len(found) == 1 and "reflected by barrier 'scatter'" in found[0].message
    assert "transmitted" not in found[0].message
    f, value, after = fix_and_recheck(path, "physics.cloud-outside-view", line=found[0].line)
    assert proposed(f.hint).startswith("at: ") and value.endswith(" ms")
    assert float(value.split()[0]) < 16  # earlier than the written 16 ms
    assert not [g for g in after if g.severity == "warning" and g.code.startswith("physics.")]


# ----------------------------------------------------------------------------- 6. a sheet the cloud does not reach


def test_barrier_not_reached_fix_images_later_and_the_transmission_follows(project):
    # Rb-87 rig of our own: the cloud's centre reaches the sheet 1.5 ms + 0.12 mm / 8 mm/s = 16.5 ms after the
    # kick starts (uniform acceleration over 3 ms, then free flight), the image comes 12.5 ms after it
    path = "sequences/faults/barrier_not_reached.yaml"
    before = check(path)
    note = next(g for g in before if g.code == "physics.barrier-transmission")
    assert "no transmission" in note.message and "transmitted fraction" not in note.message
    f, value, after = fix_and_recheck(path, "physics.barrier-not-reached")
    assert proposed(f.hint).startswith("at: ") and float(value.split()[0]) > 2.5  # later than the written 2.5 ms
    note = next(g for g in after if g.code == "physics.barrier-transmission")
    assert "transmitted fraction" in note.message
    assert not [g for g in after if g.severity == "warning" and g.code.startswith("physics.barrier")]


# ----------------------------------------------------------------------------- 7. proposed times on the hardware's ticks
# A fix that proposes a duration or a moment must name one the devices play: a whole number of ticks of the devices
# of the channels the action writes. The rig is made coarse here (the cards tick every 1 us, the synthesizer
# every 4 us with a 4 us minimum interval), so that a value off the tick is seen; the fix, applied, must leave
# neither the finding nor a new timing.sub-tick note, and play a value as close to the target as a tick allows.

CARD_TICK, SYNTH_TICK = 1e-6, 4e-6  # s: the coarse rig below
RABI_PER_AMPLITUDE = 5e3  # Hz: the demo rig's drive 'mw' (rabi_per_amplitude: 5 kHz)
KICK_GRADIENT_PER_AMP, KICK_MAX_CURRENT = 0.25, 80.0  # G/cm/A and A: the demo rig's kick_coil


def _coarse_rig():
    text = Path(RIG).read_text(encoding="utf-8")
    for old, new in (("timebase: 10 MHz, min_interval: 200 ns", "timebase: 1 MHz, min_interval: 2 us"),
                     ("synth_rf:   {timebase: 1 MHz, min_interval: 4 us", "synth_rf:   {timebase: 250 kHz, min_interval: 4 us")):
        assert text.count(old) == 1, old
        text = text.replace(old, new)
    Path(RIG).write_text(text, encoding="utf-8")


def _sequence(name, action):
    path = f"sequences/faults/{name}.yaml"
    Path(path).write_text("seqgen: 1\nrig: ../rigs/na23_demo_rig.yaml\nsample: {species: Na23, state: {F: 1, mF: -1}, "
                          "atoms: 1.0e5, temperature: 100 nK}\nblocks:\n  - name: one\n    at: 1 ms\n    actions:\n"
                          f"      - {action}\n", encoding="utf-8")
    return path


def _sub_ticks(findings, line):
    return [g for g in findings if g.code == "timing.sub-tick" and g.line == line]


def _on_grid(t, tick):
    return abs(t / tick - round(t / tick)) < 1e-6


def _apply_and_recheck(path, code, key):
    before = check(path)
    f = next(g for g in before if g.code == code)  # the written value may itself be off the tick: a note
    value = proposal(f.hint).quantity
    write_key(path, f.line, key, value)
    after = check(path)
    assert not [g for g in after if g.code == code], [(g.message, g.hint) for g in after if g.code == code]
    assert not _sub_ticks(after, f.line), [g.message for g in _sub_ticks(after, f.line)]
    assert errors(after) == [], [(g.code, g.message) for g in errors(after)]
    return f, si(value), after


@pytest.mark.parametrize("amplitude, written", [(0.64, "37 us"), (0.7, "50 us"), (1, "31.28 us")])
def test_pulse_angle_fix_is_a_whole_number_of_synth_ticks_nearest_in_angle(project, amplitude, written):
    _coarse_rig()
    path = _sequence("tick_pulse", f"clock_pulse: {{drive: mw, angle: pi, duration: {written}, amplitude: {amplitude}, "
                                   "frequency: 1.7691054 GHz, transition: [{F: 1, mF: -1}, {F: 2, mF: -2}]}")
    f, d, _ = _apply_and_recheck(path, "physics.pulse-angle", "duration")
    assert _on_grid(d, SYNTH_TICK) and d >= SYNTH_TICK
    # Rabi (Phys. Rev. 51, 652 (1937)): a square pulse turns the state by theta = Omega t, Omega = 2 pi x 5 kHz x amplitude
    omega = 2 * math.pi * RABI_PER_AMPLITUDE * amplitude
    assert abs(omega * d - math.pi) <= omega * SYNTH_TICK / 2 * (1 + 1e-6)  # the nearest tick in angle
    ideal = math.pi / omega
    if not _on_grid(ideal, SYNTH_TICK):  # off the tick: the fix says the angle it plays
        stated = float(re.search(r"it plays ([\d.]+) rad", f.hint).group(1))
        assert stated == pytest.approx(omega * d, rel=2e-3)


def test_pulse_angle_fix_on_the_demo_synth_lands_on_its_1_us_tick(project):
    # the brief's case: 2 pi x 5 kHz x 0.64 x t = pi needs 156.25 us; the synth (1 MHz) plays 156 us
    path = _sequence("tick_pulse", "clock_pulse: {drive: mw, angle: pi, duration: 37 us, amplitude: 0.64, "
                                   "frequency: 1.7691054 GHz, transition: [{F: 1, mF: -1}, {F: 2, mF: -2}]}")
    f, d, _ = _apply_and_recheck(path, "physics.pulse-angle", "duration")
    assert d == pytest.approx(156e-6, abs=1e-12)
    assert "0.998 pi" in f.hint  # 156 / 156.25


@pytest.mark.parametrize("velocity", ["38 mm/s", "31 mm/s", "23.3 mm/s"])
def test_push_velocity_fix_is_a_whole_number_of_card_ticks(project, velocity):
    _coarse_rig()
    path = _sequence("tick_push", f"push: {{coil: kick_coil, gradient: 8 G/cm, duration: 2 ms, expect_velocity: {velocity}}}")
    before = [g for g in check(path) if g.code == "physics.push-velocity"][0]
    got = before.data["velocity_m_s"]
    f, d, _ = _apply_and_recheck(path, "physics.push-velocity", "duration")
    assert _on_grid(d, CARD_TICK)
    # the kick of a constant force grows as its duration (v = F t / m): per tick, got / 2 ms x 1 us
    want = si(velocity)
    assert abs(got * d / 2e-3 - want) <= got * CARD_TICK / 2e-3 / 2 * (1 + 1e-6)


def test_push_velocity_fix_for_a_current_beyond_the_channel_brings_it_within_range(project):
    # 30 G/cm is 120 A in kick_coil: beyond the channel's 100 A range and its 80 A hard limit, so the push plays a
    # clipped current; a duration computed from the clipped kick does not fix the real errors
    path = _sequence("tick_push", "push: {coil: kick_coil, gradient: 30 G/cm, duration: 1 ms, expect_velocity: 38 mm/s}")
    found = check(path)
    f = next(g for g in found if g.code == "physics.push-velocity")
    assert "first bring the current within the channel's range" in f.hint
    gradient = re.search(r"gradient: ([\d.]+) G/cm", f.hint).group(1)
    duration = re.search(r"duration: ([\d.]+ m?s)", f.hint).group(1)
    assert float(gradient) <= KICK_GRADIENT_PER_AMP * KICK_MAX_CURRENT  # 20 G/cm at 80 A
    write_key(path, f.line, "gradient", f"{gradient} G/cm")
    write_key(path, f.line, "duration", duration)
    after = check(path)
    assert errors(after) == [], [(g.code, g.message) for g in errors(after)]
    assert not [g for g in after if g.code == "physics.push-velocity" or g.code == "timing.sub-tick"]
    assert _on_grid(si(duration), CARD_TICK)


# fault file, code, key the fix writes: each audited duration fix, on the coarse rig
TICK_CASES = [
    ("sweep_not_adiabatic.yaml", "physics.sweep-not-adiabatic", "over", SYNTH_TICK),
    ("imaging_blur.yaml", "physics.imaging-blur", "duration", CARD_TICK),
    ("probe_doppler.yaml", "physics.probe-doppler", "duration", CARD_TICK),
    ("exposure_too_short.yaml", "hardware.exposure-too-short", "exposure", CARD_TICK),
    ("barrier_too_short.yaml", "physics.barrier-too-short", "duration", CARD_TICK),
    ("push_too_late.yaml", "physics.barrier-too-short", "duration", CARD_TICK),
    ("pulse_too_short.yaml", "hardware.pulse-too-short", "width", CARD_TICK),
    ("slew.yaml", "hardware.slew", "over", CARD_TICK),
    ("pulse_angle.yaml", "physics.pulse-angle", "duration", SYNTH_TICK),
    ("push_velocity.yaml", "physics.push-velocity", "duration", CARD_TICK),
]


@pytest.mark.parametrize("fault, code, key, tick", TICK_CASES, ids=[f"{c}-{f[:-5]}" for f, c, _, _ in TICK_CASES])
@pytest.mark.parametrize("change", [None, "skew"])
def test_every_proposed_duration_is_on_the_tick_and_passes_on_a_coarse_rig(project, fault, code, key, tick, change):
    _coarse_rig()
    path = f"sequences/faults/{fault}"
    if change == "skew":  # the bound falls elsewhere between two ticks: the same fault, one number off by a third
        text = Path(path).read_text(encoding="utf-8")
        m = re.search(rf"\b{key}: (\d+(?:\.\d+)?) (ms|us)", text)
        if m is None:
            pytest.skip(f"{fault} writes no {key}")
        Path(path).write_text(text[:m.start(1)] + f"{float(m.group(1)) * 0.97:.6g}" + text[m.end(1):], encoding="utf-8")
    before = check(path)
    hits = [g for g in before if g.code == code]
    if not hits and change:
        pytest.skip("the changed number does not raise the finding")
    f = hits[0]
    value = proposal(f.hint).quantity
    assert _on_grid(si(value), tick), (value, f.hint)
    write_key(path, f.line, key, value)
    after = check(path)
    assert not [g for g in after if g.code == code and g.line == f.line], [(g.message, g.hint) for g in after if g.code == code]
    new = {(g.code, g.line) for g in after if g.code == "timing.sub-tick" or g.severity == "error"}
    new -= {(g.code, g.line) for g in before}
    assert not new, [(g.code, g.line, g.message) for g in after if (g.code, g.line) in new]


@pytest.mark.parametrize("fault, code, key", [("pulse_detuned.yaml", "physics.pulse-detuned", "frequency"),
                                              ("modulation_off_resonance.yaml", "physics.modulation-off-resonance", "frequency")])
def test_proposed_synth_frequency_is_a_word_the_synth_plays(project, fault, code, key):
    # the demo rig's synth words: 32 bits over [1.0 GHz, 2.5 GHz], one step = 1.5 GHz / 2^32
    step, low = 1.5e9 / 2 ** 32, 1.0e9
    path = f"sequences/faults/{fault}"
    f = next(g for g in check(path) if g.code == code)
    value = proposal(f.hint).quantity
    words = (si(value) - low) / step
    assert abs(words - round(words)) < 1e-3, (value, words)
    write_key(path, f.line, key, value)
    after = check(path)
    assert not [g for g in after if g.code == code and g.line == f.line]
    assert not _sub_ticks(after, f.line) and errors(after) == []
