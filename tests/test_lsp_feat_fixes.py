"""The editor features where a new user's trial found them lacking: `accept:` entries and other values written
as flow mappings, the rig's wiring lines (never offered for writing), the units of a param's value (the
dimension its uses need) and the hover of a scanned param (its scan and bounds).

Expected values come from the demo files and the rig read here with PyYAML, from `seqgen explain all` run as a
command, from the schema read as JSON and from pint, never from the features."""

from __future__ import annotations

import random
import re
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import yaml

import seqgen
from seqgen.lsp.complete import completions
from seqgen.lsp.definition import definition
from seqgen.lsp.hover import hover

from .test_lsp_feat_fuzz import _check, mutate
from .test_lsp_features import (BARRIER, PREP, RIG, RIG_DATA, ROOT, SCHEMA, SEQ, THERMO, UREG,  # noqa: F401
                                 where, wiring_lines_of)



def labels(text: str, path: Path, needle: str, offset: int | None = None, kind: str | None = None) -> list:
    """The completion labels with the cursor `offset` characters into `needle` (default: at its end)."""
    line, ch = where(text, needle, len(needle) if offset is None else offset)
    return [c.label for c in completions(text, path, line, ch) if kind is None or c.kind == kind]


def dims(unit: str):
    """The dimension pint gives a unit as seqgen writes it ('G' is the lab's gauss, 1e-4 T)."""
    return UREG.Quantity(1, re.sub(r"(?<![A-Za-z])(m?)G(?![A-Za-z])", r"\1LG", unit)).dimensionality


def writable_outputs(rig: dict) -> set:
    """Every channel of the rig and every part of a synth channel (name.freq / .amp / .phase for the
    frequency / amplitude / phase it declares; README "Build folder"), the wiring lines left out."""
    out = set()
    for name, spec in rig["channels"].items():
        out.add(name)
        if spec["kind"] == "synth":
            parts = (("freq", "frequency"), ("amp", "amplitude"), ("phase", "phase"))
            out |= {f"{name}.{short}" for short, key in parts if key in spec}
    return out - wiring_lines_of(rig)


WIRED = wiring_lines_of(RIG_DATA)
TRAP_BEAMS = {b for b, spec in RIG_DATA["beams"].items() if spec.get("role") == "trap"}


@pytest.fixture(scope="module")
def codes():
    out = subprocess.run([sys.executable, "-m", "seqgen", "explain", "all"], capture_output=True, text=True,
                         cwd=ROOT, check=False).stdout
    out = [ln.split()[0] for ln in out.splitlines() if ln.strip()]  # one code a line, first
    assert "physics.shallow-trap" in out and len(out) > 50
    return out


def block_names() -> set:
    own = yaml.safe_load(BARRIER.read_text(encoding="utf-8"))
    prep = yaml.safe_load(PREP.read_text(encoding="utf-8"))
    return {b["name"] for b in own["blocks"]} | {b["name"] for b in prep["blocks"]}


# ----------------------------------------------------------------------------- 1. flow mappings


def test_accept_codes_complete_in_flow_style_as_in_block_style(codes):
    base = BARRIER.read_text(encoding="utf-8")
    flow = base + "accept:\n  - {code: "
    assert set(labels(flow, BARRIER, "  - {code: ")) == set(codes)
    got = labels(base + "accept:\n  - {code: phys", BARRIER, "  - {code: phys")
    assert set(got) == {c for c in codes if c.startswith("phys")} and "physics.shallow-trap" in got
    block = labels(base + "accept:\n  - code: phys", BARRIER, "  - code: phys")
    assert set(block) == set(got)
    # a second entry, after one written by the server's "Accept" action
    text = base + 'accept:\n  - {code: physics.shallow-trap, block: kick, reason: "TODO: why"}\n  - {code: hardware.'
    assert set(labels(text, BARRIER, "  - {code: hardware.")) == {c for c in codes if c.startswith("hardware.")}


