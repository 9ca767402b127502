"""The editor features (seqgen.lsp: completion, hover, go to definition) on the demos.

Expected values come from the files themselves (the sequence, rig and schema read here with PyYAML and json),
from `seqgen show --json` / `seqgen explain` run as commands, and from pint, never from the features."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pint
import pytest
import yaml

from seqgen.lsp.complete import completions
from seqgen.lsp.definition import definition
from seqgen.lsp.features import Completion, HoverText, Span, Target
from seqgen.lsp.hover import hover

ROOT = Path(__file__).resolve().parent.parent
SEQ = ROOT / "sequences"
BARRIER = SEQ / "na23_barrier_scatter.yaml"
THERMO = SEQ / "na23_thermometry.yaml"
PREP = SEQ / "common" / "na23_prep.yaml"
RIG = SEQ / "rigs" / "na23_demo_rig.yaml"
SCHEMA = json.loads((ROOT / "schemas" / "sequence.schema.json").read_text(encoding="utf-8"))
RIG_DATA = yaml.safe_load(RIG.read_text(encoding="utf-8"))
UREG = pint.UnitRegistry()
UREG.define("lab_gauss = 1e-4 * tesla = LG")  # the SI gauss labs mean (pint's own belongs to Gaussian CGS)


def where(text: str, needle: str, offset: int = 0) -> tuple:
    """(line, character) of `needle`'s first occurrence plus `offset` characters, 0-based."""
    for n, line in enumerate(text.splitlines()):
        if needle in line:
            return n, line.index(needle) + offset
    raise AssertionError(f"{needle!r} not in the text")


def labels(text, path, needle, offset=0, kind=None):
    line, ch = where(text, needle, offset)
    found = completions(text, path, line, ch)
    assert all(isinstance(c, Completion) for c in found)
    return [c.label for c in found if kind is None or c.kind == kind]


def wiring_lines_of(rig: dict) -> set:
    """The lines a rig read by PyYAML wires its devices with (PyYAML reads the key `on` as True, YAML 1.1)."""
    out = set()
    for spec in rig.get("devices", {}).values():
        for key, sub in (("start", "on"), ("advance", "per_edge"), ("clock", "line")):
            wiring = spec.get(key)
            if isinstance(wiring, dict):
                out.add(wiring.get(sub, wiring.get(True if sub == "on" else sub)))
    return out


def seconds(words: str) -> float:
    """A time printed as '<number> <unit>' in SI seconds, by pint."""
    return UREG.Quantity(words).to("s").magnitude


def show_json(path: Path) -> dict:
    out = subprocess.run([sys.executable, "-m", "seqgen", "show", str(path), "--physics", "--json"],
                         capture_output=True, text=True, cwd=ROOT, check=False)
    return json.loads(out.stdout)


@pytest.fixture(scope="module")
def shown():
    return show_json(BARRIER)


# ----------------------------------------------------------------------------- completion


def test_complete_action_names_and_keys_from_the_schema():
    text = BARRIER.read_text(encoding="utf-8").replace("      - hold: {duration: 20 ms}\n", "      - \n", 1)
    actions = SCHEMA["$defs"]["block"]["properties"]["actions"]["items"]["properties"]
    line, ch = where(text, "      - ", 8)
    found = {c.label: c for c in completions(text, BARRIER, line, ch)}
    assert set(found) == set(actions)
    assert all(c.kind == "action" for c in found.values())
    assert found["trap_ramp"].documentation == actions["trap_ramp"]["description"]
    # keys of a set: {...} not yet written, with the schema's descriptions
    text = BARRIER.read_text(encoding="utf-8").replace("{channel: cross_b_power, value: 0 W}", "{channel: cross_b_power, }")
    line, ch = where(text, "{channel: cross_b_power, }", len("{channel: cross_b_power, "))
    found = {c.label: c for c in completions(text, BARRIER, line, ch)}
    props = SCHEMA["$defs"]["set"]["properties"]
    assert set(found) == set(props) - {"channel"}
    assert found["value"].documentation == props["value"]["description"] and found["value"].kind == "key"


