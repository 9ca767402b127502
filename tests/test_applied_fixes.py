"""Every fix a finding proposes must pass when applied.

Each test breaks one line of a demo (copied into a temporary folder), runs `seqgen check FILE --json`, takes
the value the finding's fix names ("write '30 uW'", "did you mean 'dio_main'?"), writes it into the file at
the finding's line and column, checks again, and asserts that the finding is gone and that no error
appeared in its place. The units the fixes are expected to name are those the demo rig's own text uses
(its probe channel is calibrated in uW, its beam waists are written in um), read off the file, not
computed by seqgen.
"""

import re
from pathlib import Path

import pytest

from seqgen.pipeline import preflight

from .demo_copy import check, edit, errors, scalar_end

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