def test_accept_block_names_and_keys_in_a_flow_entry():
    base = BARRIER.read_text(encoding="utf-8")
    text = base + 'accept:\n  - {code: physics.shallow-trap, block: , reason: "TODO: why"}\n'
    needle = "{code: physics.shallow-trap, block: "
    got = completions(text, BARRIER, *where(text, needle, len(needle)))
    assert {c.label for c in got} == block_names() and all(c.kind == "block" for c in got)
    text = base + "accept:\n  - {code: physics.shallow-trap, block: sc"
    assert set(labels(text, BARRIER, "block: sc")) == {b for b in block_names() if b.startswith("sc")}
    text = base + "accept:\n  - {code: physics.shallow-trap, "
    keys = SCHEMA["properties"]["accept"]["items"]["properties"]
    assert set(labels(text, BARRIER, "{code: physics.shallow-trap, ")) == set(keys) - {"code"}


def test_hover_and_definition_of_a_block_in_a_flow_accept_entry():
    base = BARRIER.read_text(encoding="utf-8")
    text = base + 'accept:\n  - {code: physics.shallow-trap, block: kick, reason: "TODO: why"}\n'
    line, ch = where(text, "block: kick, reason", len("block: ki"))
    (t,) = definition(text, BARRIER, line, ch)
    assert t.path == BARRIER and t.span.line == where(text, "  - name: kick")[0]
    assert "block `kick`" in hover(text, BARRIER, line, ch).markdown
    line, ch = where(text, "{code: physics.shallow-trap", len("{code: physics.sh"))
    h = hover(text, BARRIER, line, ch)
    assert h.span.end_character - h.span.character == len("physics.shallow-trap")


EXTRA = "  - name: extra\n    after: image\n    actions:\n      - "


@pytest.mark.parametrize("written, want", [
    ("image: {setup: ", set(RIG_DATA["imaging"])),
    ("clock_pulse: {drive: ", set(RIG_DATA["drives"])),
    ("trap_ramp: {beam: ", TRAP_BEAMS),
    ("release: {beams: [", TRAP_BEAMS),
    ("release: {beams: [cross_a, ", TRAP_BEAMS),
    ("release: {coils: [", set(RIG_DATA["coils"])),
    ("magnetic_hold: {currents: {", set(RIG_DATA["coils"])),
    ("magnetic_hold: {duration: 10 ms, currents: {kick_coil: 2 A, ", set(RIG_DATA["coils"]) - {"kick_coil"}),
    ("push: {coil: ", set(RIG_DATA["coils"])),
    ("set: {channel: ", writable_outputs(RIG_DATA)),
])
def test_rig_names_complete_in_flow_mappings_of_actions(written, want):
    text = BARRIER.read_text(encoding="utf-8") + EXTRA + written
    assert set(labels(text, BARRIER, "      - " + written)) == want


def test_trap_ramp_takes_one_beam_key():
    # trap_ramp names its beam with `beam:` (the schema has no `beams:` there): the key is what completes
    text = BARRIER.read_text(encoding="utf-8") + EXTRA + "trap_ramp: {be"
    assert labels(text, BARRIER, "trap_ramp: {be") == \
        [k for k in SCHEMA["$defs"]["trap_ramp"]["properties"] if k.startswith("be")]


def test_channel_completes_before_a_written_value():
    text = BARRIER.read_text(encoding="utf-8").replace("{channel: cross_b_power, value: 0 W}", "{channel: , value: 0}")
    got = labels(text, BARRIER, "set: {channel: , value: 0}", len("set: {channel: "))
    assert set(got) == writable_outputs(RIG_DATA)


def test_flow_use_entry_reads_the_used_file():
    text = BARRIER.read_text(encoding="utf-8").replace(
        "  - file: common/na23_prep.yaml\n    params: {evap_end: 0.30 W}",
        "  - {file: common/na23_prep.yaml, params: {evap_end: 0.30 W}}")
    assert yaml.safe_load(text)["use"][0]["params"] == {"evap_end": "0.30 W"}
    # the used file's blocks are known, and its param's value gets the power units (pint) it needs there
    assert set(labels(text, BARRIER, "after: evaporate", len("after: ev"))) == {"evaporate"}
    got = labels(text, BARRIER, "evap_end: 0.30 W", len("evap_end: 0.30 "), kind="unit")
    assert "W" in got and all(dims(u) == dims("W") for u in got)
    line, ch = where(text, "file: common/na23_prep", len("file: common/na"))
    assert [t.path.resolve() for t in definition(text, BARRIER, line, ch)] == [PREP.resolve()]


# ----------------------------------------------------------------------------- 2. wiring lines