def test_complete_block_keys_at_an_indented_blank_line():
    text = BARRIER.read_text(encoding="utf-8").replace("    after: load_guide\n", "    after: load_guide\n    \n", 1)
    line, _ = where(text, "    after: load_guide")
    got = {c.label for c in completions(text, BARRIER, line + 1, 4)}
    assert got == set(SCHEMA["$defs"]["block"]["properties"]) - {"name", "after", "actions"}


def test_complete_rig_names_where_the_schema_expects_them():
    text = BARRIER.read_text(encoding="utf-8")
    # every channel but the lines that wire a device (seqgen drives those; README "Wiring")
    wired = wiring_lines_of(RIG_DATA)
    assert wired == {"ao_start", "rf_step"}
    got = set(labels(text, BARRIER, "set: {channel: ", len("set: {channel: ")))
    assert set(RIG_DATA["channels"]) - wired <= got and not wired & got
    trap = {b for b, spec in RIG_DATA["beams"].items() if spec.get("role") == "trap"}
    assert set(labels(text, BARRIER, "release: {beams: [", len("release: {beams: ["))) == trap
    assert set(labels(text, BARRIER, "push: {coil: ", len("push: {coil: "))) == set(RIG_DATA["coils"])
    assert set(labels(text, BARRIER, "drive: mw", len("drive: "))) == set(RIG_DATA["drives"])
    assert set(labels(text, BARRIER, "setup: side_camera", len("setup: "))) == set(RIG_DATA["imaging"])
    barrier = {b for b, spec in RIG_DATA["beams"].items() if spec.get("role") == "barrier"}
    assert set(labels(text, BARRIER, "beam: sheet", len("beam: "))) == barrier
    prep = PREP.read_text(encoding="utf-8")
    assert set(labels(prep, PREP, "trap_ramp: {beam: cross_a", len("trap_ramp: {beam: "))) == set()  # a fragment has no rig
    thermo = THERMO.read_text(encoding="utf-8").replace("release: {beams: [cross_a, cross_b]}", "trap_ramp: {beam: cr}")
    assert set(labels(thermo, THERMO, "trap_ramp: {beam: cr", len("trap_ramp: {beam: cr"))) == \
        {b for b in trap if b.startswith("cr")}


def test_complete_block_names_after_after_and_with():
    text = BARRIER.read_text(encoding="utf-8")
    own = yaml.safe_load(text)
    all_blocks = [b["name"] for b in own["blocks"]] + [b["name"] for b in yaml.safe_load(PREP.read_text())["blocks"]]
    got = labels(text, BARRIER, "after: load_guide", len("after: "), kind="block")
    assert set(got) == set(all_blocks) - {"kick"}  # the block of that `after:` is not its own anchor
    assert labels(text, BARRIER, "after: load_guide", len("after: lo"), kind="block") == ["load_guide"] or \
        set(labels(text, BARRIER, "after: load_guide", len("after: lo"), kind="block")) == \
        {b for b in all_blocks if b.startswith("lo") and b != "kick"}


def test_complete_params_and_functions_in_expressions():
    text = BARRIER.read_text(encoding="utf-8")
    params = set(yaml.safe_load(text)["params"]) | set(yaml.safe_load(PREP.read_text())["params"])
    line, ch = where(text, "gradient: kick_gradient", len("gradient: "))
    found = completions(text, BARRIER, line, ch)
    assert {c.label for c in found if c.kind == "param"} == params
    assert {c.label for c in found if c.kind == "function"} == \
        {"pi", "sqrt", "exp", "log", "log10", "sin", "cos", "tan", "abs", "min", "max"}
    got = labels(text, BARRIER, "gradient: kick_gradient", len("gradient: kick_g"))
    assert got == ["kick_gradient"]


def _dim(unit: str):
    return UREG.Quantity(1, re.sub(r"(?<![A-Za-z])(m?)G(?![A-Za-z])", r"\1LG", unit)).dimensionality


