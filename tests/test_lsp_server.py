"""`seqgen language-server` end to end: a real LSP client (pytest-lsp) over stdio against the server started as
`python -m seqgen language-server` in a copy of the demos, compared with what `seqgen check --json` says of
the same files."""

from __future__ import annotations

import io
import json
import re
import subprocess
import sys
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import pytest

pytest.importorskip("pytest_lsp")


from lsprotocol import types as lsp  # noqa: E402

from seqgen import CAUTION  # noqa: E402
from seqgen.cli import main  # noqa: E402

from .conftest import ROOT, SEQUENCES  # noqa: E402
from .lsp_client import Doc, apply_text_edits, forget, uri_of, wait_diagnostics  # noqa: E402

THERMO = "sequences/na23_thermometry.yaml"
SCATTER = "sequences/na23_barrier_scatter.yaml"
RIG = "sequences/rigs/na23_demo_rig.yaml"
PREP = "sequences/common/na23_prep.yaml"
_EXPECT = re.compile(r"^#\s*expect:\s*([a-z]+\.[a-z0-9-]+)(?:\s*@\s*(\d+))?")


def check_json(path) -> dict:
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        main(["check", str(path), "--json", "--jobs", "1"])
    assert "Traceback" not in err.getvalue()
    return json.loads(out.getvalue())


def shown(diags) -> list:
    """(code, 1-based line, 1-based column, severity name, the finding as JSON) of each diagnostic."""
    names = {1: "error", 2: "warning", 3: "note"}
    return sorted(((d.code, d.range.start.line + 1, d.range.start.character + 1, names.get(d.severity, "accepted"),
                    json.dumps(d.data["finding"], sort_keys=True)) for d in diags), key=str)


def expected(findings) -> list:
    return sorted(((f["code"], f["line"], f["column"], f["severity"], json.dumps(f, sort_keys=True))
                   for f in findings), key=str)


@pytest.mark.asyncio
async def test_demo_and_fault_diagnostics_equal_check_json(client):
    for rel in (THERMO, "sequences/faults/overlap.yaml", "sequences/faults/trap_ramp_overridden.yaml"):
        doc = Doc(client, Path(rel))
        diags = await doc.open()
        want = check_json(rel)["findings"]
        assert shown(diags) == expected(want), rel
        for d in diags:  # source, the fix in the message, the message as check prints it, the caution
            f = d.data["finding"]
            assert d.source == "seqgen" and f["message"] in d.message and d.data["caution"] == CAUTION
            assert (f"fix: {f['hint']}" in d.message) == bool(f["hint"])
        doc.close()
    assert any(CAUTION in m.message for m in client.log_messages)  # said once, when the session starts


@pytest.mark.asyncio
async def test_scanned_demo_shows_every_shots_findings(client):
    diags = await Doc(client, Path(SCATTER)).open()
    doc = check_json(SCATTER)
    per_shot = [f for shot in doc["shots"] for f in shot["findings"]] + doc["findings"]
    assert {(d.code, d.range.start.line + 1, d.range.start.character + 1) for d in diags} == \
        {(f["code"], f["line"], f["column"]) for f in per_shot}
    messages = {f["message"] for f in per_shot}
    assert all(d.data["finding"]["message"] in messages for d in diags)


def _fault_sample():
    """Every eighth fault file (sorted), with its expected code and line: rig, scan, syntax and cycle faults."""
    out = []
    for path in sorted((SEQUENCES / "faults").glob("*.yaml"))[::8]:
        m = _EXPECT.match(path.read_text(encoding="utf-8").splitlines()[0])
        if m:
            out.append((path.name, m.group(1), int(m.group(2)) if m.group(2) else None))
    return out


@pytest.mark.asyncio
async def test_fault_files_show_their_expected_code_at_their_line(client, project):
    sample = _fault_sample()
    assert len(sample) >= 15
    missing = []
    for name, code, line in sample:
        doc = Doc(client, project / "sequences" / "faults" / name)
        diags = await doc.open()
        # a finding in another file (the rig it names) is shown there and at the rig: / use: key here
        elsewhere = [d for uri, ds in client.diagnostics.items() if uri != doc.uri for d in ds]
        found = {(d.code, d.data["finding"]["line"]) for d in diags + elsewhere}
        if (code, line) not in found and not (line is None and code in {c for c, _ in found}):
            missing.append((name, code, line, sorted(found)))
        doc.close()
    assert missing == []