def test_wiring_lines_are_never_offered_for_writing():
    assert WIRED == {"ao_start", "rf_step"}  # the demo rig's start trigger and synthesizer step line
    base = BARRIER.read_text(encoding="utf-8")
    digital = {c for c, spec in RIG_DATA["channels"].items() if spec["kind"] == "digital"}
    text = base + EXTRA + "trigger: {channel: "
    assert set(labels(text, BARRIER, "trigger: {channel: ")) == digital - WIRED
    text = base + EXTRA + "set:\n          channel: "
    assert set(labels(text, BARRIER, "          channel: ")) == writable_outputs(RIG_DATA)
    text = base + "end:\n  leave_on: ["
    got = set(labels(text, BARRIER, "leave_on: ["))
    assert not got & WIRED and "probe_shutter" in got
    # they stay known to hover and definition (a sequence that writes one gets the finding, not silence)
    text = base + EXTRA + "set: {channel: ao_start, value: 1}\n"
    line, ch = where(text, "channel: ao_start", len("channel: ao"))
    (t,) = definition(text, BARRIER, line, ch)
    assert t.path.resolve() == RIG.resolve() and t.span.line == where(RIG.read_text(encoding="utf-8"), "  ao_start:")[0]
    assert "ao_start" in hover(text, BARRIER, line, ch).markdown


def test_wiring_lines_left_out_when_the_rig_does_not_build(tmp_path):
    rig_text = RIG.read_text(encoding="utf-8")
    broken = rig_text.replace("    kind: analog\n", "    kind: analogue\n", 1)  # a kind the schema refuses
    assert broken != rig_text
    (tmp_path / "rigs").mkdir()
    (tmp_path / "rigs" / RIG.name).write_text(broken, encoding="utf-8")
    shutil.copytree(SEQ / "common", tmp_path / "common")
    seq = tmp_path / BARRIER.name
    text = BARRIER.read_text(encoding="utf-8") + EXTRA + "set: {channel: "
    seq.write_text(text, encoding="utf-8")
    got = set(labels(text, seq, "      - set: {channel: "))
    assert got and not got & WIRED and "cross_a_power" in got


# ----------------------------------------------------------------------------- 3. a param's units


def _without_unit(text: str, name: str) -> tuple:
    """The text with the param's base value written as its number and a blank, and where its end is."""
    raw = yaml.safe_load(text)["params"][name]
    value = raw["value"] if isinstance(raw, dict) else raw
    number, unit = re.match(r"([-+.\deE]+)\s*(\S+)$", value).groups()
    line = next(ln for ln in text.splitlines() if ln.startswith(f"  {name}:"))
    new = line.replace(value, number + " ", 1)
    return text.replace(line, new, 1), f"  {name}:", new.index(number + " ") + len(number) + 1, unit


@pytest.mark.parametrize("demo, name", [(BARRIER, n) for n in yaml.safe_load(BARRIER.read_text())["params"]]
                         + [(PREP, n) for n in yaml.safe_load(PREP.read_text())["params"]])
def test_param_value_gets_the_units_its_uses_need(demo, name):
    """With the unit removed from its line, a param's value is offered the units of the dimension its uses need,
    which is that of the unit the demo writes there (seqgen check passes the demos)."""
    text, needle, ch, unit = _without_unit(demo.read_text(encoding="utf-8"), name)
    got = labels(text, demo, needle, ch, kind="unit")
    assert unit in got, (name, got)
    assert all(dims(u) == dims(unit) for u in got), (name, got)


def test_param_units_follow_its_use_not_the_other_written_units():
    text, needle, ch, unit = _without_unit(BARRIER.read_text(encoding="utf-8"), "kick_gradient")
    line, _ = where(text, needle)
    found = completions(text, BARRIER, line, ch)
    push = next(a["push"] for b in yaml.safe_load(BARRIER.read_text())["blocks"] for a in b["actions"] if "push" in a)
    assert push["gradient"] == "kick_gradient"  # its one use: a push's gradient, a field gradient
    assert {c.label for c in found} >= {"G/cm", "T/m"} and all(dims(c.label) == dims("T/m") for c in found)