@pytest.mark.parametrize("needle, offset, si, must", [
    ("duration: 50 us", len("duration: 50 "), "s", {"us", "ms"}),
    ("value: 0 W}", len("value: 0 "), "W", {"W", "mW"}),  # set of cross_b_power: calibrated in W
    ("after: evaporate + 5 ms", len("after: evaporate + 5 "), "s", {"ms"}),
    ("probe_power: 40 uW", len("probe_power: 40 "), "W", {"uW"}),
    ("separate: {coil: sg_coil, gradient: 14 G/cm", len("separate: {coil: sg_coil, gradient: 14 "), "T/m", {"G/cm"}),
])
def test_complete_units_that_fit_the_key(needle, offset, si, must):
    text = BARRIER.read_text(encoding="utf-8")
    got = labels(text, BARRIER, needle, offset, kind="unit")
    assert must <= set(got)
    want = UREG.Quantity(1, si).dimensionality
    assert all(_dim(u) == want for u in got), got


def test_complete_units_filtered_by_what_is_typed():
    text = BARRIER.read_text(encoding="utf-8")
    got = labels(text, BARRIER, "duration: 50 us", len("duration: 50 u"), kind="unit")
    assert got and all(u.startswith("u") for u in got) and "us" in got


def test_complete_finding_codes_in_accept_and_rig_keys():
    codes = subprocess.run([sys.executable, "-m", "seqgen", "explain", "all"], capture_output=True, text=True,
                           cwd=ROOT, check=False).stdout.split()
    text = BARRIER.read_text(encoding="utf-8") + "accept:\n  - code: physics.sh\n"
    got = labels(text, BARRIER, "code: physics.sh", len("code: physics.sh"))
    assert "physics.shallow-trap" in got and all(c.startswith("physics.sh") and c in codes for c in got)
    rig = RIG.read_text(encoding="utf-8")
    assert set(labels(rig, RIG, "power_channel: guide_power", len("power_channel: "))) >= set(RIG_DATA["channels"]) - {"mw", "sheet_eom"}
    assert labels(rig, RIG, "probe_beam: probe", len("probe_beam: pr")) == ["probe"]


# ----------------------------------------------------------------------------- hover


def _times(md: str) -> tuple:
    start = re.search(r"start: ([-\d.e+]+ \w+)", md).group(1)
    end = re.search(r"end: ([-\d.e+]+ \w+)", md).group(1)
    return seconds(start), seconds(end)


@pytest.mark.parametrize("demo, block", [(BARRIER, "kick"), (BARRIER, "scatter"), (BARRIER, "image"),
                                         (BARRIER, "load_guide"), (THERMO, "release"), (THERMO, "image")])
def test_hover_block_shows_the_times_show_gives(demo, block, shown):
    text = demo.read_text(encoding="utf-8")
    rows = [r for r in (shown if demo == BARRIER else show_json(demo))["timeline"] if r["block"] == block]
    line, ch = where(text, f"name: {block}", len("name: ") + 1)
    h = hover(text, demo, line, ch)
    assert isinstance(h, HoverText) and h.span == Span(line, len("  - name: "), line, len(f"  - name: {block}"))
    start, end = _times(h.markdown)
    # in these demos a block's first write starts it, and its last write, or the holds written after it, end it
    actions = next(b for b in yaml.safe_load(text)["blocks"] if b["name"] == block)["actions"]
    trailing = 0.0
    for a in reversed(actions):
        if "hold" not in a:
            break
        trailing += seconds(a["hold"]["duration"])
    assert start == pytest.approx(min(r["start_s"] for r in rows), rel=5e-4)
    assert end == pytest.approx(max(r["end_s"] for r in rows) + trailing, rel=5e-4)


def test_hover_block_in_after_and_physics_from_the_analysis(shown):
    import seqgen

    text = BARRIER.read_text(encoding="utf-8")
    line, ch = where(text, "after: kick + 3 ms", len("after: k"))
    plain = hover(text, BARRIER, line, ch)
    assert "kick" in plain.markdown and "after the next check" in plain.markdown
    res = seqgen.preflight(BARRIER)
    line, ch = where(text, "name: scatter", len("name: s"))
    md = hover(text, BARRIER, line, ch, analysis=res).markdown
    items = [i for r in shown["physics"] if r["block"] == "scatter" for i in r["items"]]
    assert items and all(i in md for i in items) and "before this edit" not in md
    # a stale analysis (the text edited since) still shows its predictions, marked as such
    edited = text.replace("sheet_time: 20 ms", "sheet_time: 21 ms")
    md = hover(edited, BARRIER, line, ch, analysis=res).markdown
    assert "before this edit" in md and items[0] in md
    start, end = _times(md)
    assert end - start == pytest.approx(21e-3, rel=1e-9)  # its times are those of the edited text


