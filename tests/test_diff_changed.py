"""`seqgen diff`: a finding of both versions whose message, fix or severity moved is reported as changed.

A finding's numbers are predictions (a transmitted fraction, a separation, a proposed duration): a version
that moves them must not read as "unchanged". What each version says is taken from an independent
`seqgen check --json` of it (a separate process), never from the diff under test.
"""

from __future__ import annotations

import io
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import jsonschema

from seqgen.caution import CAUTION
from seqgen.cli import main
from seqgen.diff import diff_paths, to_dict, to_text
from seqgen.diff.gitdriver import git_external_diff

from .conftest import ROOT

SCHEMA = json.loads((ROOT / "schemas" / "diff.schema.json").read_text(encoding="utf-8"))
SCAN = "tof: {value: 14 ms, min: 1 ms, scan: {from: 10 ms, to: 14 ms, steps: 3}}"
NO_SCAN = "tof: {value: 14 ms, min: 1 ms}"  # the diff compares a scanned file at its base values: check those


def _edit(src: Path, dst: Path, *pairs) -> Path:
    text = src.read_text(encoding="utf-8")
    for old, new in pairs:
        assert text.count(old) == 1, old
        text = text.replace(old, new)
    dst.write_text(text, encoding="utf-8")
    return dst


def _check(path: Path) -> list:
    """The findings `seqgen check PATH --json` prints, run in a process of its own."""
    proc = subprocess.run([sys.executable, "-m", "seqgen", "check", str(path), "--json"], capture_output=True,
                          text=True, env={**os.environ, "PYTHONPATH": str(ROOT)}, timeout=300)
    assert "Traceback" not in proc.stderr, proc.stderr
    return json.loads(proc.stdout)["findings"]


def _by_key(findings: list) -> dict:
    out: dict = {}
    for f in findings:
        out.setdefault((f["code"], f["block"]), []).append(f)
    return out


def _said(f: dict) -> tuple:
    return f["message"], f["hint"], f["severity"], f["accepted"]


def _expected(old: list, new: list) -> tuple[dict, set]:
    """(code, block) -> (old, new) of the findings that say something else; the keys that say the same
    (one finding per code and block on each side: the demo's case)."""
    a, b = _by_key(old), _by_key(new)
    changed, same = {}, set()
    for key in a.keys() & b.keys():
        assert len(a[key]) == len(b[key]) == 1, key
        if _said(a[key][0]) == _said(b[key][0]):
            same.add(key)
        else:
            changed[key] = (a[key][0], b[key][0])
    return changed, same


def _barrier_pair(project: Path, new_power: str) -> tuple[Path, Path]:
    seq = project / "sequences"
    demo = seq / "na23_barrier_scatter.yaml"
    old = _edit(demo, seq / "old.yaml", (SCAN, NO_SCAN))
    new = _edit(demo, seq / "new.yaml", (SCAN, NO_SCAN), ("sheet_power: 0.48 mW", f"sheet_power: {new_power}"))
    return old, new