def test_param_used_by_another_param_or_in_a_sum():
    base = BARRIER.read_text(encoding="utf-8")
    text = base.replace("  kick_gradient: 8 G/cm\n", "  kick_gradient: 2 * spare\n  spare: 4 \n")
    got = labels(text, BARRIER, "  spare: 4 ", kind="unit")
    assert "G/cm" in got and all(dims(u) == dims("T/m") for u in got)
    text = base.replace("  kick_time: 2 ms\n", "  kick_time: 2 ms\n  spare: 4 \n") + EXTRA + \
        "hold: {duration: spare + 1 ms}\n"
    got = labels(text, BARRIER, "  spare: 4 ", kind="unit")
    assert "ms" in got and all(dims(u) == dims("s") for u in got)


def test_unused_param_takes_the_unit_its_own_entry_writes():
    base = BARRIER.read_text(encoding="utf-8")
    text = base.replace("  kick_time: 2 ms\n", "  kick_time: 2 ms\n  spare: 3 G/cm\n")
    got = labels(text, BARRIER, "  spare: 3 G/cm", len("  spare: 3 "), kind="unit")
    assert "G/cm" in got and all(dims(u) == dims("T/m") for u in got)
    text = base.replace("  kick_time: 2 ms\n", "  kick_time: 2 ms\n  spare: {value: 3 , min: 1 uK}\n")
    got = labels(text, BARRIER, "  spare: {value: 3 ", kind="unit")
    assert "uK" in got and all(dims(u) == dims("K") for u in got)
    # nothing known: every kind of unit the document writes
    text = base.replace("  kick_time: 2 ms\n", "  kick_time: 2 ms\n  spare: 3 \n")
    got = labels(text, BARRIER, "  spare: 3 ", kind="unit")
    assert {"ms", "G/cm", "mW", "GHz", "nK"} <= set(got)
    # the unit being typed is no written unit yet: 'G' must not narrow it to fields
    text = base.replace("  kick_gradient: 8 G/cm\n", "  kick_gradient: 8 G\n")
    assert labels(text, BARRIER, "  kick_gradient: 8 G", kind="unit") == ["G/cm"]


def test_use_entry_params_get_the_units_of_the_used_files_uses():
    text = THERMO.read_text(encoding="utf-8")
    given = yaml.safe_load(text)["use"][0]["params"]
    prep = yaml.safe_load(PREP.read_text(encoding="utf-8"))
    # evap_end is a trap_ramp's `to:` there: a power of the beam's calibrated channel (the rig)
    ramp = next(a["trap_ramp"] for b in prep["blocks"] for a in b["actions"] if "trap_ramp" in a)
    power = RIG_DATA["channels"][RIG_DATA["beams"][ramp["beam"]]["power_channel"]]["calibration"]["quantity"]
    number = given["evap_end"].split()[0]
    got = labels(text, THERMO, f"evap_end: {number} ", kind="unit")
    assert power in got and all(dims(u) == dims(power) for u in got)
    number = given["evap_time"].split()[0]
    got = labels(text, THERMO, f"evap_time: {number} ", kind="unit")
    assert all(dims(u) == dims("s") for u in got) and "s" in got


# ----------------------------------------------------------------------------- 4. hover of a scanned param


def _scan_line(md: str) -> str:
    return next(ln for ln in md.splitlines() if ln.startswith("- scan:"))


@pytest.mark.parametrize("with_analysis", [False, True])
def test_hover_scanned_param_shows_scan_and_bounds(with_analysis):
    text = BARRIER.read_text(encoding="utf-8")
    raw = yaml.safe_load(text)["params"]["tof"]
    scan = raw["scan"]
    want = np.linspace(UREG.Quantity(scan["from"]).to("s").magnitude, UREG.Quantity(scan["to"]).to("s").magnitude,
                       scan["steps"])
    analysis = seqgen.preflight(BARRIER) if with_analysis else None
    line, ch = where(text, "after: release + tof", len("after: release + t"))
    md = hover(text, BARRIER, line, ch, analysis=analysis).markdown
    assert f"min `{raw['min']}`" in md
    shown = _scan_line(md)
    body = re.match(r"- scan: tof (.*) \((\d+) values\)", shown)
    assert int(body.group(2)) == scan["steps"]
    got = [UREG.Quantity(v).to("s").magnitude for v in body.group(1).split(", ")]
    assert got == pytest.approx(list(want), rel=1e-9)
    assert f"from: {scan['from']}" in shown and f"steps: {scan['steps']}" in shown  # and the scan as written


