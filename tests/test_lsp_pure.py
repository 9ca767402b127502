"""The language server's plain parts without a client: the accept: entry a code action inserts (valid YAML in
every form of the list, and the finding then reported accepted by the pipeline), the place a fix writes its
value, the related places read off a finding, and a check of unsaved texts (the buffer, not the file)."""

from __future__ import annotations

from pathlib import Path

import pytest
import yaml

from seqgen.findings import Finding, SourcePos
from seqgen.lsp.actions import accept_action, fix_action
from seqgen.lsp.diagnostics import related_of, span
from seqgen.lsp.session import analyse, file_of
from seqgen.pipeline import preflight
from seqgen.resolve.sources import load_sources

OVERLAP = "sequences/faults/overlap.yaml"


def _apply(lines: list, edits) -> str:
    """Edits applied by LSP's rules (0-based line and character), written out here, last first."""
    text = "\n".join(lines)

    def offset(line, char):
        return sum(len(x) + 1 for x in lines[:line]) + char

    for e in sorted(edits, key=lambda e: (e.start_line, e.start_char), reverse=True):
        text = text[:offset(e.start_line, e.start_char)] + e.text + text[offset(e.end_line, e.end_char):]
    return text


def _findings_of(text: str) -> list:
    return preflight(OVERLAP, sources=load_sources(OVERLAP, text=text)).findings


def _finding_of(text: str, code: str):
    found = [f for f in preflight(OVERLAP, sources=load_sources(OVERLAP, text=text)).findings if f.code == code]
    assert found, code
    return found[0]


@pytest.mark.parametrize("tail", [
    "",                                                             # no accept: list yet
    "accept:\n  - {code: timing.jitter, reason: other}\n",          # a block list: appended under it
    "accept:\n- code: timing.jitter\n  reason: other\n",             # a block list at the key's indent
    "accept: [{code: timing.jitter, reason: other}]\n",             # a flow list on the key's line
    "accept: []\n",
])
def test_accept_entry_is_valid_yaml_and_accepts_the_finding(tail):
    text = Path(OVERLAP).read_text(encoding="utf-8").rstrip("\n") + "\n" + tail
    code = Path(OVERLAP).read_text(encoding="utf-8").split()[2]  # '# expect: CODE @ LINE'
    f = _finding_of(text, code)
    assert not f.accepted
    lines = text.split("\n")
    action = accept_action(f, OVERLAP, lines)
    assert action is not None
    new = _apply(lines, action.edits)
    data = yaml.safe_load(new)
    entries = data["accept"]
    assert {"code": code, "block": f.block, "reason": ""} in entries
    assert len(entries) == (0 if tail in ("", "accept: []\n") else 1) + 1
    # the empty reason accepts nothing: the file does not validate until the user writes why
    assert not any(g.accepted for g in _findings_of(new))
    written = new.replace('reason: ""', 'reason: "on purpose"')
    after = _finding_of(written, code)
    assert after.accepted and after.accept_reason == "on purpose"


def test_no_accept_for_findings_of_files_that_do_not_resolve():
    f = Finding("schema.unknown-key", "error", "unknown key 'blcoks' in top level", "x.yaml", 4, 1,
                hint="did you mean 'blocks'?")
    assert accept_action(f, "x.yaml", ["seqgen: 1", "blcoks: []"]) is None


def test_did_you_mean_renames_the_key_and_a_unit_fix_writes_the_value():
    lines = ["seqgen: 1", "blcoks:", "  - name: a"]
    f = Finding("schema.unknown-key", "error", "unknown key 'blcoks' in top level", "x.yaml", 2, 1,
                hint="did you mean 'blocks'?")
    (e,) = fix_action(f, lines).edits
    assert (e.start_line, e.start_char, e.end_char, e.text) == (1, 0, 6, "blocks")
    lines = ["params:", "  kick_time: 2  # the kick"]
    f = Finding("schema.missing-unit", "error", "param 'kick_time' is 2 with no unit", "x.yaml", 2, 3,
                hint="write 'kick_time: 2 ms' (or another time unit: us, s, ns)")
    (e,) = fix_action(f, lines).edits
    assert _apply(lines, [e]).split("\n")[1] == "  kick_time: 2 ms  # the kick"
    lines = ["      - ramp: {channel: guide_power, to: 0.5 W, over: 5}"]
    f = Finding("schema.missing-unit", "error", "over needs a time", "x.yaml", 1, 51, hint="write '5 ms'")
    (e,) = fix_action(f, lines).edits
    assert _apply(lines, [e]) == "      - ramp: {channel: guide_power, to: 0.5 W, over: 5 ms}"