def test_hover_param_value_si_and_users():
    text = BARRIER.read_text(encoding="utf-8")
    line, ch = where(text, "gradient: kick_gradient", len("gradient: ki"))
    md = hover(text, BARRIER, line, ch).markdown
    written = yaml.safe_load(text)["params"]["kick_gradient"]
    assert f"`{written}`" in md
    si = UREG.Quantity(8, "LG/cm").to("T/m").magnitude  # 8 G/cm as written, in T/m
    got = float(re.search(r"in SI: ([-\d.e+]+) T/m", md).group(1))
    assert got == pytest.approx(si, rel=1e-12)
    assert "block `kick`" in md
    line, ch = where(text, "after: release + tof", len("after: release + t"))
    md = hover(text, BARRIER, line, ch).markdown
    assert "`14 ms`" in md and float(re.search(r"in SI: ([-\d.e+]+) s", md).group(1)) == pytest.approx(0.014)


@pytest.mark.parametrize("channel", ["cross_b_power", "sheet_power"])
def test_hover_rig_output_range_limits_latency(channel):
    text = BARRIER.read_text(encoding="utf-8").replace("set: {channel: cross_b_power", f"set: {{channel: {channel}")
    needle = f"channel: {channel}"
    line, ch = where(text, needle, len("channel: ") + 2)
    md = hover(text, BARRIER, line, ch).markdown
    spec = RIG_DATA["channels"][channel]
    lo, hi = spec["output"]["range"]
    assert f"range: {lo} to {hi}" in md
    assert f"max {spec['hard_limit']['max']}" in md
    assert f"rise {spec['latency']}" in md
    assert "calibration" in md


def test_hover_finding_code_is_its_explain_text():
    text = BARRIER.read_text(encoding="utf-8") + "accept:\n  - {code: physics.shallow-trap, reason: spill}\n"
    line, ch = where(text, "physics.shallow-trap", 12)
    h = hover(text, BARRIER, line, ch)
    explained = subprocess.run([sys.executable, "-m", "seqgen", "explain", "physics.shallow-trap"],
                               capture_output=True, text=True, cwd=ROOT, check=False).stdout
    first = explained.strip().splitlines()[0].strip()
    assert first in h.markdown
    assert h.span.end_character - h.span.character == len("physics.shallow-trap")


def test_hover_key_is_its_schema_description():
    text = BARRIER.read_text(encoding="utf-8")
    line, ch = where(text, "expect_velocity", 3)
    md = hover(text, BARRIER, line, ch).markdown
    assert SCHEMA["$defs"]["push"]["properties"]["expect_velocity"]["description"] in md


# ----------------------------------------------------------------------------- definition