def test_a_moved_barrier_prediction_is_changed_not_unchanged(project, capsys):
    """The barrier demo with a weaker sheet (0.48 mW -> 0.30 mW): the transmitted fraction moves."""
    old, new = _barrier_pair(project, "0.30 mW")
    fa, fb = _check(old), _check(new)
    changed, same = _expected(fa, fb)
    key = ("physics.barrier-transmission", "scatter")
    assert key in changed  # the independent runs disagree: a prediction moved
    frac = [re.search(r"transmitted fraction (\S+)", f["message"]).group(1) for f in changed[key]]
    assert frac[0] != frac[1]

    rep = diff_paths("sequences/old.yaml", "sequences/new.yaml")
    got = {(c.data["code"], c.data["block"]): c for c in rep.changed_findings}
    assert set(got) == set(changed)
    assert {(f.code, f.block) for f in rep.unchanged_findings} == same
    for k, (x, y) in changed.items():
        c = got[k]
        assert c.level == "preflight" and c.kind == "finding-changed"
        for side, f in (("old", x), ("new", y)):
            assert (c.data[side]["message"], c.data[side]["hint"], c.data[side]["severity"],
                    c.data[side]["accepted"]) == _said(f)

    text = to_text(rep)
    assert f"~ {len(changed)} finding(s) changed" in text
    assert f"transmitted fraction {frac[0]} -> {frac[1]}" in text
    assert f"= {len(same)} finding(s) unchanged" in text

    doc = to_dict(rep)
    jsonschema.validate(doc, SCHEMA)
    assert doc["caution"] == CAUTION and not doc["identical"]
    assert doc["summary"]["changed_findings"] == len(changed)
    assert doc["summary"]["unchanged_findings"] == len(same)
    entry = next(e for e in doc["changed_findings"] if (e["code"], e["block"]) == key)
    assert set(entry) == {"code", "block", "file", "line", "old", "new"}
    old_f, new_f = changed[key]
    assert entry["line"] == new_f["line"] and entry["file"] == new_f["file"]
    assert entry["old"] == {k: old_f[k] for k in ("message", "hint", "severity", "accepted")}
    assert entry["new"] == {k: new_f[k] for k in ("message", "hint", "severity", "accepted")}
    assert entry["old"]["message"] != entry["new"]["message"]
    # the existing keys stay: the change is also a preflight entry, and the unchanged list holds the rest
    assert any(c["kind"] == "finding-changed" and c["subject"] == "physics.barrier-transmission [scatter]"
               for c in doc["changes"])
    assert {(f["code"], f["block"]) for f in doc["unchanged_findings"]} == same

    # the command line: exit 1 (a difference), JSON and text both carry the caution
    assert main(["diff", "sequences/old.yaml", "sequences/new.yaml", "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    jsonschema.validate(out, SCHEMA)
    assert out["caution"] == CAUTION and len(out["changed_findings"]) == len(changed)
    assert main(["diff", "sequences/old.yaml", "sequences/new.yaml"]) == 1
    lines = capsys.readouterr().out.rstrip("\n").splitlines()
    assert lines[-1] == "caution: " + CAUTION and f"  ~ {len(changed)} finding(s) changed (old -> new):" in lines

    # git's external diff driver prints the same groups (the old blob handed over as a file elsewhere)
    buf = io.StringIO()
    assert git_external_diff(["sequences/new.yaml", str(old), "1" * 40, "100644", str(new), "2" * 40, "100644"],
                             out=buf) == 0
    assert f"transmitted fraction {frac[0]} -> {frac[1]}" in buf.getvalue()
    assert f"~ {len(changed)} finding(s) changed" in buf.getvalue() and "caution: " + CAUTION in buf.getvalue()


def test_identical_versions_have_no_changed_findings(project):
    """The same sequence, once as written and once with comment lines that move every line below them."""
    seq = project / "sequences"
    old, _ = _barrier_pair(project, "0.48 mW")
    moved = _edit(old, seq / "moved.yaml", ("blocks:\n", "# one\n# two\nblocks:\n"))
    fa, fb = _check(old), _check(moved)
    blocks_line = old.read_text(encoding="utf-8").splitlines().index("blocks:") + 1
    own = [(f["code"], f["line"]) for f in fa if f["file"].endswith("old.yaml") and f["line"] > blocks_line]
    assert own and [(c, n + 2) for c, n in own] == [(f["code"], f["line"]) for f in fb
                                                    if f["file"].endswith("moved.yaml")]
    for other in ("sequences/old.yaml", "sequences/moved.yaml"):
        rep = diff_paths("sequences/old.yaml", other)
        assert rep.identical and rep.changed_findings == []
        assert len(rep.unchanged_findings) == len(fa)
        doc = to_dict(rep)
        jsonschema.validate(doc, SCHEMA)
        assert doc["changed_findings"] == [] and doc["summary"]["changed_findings"] == 0
        assert doc["caution"] == CAUTION
        assert "finding(s) changed" not in to_text(rep)


def test_a_finding_that_only_names_a_moved_line_or_another_file_name_is_unchanged(project):
    """A finding whose message names a place (file:line of the frequency write) is the same finding when the
    lines move and the file is another one: the raw texts differ, what they say does not."""
    faults = project / "sequences" / "faults"
    old = faults / "synth_settling.yaml"
    new = _edit(old, faults / "settling_moved.yaml", ("blocks:\n", "# one\n# two\nblocks:\n"))
    fa, fb = _check(old), _check(new)
    assert fa and [f["message"] for f in fa] != [f["message"] for f in fb]  # the places it names moved
    rep = diff_paths(str(old.relative_to(project)), str(new.relative_to(project)))
    assert rep.identical and not rep.changed_findings
    assert sorted(f.code for f in rep.unchanged_findings) == sorted(f["code"] for f in fb)


def test_a_changed_severity_is_reported(project):
    """safety.left-on of the same block: a coil current left on (kick_current) against a shutter left open
    (probe_shutter): the rule words both and gives each its severity; the independent checks say which."""
    faults = project / "sequences" / "faults"
    old = faults / "left_on.yaml"
    new = _edit(old, faults / "left_on_shutter.yaml", ("- ramp: {channel: kick_current, to: 20 A, over: 1 ms}",
                                                       "- set: {channel: probe_shutter, value: 1}"))
    (x,) = [f for f in _check(old) if f["code"] == "safety.left-on"]
    (y,) = [f for f in _check(new) if f["code"] == "safety.left-on"]
    assert x["severity"] != y["severity"] and x["block"] == y["block"]
    rep = diff_paths(str(old.relative_to(project)), str(new.relative_to(project)))
    (c,) = [c for c in rep.changed_findings if c.data["code"] == "safety.left-on"]
    assert (c.data["old"]["severity"], c.data["new"]["severity"]) == (x["severity"], y["severity"])
    assert (c.data["old"]["message"], c.data["new"]["message"]) == (x["message"], y["message"])
    assert f"severity {x['severity']} -> {y['severity']}" in c.message
    assert "'kick_current' -> 'probe_shutter'" in c.message  # the output the message names (the edit itself)
    doc = to_dict(rep)
    jsonschema.validate(doc, SCHEMA)
    (e,) = [e for e in doc["changed_findings"] if e["code"] == "safety.left-on"]
    assert e["old"]["severity"] == x["severity"] and e["new"]["severity"] == y["severity"]
    assert e["line"] == y["line"] and doc["caution"] == CAUTION
    assert "safety.left-on" not in [f["code"] for f in doc["unchanged_findings"]]