def test_related_places_read_off_a_finding():
    f = Finding("timing.overlap", "error", "'x': set in block 'a' (s.yaml:9:9) overlaps ramp in block 'a' "
                "(s.yaml:8:9) running until 50 ms", "s.yaml", 9, 9)
    assert [(r.file, r.line, r.character) for r in related_of(f)] == [("s.yaml", 7, 8)]
    f = Finding("schema.duplicate-key", "error", "key 'over' appears twice in this mapping (first on line 8)",
                "s.yaml", 9, 5)
    assert [(r.file, r.line) for r in related_of(f)] == [("s.yaml", 7)]
    f = Finding("physics.pulse-detuned", "warning", "the |1,-1> -> |2,-2> line 1.769105449 GHz, line 2 GHz",
                "s.yaml", 3, 1)
    assert related_of(f) == ()  # a spectral line is no line of the file
    f = Finding("timing.anchor-cycle", "error", "blocks are anchored on each other in a cycle: a -> b -> a",
                "s.yaml", 5, 5)
    names = {"a": SourcePos("s.yaml", 5, 5), "b": SourcePos("s.yaml", 8, 5)}
    assert [(r.line, r.character) for r in related_of(f, names)] == [(7, 4)]
    f = Finding("hardware.wiring-line-shared", "error", "line 'trig' wires both 'dio2' (advance) and 'ao' (start)",
                "r.yaml", 11, 13)
    names = {"dio2": SourcePos("r.yaml", 6, 3), "ao": SourcePos("r.yaml", 9, 3), "trig": SourcePos("r.yaml", 3, 3)}
    assert [(r.line, r.character) for r in related_of(f, names)] == [(5, 2), (8, 2)]


def test_a_span_covers_the_word_at_the_place_and_stays_in_the_text():
    assert span(["  - ramp: {x: 1}"], 1, 5) == (0, 4, 8)
    assert span(["a: 1"], 0, 0) == (0, 0, 0)
    assert span(["a: 1"], 7, 3) == (0, 0, 0)  # past the end (a stale place): the first line
    assert span(["a:   "], 1, 4) == (0, 0, 2)


def test_the_unsaved_texts_are_checked_not_the_files(project):
    seq, rig = file_of("sequences/na23_thermometry.yaml"), file_of("sequences/rigs/na23_demo_rig.yaml")
    text = seq.read_text(encoding="utf-8")
    assert not [d for ds in analyse(seq, text, 1, {}).diagnostics.values() for d in ds if d.severity == 1]
    broken = analyse(seq, text.replace("tof: 8 ms", "tof: 8"), 1, {})
    assert "schema.missing-unit" in {d.code for d in broken.diagnostics[seq]}
    # an unsaved rig: its finding is shown in the rig and at the sequence's rig: key
    rig_text = rig.read_text(encoding="utf-8").replace("device: dio_main", "device: dio_mian", 1)
    a = analyse(seq, text, 1, {rig: rig_text})
    assert rig in a.reads
    assert "schema.bad-rig" in {d.code for d in a.diagnostics[rig]}
    at_key = [d for d in a.diagnostics[seq] if d.code == "schema.bad-rig"]
    assert at_key and text.split("\n")[at_key[0].line].startswith("rig:")
    assert seq.read_text(encoding="utf-8") == text


def test_a_misspelt_name_inside_a_value_is_renamed_alone():
    lines = ["  - name: b", "    after: aa + 1 ms"]
    f = Finding("timing.unknown-block", "error", "block 'b' is anchored after unknown block 'aa'", "x.yaml", 2, 5,
                hint="did you mean 'a'?")
    assert _apply(lines, fix_action(f, lines).edits).split("\n")[1] == "    after: a + 1 ms"


def _fixable():
    """(fault file, code, 1-based line) of every finding of the fault corpus whose fix a code action writes."""
    out = []
    for path in sorted(Path("sequences/faults").glob("*.yaml")):
        p = file_of(str(path))
        text = p.read_text(encoding="utf-8")
        for d in analyse(p, text, 1, {}).diagnostics.get(p, ()):
            if d.finding.file == str(path) and fix_action(d.finding, text.split("\n")) is not None:
                out.append((path, d.finding))
    return out


def test_every_fix_a_code_action_writes_clears_its_finding():
    """As tests/test_applied_fixes.py does for the demos: each fix of the fault corpus a code action offers,
    applied, leaves no finding of that code at that line."""
    fixable = _fixable()
    assert len(fixable) >= 10
    left = []
    for path, f in fixable:
        p = file_of(str(path))
        lines = p.read_text(encoding="utf-8").split("\n")
        new = _apply(lines, fix_action(f, lines).edits)
        after = analyse(p, new, 2, {}).diagnostics.get(p, ())
        if any(d.finding.code == f.code and d.finding.line == f.line for d in after):
            left.append((path.name, f.code, f.line, f.hint))
    assert left == []