def test_definition_of_blocks_params_files_and_rig_names():
    text = BARRIER.read_text(encoding="utf-8")
    prep = PREP.read_text(encoding="utf-8")
    rig = RIG.read_text(encoding="utf-8")
    line, ch = where(text, "after: evaporate", len("after: ev"))
    (t,) = definition(text, BARRIER, line, ch)
    assert isinstance(t, Target) and t.path.resolve() == PREP.resolve()
    assert (t.span.line, t.span.character) == where(prep, "name: evaporate", len("name: "))
    line, ch = where(text, "after: kick + 3 ms", len("after: ki"))
    (t,) = definition(text, BARRIER, line, ch)
    assert (t.path, t.span.line) == (BARRIER, where(text, "- name: kick")[0])
    line, ch = where(text, "duration: sheet_time", len("duration: sh"))
    (t,) = definition(text, BARRIER, line, ch)
    assert (t.path, t.span.line, t.span.character) == (BARRIER, *where(text, "  sheet_time:", 2))
    line, ch = where(text, "rig: rigs/", len("rig: rigs/na"))
    assert [x.path.resolve() for x in definition(text, BARRIER, line, ch)] == [RIG.resolve()]
    line, ch = where(text, "file: common/", len("file: common/na"))
    assert [x.path.resolve() for x in definition(text, BARRIER, line, ch)] == [PREP.resolve()]
    for needle, rig_key in (("channel: cross_b_power", "  cross_b_power:"), ("coil: kick_coil", "  kick_coil:"),
                            ("setup: side_camera", "  side_camera:"), ("drive: mw", "  mw: {channel: mw"), ("beam: sheet", "  sheet:")):
        line, ch = where(text, needle, needle.index(":") + 3)
        (t,) = definition(text, BARRIER, line, ch)
        assert t.path.resolve() == RIG.resolve() and t.span.line == where(rig, rig_key)[0], needle
    # inside the rig: a beam's power channel goes to the channel
    line, ch = where(rig, "power_channel: guide_power", len("power_channel: gu"))
    (t,) = definition(rig, RIG, line, ch)
    assert t.path == RIG and t.span.line == where(rig, "  guide_power:")[0]
    # a definition asked for on itself, and a word that is nothing, go nowhere
    line, ch = where(text, "  kick_gradient:", 3)
    assert definition(text, BARRIER, line, ch) == ()
    line, ch = where(text, "shape: minimum_jerk", len("shape: mi"))
    assert definition(text, BARRIER, line, ch) == ()


# ----------------------------------------------------------------------------- broken documents


BROKEN = ["", "\t", "- ", "-", "blocks:\n  - name: a\n    actions: [{set: {channel: x", "\x00\x01\xff\ufffd",
          "seqgen: 1\nrig: rigs/na23_demo_rig.yaml\nblocks:\n\t- name: a\n", ":", "{", "[[[[", "'", "a: 'b",
          "blocks:\n  - \n", "params:\n  x: {value: \n", "rig: /nonexistent/rig.yaml\n", "seqgen_rig: 1\nchannels:\n  a: {",
          "---\n...\n", "key: |\n  text\n  - x\n", "- - - -\n", "accept:\n  - code: \n"]


@pytest.mark.parametrize("text", BROKEN)
def test_broken_documents_never_raise(text):
    path = SEQ / "broken.yaml"
    lines = text.splitlines() or [""]
    for line in range(len(lines) + 2):
        for ch in range(0, len(lines[min(line, len(lines) - 1)]) + 2):
            assert isinstance(completions(text, path, line, ch), tuple)
            h = hover(text, path, line, ch)
            assert h is None or isinstance(h, HoverText)
            assert isinstance(definition(text, path, line, ch), tuple)


def test_hover_in_the_rig_file_and_on_a_used_files_param():
    rig = RIG.read_text(encoding="utf-8")
    line, ch = where(rig, "  kick_current:", 4)
    md = hover(rig, RIG, line, ch).markdown
    spec = RIG_DATA["channels"]["kick_current"]
    assert f"max {spec['hard_limit']['max']}" in md and "kick_current" in md
    text = BARRIER.read_text(encoding="utf-8")
    line, ch = where(text, "params: {evap_end: 0.30 W}", len("params: {ev"))
    md = hover(text, BARRIER, line, ch).markdown
    assert "param `evap_end`" in md and "`0.30 W`" in md  # the value the sequence gives it
    assert "block `evaporate` (na23_prep.yaml)" in md  # where the fragment uses it


def test_complete_coil_names_as_magnetic_hold_currents_and_outputs_to_leave_on():
    text = THERMO.read_text(encoding="utf-8").replace(
        "      - release: {beams: [cross_a, cross_b]}\n",
        "      - magnetic_hold:\n          duration: 10 ms\n          currents:\n            \n", 1)
    line, _ = where(text, "          currents:")
    got = completions(text, THERMO, line + 1, 12)
    assert {c.label for c in got} == set(RIG_DATA["coils"]) and all(c.kind == "rig-name" for c in got)
    text = THERMO.read_text(encoding="utf-8") + "end:\n  leave_on: [pro]\n"
    assert set(labels(text, THERMO, "leave_on: [pro", len("leave_on: [pro"))) >= \
        {c for c in RIG_DATA["channels"] if c.startswith("pro")}