@pytest.mark.asyncio
async def test_overlap_names_the_other_write_as_related_information(client, project):
    diags = await Doc(client, project / "sequences" / "faults" / "overlap.yaml").open()
    overlap = [d for d in diags if d.code == "timing.overlap"]
    assert overlap and overlap[0].related_information
    other = overlap[0].related_information[0].location
    # the fault file: a ramp at line 8 and a set at line 9 of the same output (read off the file)
    text = (project / "sequences" / "faults" / "overlap.yaml").read_text(encoding="utf-8").split("\n")
    assert overlap[0].range.start.line == 8 and "set:" in text[8]
    assert other.uri == uri_of(project / "sequences" / "faults" / "overlap.yaml") and other.range.start.line == 7
    assert "ramp:" in text[7]


@pytest.mark.asyncio
async def test_anchor_cycle_points_at_every_block_of_the_cycle(client, project):
    diags = await Doc(client, project / "sequences" / "faults" / "anchor_cycle.yaml").open()
    cycle = [d for d in diags if d.code == "timing.anchor-cycle"][0]
    lines = (project / "sequences" / "faults" / "anchor_cycle.yaml").read_text(encoding="utf-8").split("\n")
    named = {lines[cycle.range.start.line].strip()} | {lines[r.location.range.start.line].strip()
                                                      for r in cycle.related_information}
    assert named == {"- name: a", "- name: b"}


@pytest.mark.asyncio
async def test_unsaved_text_is_checked_and_a_rig_change_rechecks_its_sequences(client, project):
    seq = Doc(client, project / THERMO)
    assert [d for d in await seq.open() if d.severity == 1] == []
    # the unsaved buffer, not the file: a bare number where a time is needed
    m = re.search(r"duration: (\d+(?:\.\d+)?) (ms|us|s)\b", seq.text)
    diags = await seq.replace_all(seq.text.replace(m.group(0), f"duration: {m.group(1)}", 1))
    assert "schema.missing-unit" in {d.code for d in diags}
    await seq.replace_all((project / THERMO).read_text(encoding="utf-8"))
    # open the rig and lower a hard limit under what the sequence writes: the sequence is checked again
    rig = Doc(client, project / RIG)
    own = await rig.open()
    assert "schema.rig-file" in {d.code for d in own}  # a rig on its own is checked as a rig
    forget(client, seq.uri)
    m = re.search(r"(cross_a_power:.*?hard_limit: \{min: [^,]+, max: )([\d.]+) W", rig.text, re.S)
    assert m, "the demo rig gives cross_a_power (the evaporation beam of the prep) a hard limit in W"
    lines = rig.text[:m.end(1)].split("\n")
    rig.send([(len(lines) - 1, len(lines[-1]), len(lines) - 1, len(lines[-1]) + len(m.group(2)), "0.001")])
    after = await wait_diagnostics(client, seq.uri)
    assert any(d.code.startswith("safety.") or d.code.startswith("hardware.") for d in after if d.severity == 1)
    # unsaved rig text only: closing the rig reads the file again, and the sequence is clean again
    forget(client, seq.uri)
    rig.close()
    assert [d for d in await wait_diagnostics(client, seq.uri) if d.severity == 1] == []


@pytest.mark.asyncio
async def test_a_use_file_changed_on_disk_rechecks_the_sequence(client, project):
    seq = Doc(client, project / SCATTER)
    before = await seq.open()
    assert [d for d in before if d.severity == 1] == []
    prep = project / PREP
    text = prep.read_text(encoding="utf-8")
    m = re.search(r"duration: (\d+(?:\.\d+)?) (ms|s)\b", text)
    prep.write_text(text.replace(m.group(0), f"duration: {m.group(1)}", 1), encoding="utf-8")
    forget(client, seq.uri)
    forget(client, uri_of(prep))
    client.workspace_did_change_watched_files(lsp.DidChangeWatchedFilesParams(
        changes=[lsp.FileEvent(uri=uri_of(prep), type=lsp.FileChangeType.Changed)]))
    after = await wait_diagnostics(client, seq.uri)
    # shown in the sequence at its use: entry, and in the used file itself
    assert "schema.missing-unit" in {d.code for d in after}
    assert "schema.missing-unit" in {d.code for d in await wait_diagnostics(client, uri_of(prep))}