def test_hover_scan_written_as_a_block_list_with_max_and_two_axes():
    base = BARRIER.read_text(encoding="utf-8")
    text = base.replace(
        "  tof: {value: 14 ms, min: 1 ms, scan: {from: 10 ms, to: 14 ms, steps: 3}}",
        "  tof:\n    value: 14 ms\n    max: 20 ms\n    scan: [10 ms, 11 ms, 12 ms, 13 ms, 14 ms]").replace(
        "  kick_time: 2 ms\n", "  kick_time: {value: 2 ms, scan: [1 ms, 2 ms]}\n")
    params = yaml.safe_load(text)["params"]
    values = params["tof"]["scan"]
    line, ch = where(text, "  tof:", 3)
    md = hover(text, BARRIER, line, ch).markdown
    assert f"max `{params['tof']['max']}`" in md and "min `" not in md
    body = re.match(r"- scan: tof (\S+ \S+) \.\. (\S+ \S+) \((\d+) values\)", _scan_line(md))
    assert int(body.group(3)) == len(values)
    assert UREG.Quantity(body.group(1)).to("s").magnitude == pytest.approx(UREG.Quantity(values[0]).to("s").magnitude)
    assert UREG.Quantity(body.group(2)).to("s").magnitude == pytest.approx(UREG.Quantity(values[-1]).to("s").magnitude)
    shots = int(re.search(r"the whole scan: (\d+) shots", md).group(1))
    assert shots == len(values) * len(params["kick_time"]["scan"])  # a grid of the two


def test_hover_scan_that_does_not_expand_says_so_and_plain_params_show_no_scan():
    base = BARRIER.read_text(encoding="utf-8")
    text = base.replace("scan: {from: 10 ms, to: 14 ms, steps: 3}", "scan: {from: 10 ms, to: 14 Hz, steps: 3}")
    line, ch = where(text, "  tof:", 3)
    assert "does not expand" in _scan_line(hover(text, BARRIER, line, ch).markdown)
    line, ch = where(base, "  kick_time:", 3)
    md = hover(base, BARRIER, line, ch).markdown
    assert "scan" not in md and "bounds" not in md


# ----------------------------------------------------------------------------- robustness


FLOW_BROKEN = ["accept:\n  - {", "accept:\n  - [", "accept:\n  - {code: ", "accept:\n  - {code: x, block: [",
               "use:\n  - {file: ", "use:\n  - {file: common/na23_prep.yaml, params: {evap_end: 0.3 ",
               "params:\n  x: 3 \n  y: x + \n", "params:\n  x: {value: 3 , scan: {from: ",
               "params:\n  x: 3 \n  z: [&a [x, x], &b [*a, *a], &c [*b, *b], *c]\n",
               "params:\n  x: 3 \n  z: {a: !!timestamp 2020-13-45, b: !!bool maybe, c: x}\n",
               "- {code: \n", "accept: [{code: ", "params:\n  x: 1e-3 \n  y: 2e-x - x\n"]


@pytest.mark.parametrize("tail", FLOW_BROKEN)
def test_half_typed_flow_entries_never_raise(tail):
    for text, path in (("seqgen: 1\nrig: rigs/na23_demo_rig.yaml\n" + tail, SEQ / "broken.yaml"),
                       (BARRIER.read_text(encoding="utf-8") + tail, BARRIER)):
        lines = text.splitlines()
        for line in range(max(0, len(lines) - 4), len(lines) + 1):
            width = len(lines[line]) if line < len(lines) else 0
            for ch in range(width + 2):
                _check(text, path, line, ch)


def test_random_edits_of_flow_entries_never_raise():
    rng = random.Random(20261205)
    text = BARRIER.read_text(encoding="utf-8").replace("  kick_time: 2 ms\n", "  kick_time: 2 ms\n  spare: 3 \n") + \
        'accept:\n  - {code: physics.shallow-trap, block: kick, reason: "TODO: why"}\n'
    for n in range(150):
        edited = mutate(text, rng)
        lines = edited.splitlines() or [""]
        for _ in range(3):
            line = rng.randint(0, len(lines))
            ch = rng.randint(0, len(lines[line]) + 2) if line < len(lines) else 0
            try:
                _check(edited, BARRIER, line, ch)
            except Exception as exc:  # name the edit that broke it, so that it replays
                raise AssertionError(f"edit {n} at {line}:{ch}: {exc!r}\n{edited!r}") from exc