async def _actions(client, doc, line: int) -> list:
    return await client.text_document_code_action_async(lsp.CodeActionParams(
        text_document=lsp.TextDocumentIdentifier(uri=doc.uri),
        range=lsp.Range(start=lsp.Position(line=line, character=0), end=lsp.Position(line=line, character=0)),
        context=lsp.CodeActionContext(diagnostics=[])))


@pytest.mark.asyncio
async def test_did_you_mean_and_unit_fixes_applied_clear_the_finding(client, project):
    for name, code, want in (("unknown_key.yaml", "schema.unknown-key", "blocks:"),
                             ("missing_unit.yaml", "schema.missing-unit", None)):
        doc = Doc(client, project / "sequences" / "faults" / name)
        diags = [d for d in await doc.open() if d.code == code]
        assert diags, name
        actions = [a for a in await _actions(client, doc, diags[0].range.start.line) if a.edit and a.is_preferred]
        assert actions, name
        new = apply_text_edits(doc.text, actions[0].edit.changes[doc.uri])
        if want:
            assert want in new.split("\n")[diags[0].range.start.line]
        after = await doc.replace_all(new)
        assert (code, diags[0].range.start.line) not in {(d.code, d.range.start.line) for d in after}, (name, after)
        doc.close()


@pytest.mark.asyncio
async def test_accepting_a_finding_inserts_an_accept_entry_and_reports_it_accepted(client, project):
    path = project / "sequences" / "faults" / "overlap.yaml"
    code = _EXPECT.match(path.read_text(encoding="utf-8").splitlines()[0]).group(1)
    doc = Doc(client, path)
    diags = [d for d in await doc.open() if d.code == code]
    assert diags and diags[0].severity in (1, 2)
    accept = [a for a in await _actions(client, doc, diags[0].range.start.line) if a.title.startswith("Accept")]
    assert accept
    new = apply_text_edits(doc.text, accept[0].edit.changes[doc.uri])
    assert new.count("accept:") == 1 and 'reason: ""' in new
    # the empty reason accepts nothing: the schema asks for one at that line
    blocked = await doc.replace_all(new)
    assert not any(d.data["finding"]["accepted"] for d in blocked if "finding" in d.data)
    assert any(d.code == "schema.bad-value" for d in blocked)
    written = new.replace('reason: ""', 'reason: "overlap on purpose"')
    after = [d for d in await doc.replace_all(written) if d.code == code]
    assert after and all(d.severity == 4 and d.data["finding"]["accepted"] for d in after)
    assert "(accepted: overlap on purpose)" in after[0].message
    # a second finding accepted into the same list: appended, still one accept: key
    others = [d for d in await wait_diagnostics(client, doc.uri) if not d.data["finding"]["accepted"]
              and not d.code.startswith("schema.")]
    if others:
        more = [a for a in await _actions(client, doc, others[0].range.start.line) if a.title.startswith("Accept")]
        newer = apply_text_edits(doc.text, more[0].edit.changes[doc.uri])
        assert newer.count("accept:") == 1 and newer.count('reason: ""') == 1
        final = await doc.replace_all(newer.replace('reason: ""', 'reason: "also on purpose"'))
        assert all(d.data["finding"]["accepted"] for d in final if d.code == others[0].code)


def test_without_pygls_the_command_says_how_to_install_it():
    code = ("import sys; sys.modules['pygls'] = None; sys.modules['lsprotocol'] = None\n"
            "from seqgen.cli import main; sys.exit(main(['language-server']))")
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                          env={"PYTHONPATH": str(ROOT), "PATH": ""})
    assert done.returncode == 2
    assert "pip install 'seqgen[lsp]'" in done.stderr and "Traceback" not in done.stderr


def test_help_does_not_import_the_server():
    code = "import sys; from seqgen.cli import build_parser; build_parser(); print('pygls' in sys.modules)"
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True,
                          env={"PYTHONPATH": str(ROOT), "PATH": ""})
    assert done.stdout.strip() == "False", done.stderr
