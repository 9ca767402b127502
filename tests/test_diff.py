"""Semantic diff (`seqgen diff`): the version-pair corpus in tests/diff_corpus/,
git revisions, git's external diff driver, build folders, the JSON shape and
the exit codes.

What the expected entries rest on: each corpus pair's edit and what it means
(which block it lengthens, which anchor chain carries the shift), the rig file's
calibrations and DAC resolutions (a value of 32 A on a 0.1 V/A, 16-bit 0..10 V
output is 3.2 V within one code), closed forms of the ramp shapes, git's
documented external-diff calling convention and the JSON Schema draft 2020-12
meta-schema. Never numbers the diff itself produced.
"""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
from collections import Counter
from pathlib import Path

import jsonschema
import pytest
import yaml

from seqgen.cli import main
from seqgen.diff import DiffInputError, diff_paths, diff_versions, load_version, to_dict, to_text

from .conftest import ROOT

CORPUS = Path(__file__).resolve().parent / "diff_corpus"
RIG = CORPUS / "rig.yaml"  # a frozen copy of the demo rig
CASES = yaml.safe_load((CORPUS / "cases.yaml").read_text(encoding="utf-8"))
SCHEMA = json.loads((ROOT / "schemas" / "diff.schema.json").read_text(encoding="utf-8"))
LSB_16_20V = 20.0 / 65535  # the demo rig's cross_a / cross_b outputs: 16 bits over -10..10 V (the rig file)
LSB_16_10V = 10.0 / 65535  # 16 bits over 0..10 V (kick_current, sheet_power, guide_power in the rig file)


def _apply(folder: Path, edits: dict | None) -> None:
    for name, pairs in (edits or {}).items():
        path = folder / name
        text = path.read_text(encoding="utf-8")
        for old, new in pairs:
            assert text.count(old) == 1, f"corpus edit of {name}: {old!r} occurs {text.count(old)} times"
            text = text.replace(old, new)
        path.write_text(text, encoding="utf-8")


def _version_folder(tmp_path: Path, side: str, base: str, edits=None, files=None) -> Path:
    folder = tmp_path / side
    folder.mkdir()
    for name in ("small.yaml", "prep.yaml", "trap.yaml"):
        shutil.copy(CORPUS / name, folder / name)
    shutil.copy(RIG, folder / "rig.yaml")
    for name, replacement in (files or {}).items():
        shutil.copy(CORPUS / replacement, folder / name)
    _apply(folder, edits)
    return folder / base


def _entries(rep) -> Counter:
    return Counter(f"{c.level} {c.kind} {c.subject}" for c in rep.changes)


def _run_case(case, tmp_path):
    base = case.get("base", "small.yaml")
    old = _version_folder(tmp_path, "old", base, case.get("old_edits"), case.get("old_files"))
    new = _version_folder(tmp_path, "new", base, case.get("edits"), case.get("new_files"))
    return diff_paths(str(old), str(new))


def _check_data(entry, expected: dict):
    for key, want in expected.items():
        got = entry.data.get(key)
        if isinstance(want, float):
            # quantization to 16-bit codes: values agree to a few parts in 1e4 of full scale
            assert got is not None and math.isclose(got, want, rel_tol=1e-3, abs_tol=1e-9), (key, got, want)
        else:
            assert got == want, (entry.subject, key, got, want)


def test_corpus_is_large_enough():
    assert len(CASES) >= 15
    assert len({c["name"] for c in CASES}) == len(CASES)


@pytest.mark.parametrize("case", CASES, ids=[c["name"] for c in CASES])
def test_corpus_pair(case, tmp_path):
    rep = _run_case(case, tmp_path)
    got = _entries(rep)
    want = Counter(case["expect"])
    optional = set(case.get("optional") or ())
    extra = {k: n for k, n in (got - want).items() if k not in optional}
    missing = dict(want - got)
    assert not missing and not extra, f"{case['name']} ({case['why']}): missing {missing}, unexpected {extra}\n" + to_text(rep)
    assert rep.identical == (not case["expect"])
    for key, expected in (case.get("data") or {}).items():
        level, kind, subject = key.split(" ", 2)
        hits = rep.find(level, kind, subject)
        assert len(hits) == 1, key
        _check_data(hits[0], expected)
    jsonschema.validate(to_dict(rep), SCHEMA)


# ----------------------------------------------------------------------------- specific numbers


def _case(name):
    return next(c for c in CASES if c["name"] == name)


def test_shift_windows_follow_the_edit(tmp_path):
    """kick_time 2 -> 3 ms. Base timeline (from the files): load at 1 ms for 20 ms, ramp_down 40 ms,
    kick after ramp_down + 2 ms -> 63 ms; so the kick current ends at 65 ms (old) / 66 ms (new)."""
    rep = _run_case(_case("param_shifts_downstream"), tmp_path)
    (kick,) = rep.find("output", "output-differs", "kick_current")
    (w,) = kick.data["windows"]
    assert w["start_s"] == pytest.approx(0.065, abs=1e-9) and w["end_s"] == pytest.approx(0.066, abs=1e-9)
    # 8 G/cm over 0.25 G/cm/A = 32 A; 0.1 V/A -> 3.2 V, on a 16-bit 0..10 V output (the rig file)
    assert w["old"] == pytest.approx(0.0, abs=LSB_16_10V) and w["new"] == pytest.approx(3.2, abs=LSB_16_10V)
    assert w["new_physical"] == pytest.approx(32.0, abs=LSB_16_10V / 0.1)
    # the release of cross_a moves from 66 ms to 67 ms, less its 500 ns fall latency (the rig file), which is half
    # a 1 us tick of ao_main and so rounds to the later tick (README, timing rules): 66 ms .. 67 ms
    (cross,) = rep.find("output", "output-differs", "cross_a_power")
    (w,) = cross.data["windows"]
    assert w["start_s"] == pytest.approx(0.066, abs=1e-9) and w["end_s"] == pytest.approx(0.067, abs=1e-9)
    assert cross.data["max_deviation_physical"] == pytest.approx(0.5, abs=LSB_16_20V / 2.0)  # 0.5 W held instead of 0 W
    # the text report groups by level and gives times in ms
    text = to_text(rep)
    assert text.index("outputs (compiled") < text.index("resolved timeline")
    assert "+1 ms" in text and "65 ms" in text and "via image <- release <- kick" in text


def test_shape_change_deviation_matches_closed_form(tmp_path):
    """smooth f = (1 - cos(pi s)) / 2 against linear f = s (shapes documented in seqgen/compile/shapes.py):
    the largest gap is at sin(pi s) = 2 / pi, |gap| = asin(2/pi)/pi - (1 - sqrt(1 - 4/pi^2))/2 = 0.10526
    (calculus on the two closed forms), times the 1.5 W span of the ramp (2 W -> 0.5 W)."""
    rep = _run_case(_case("ramp_shape_changed"), tmp_path)
    (c,) = rep.find("output", "output-differs", "cross_a_power")
    gap = math.asin(2 / math.pi) / math.pi - (1 - math.sqrt(1 - 4 / math.pi ** 2)) / 2
    lsb_w = LSB_16_20V / 2.0  # 2 V/W (the rig file)
    assert c.data["max_deviation_physical"] == pytest.approx(1.5 * gap, abs=3 * lsb_w)
    assert c.data["max_deviation"] == pytest.approx(2.0 * 1.5 * gap, abs=3 * LSB_16_20V)
    # every window lies inside the ramp (21 ms .. 61 ms, less the 500 ns latency)
    for w in c.data["windows"]:
        assert 0.021 - 1e-6 <= w["start_s"] and w["end_s"] <= 0.061


def test_latency_window(tmp_path):
    """The shutter opens for image at 71 ms; with 3.2 ms rise latency it is commanded at 67.8 ms, with 4.2 ms at
    66.8 ms (rig file numbers; latency compensation as the README describes)."""
    rep = _run_case(_case("latency_changed"), tmp_path)
    (c,) = rep.find("output", "output-differs", "probe_shutter")
    (w,) = c.data["windows"]
    assert (w["start_s"], w["end_s"]) == (pytest.approx(0.0668, abs=1e-9), pytest.approx(0.0678, abs=1e-9))
    assert (w["old"], w["new"]) == (0.0, 1.0)
    (r,) = rep.find("rig", "latency", "probe_shutter.latency_rise_s")
    assert r.data["written"] == ["probe_shutter"]


def test_calibration_change_keeps_physical_values(tmp_path):
    """Only the calibration changed (the edit): the voltages differ by about the 0.1 V moved at the 1 W table
    point, while the commanded powers are the same. Converted back through each version's calibration they agree
    to far better than the 0.1 V / (1.9 V/W) = 53 mW the voltage change stands for; what remains (about 1 mW)
    is the inversion of a table calibration, which interpolates the swapped table rather than inverting the
    forward interpolation exactly."""
    rep = _run_case(_case("calibration_changed"), tmp_path)
    (c,) = rep.find("output", "output-differs", "cross_b_power")
    assert c.data["max_deviation"] >= 0.1 - 2 * LSB_16_20V
    assert c.data["max_deviation_physical"] < 0.05 * 0.1 / 1.9


def test_shift_cause_is_upstream_not_direct(tmp_path):
    """In a chain load <- ramp_down <- kick <- release <- image only the edited block is 'edited'."""
    rep = _run_case(_case("used_file_anchor"), tmp_path)
    causes = {c.subject: c.data["cause"] for c in rep.find("resolved", "block-shifted")}
    assert causes == {"load": "edited", "ramp_down": "upstream", "kick": "upstream", "release": "upstream",
                      "image": "upstream"}
    for c in rep.find("resolved", "block-shifted"):
        assert c.data["shift_s"] == pytest.approx(0.001, abs=1e-12)  # at: 1 ms -> 2 ms


# ----------------------------------------------------------------------------- physics findings (one trap pair)


@pytest.fixture(scope="module")
def trap_versions(tmp_path_factory):
    """The trap base and a version ending the ramp at 10 mW; each is preflighted once (physics checks take seconds)."""
    tmp = tmp_path_factory.mktemp("trap")
    old = _version_folder(tmp, "old", "trap.yaml")
    new = _version_folder(tmp, "new", "trap.yaml", {"trap.yaml": [["end_power: 0.5 W", "end_power: 0.01 W"]]})
    return load_version(str(old)), load_version(str(new))


def test_change_introduces_physics_finding(trap_versions):
    """A single 1064 nm beam of 55 um waist (the rig file) at 10 mW holds a sodium atom far less deeply than
    gravity pulls it over the trap (m g w = 2e-29 J against a depth of order 1e-30 J at 10 mW, from the
    dipole potential of Adv. At. Mol. Opt. Phys. 42, 95 (2000)): the ramp to 10 mW loses the trap, the one to
    0.5 W does not; the finding is matched to block ramp_down."""
    old, new = trap_versions
    rep = diff_versions(old, new)
    intro = rep.find("preflight", "finding-introduced")
    assert [c.subject for c in intro] == ["physics.trap-lost [ramp_down]"]
    assert intro[0].data["severity"] == "error"
    assert rep.find("resolved", "param-changed", "end_power")
    assert {c.subject for c in rep.find("resolved", "action-changed")} == {"ramp_down/trap_ramp guide"}
    text = to_text(rep)
    assert text.splitlines()[2].startswith("preflight")  # the most consequential level comes first


def test_change_resolves_physics_finding(trap_versions):
    old, new = trap_versions
    rep = diff_versions(new, old)
    assert [c.subject for c in rep.find("preflight", "finding-resolved")] == ["physics.trap-lost [ramp_down]"]
    assert not rep.find("preflight", "finding-introduced")


def test_findings_match_by_code_and_block_not_line(tmp_path):
    """Two lines of comment above the faulty action move every line; the finding stays 'unchanged'."""
    edits = {"small.yaml": [["kick_gradient: 8 G/cm", "kick_gradient: 24 G/cm"]]}
    old = _version_folder(tmp_path, "old", "small.yaml", edits)
    moved = {"small.yaml": edits["small.yaml"] + [["blocks:\n", "# one\n# two\nblocks:\n"]]}
    new = _version_folder(tmp_path, "new", "small.yaml", moved)
    rep = diff_paths(str(old), str(new))
    assert rep.identical
    assert "safety.hard-limit" in [f.code for f in rep.unchanged_findings]  # 96 A > 80 A (the rig file)
    assert len(rep.unchanged_findings) == len(rep.old.findings) == len(rep.new.findings)
    assert [f.line + 2 for f in rep.old.findings] == [f.line for f in rep.new.findings]


# ----------------------------------------------------------------------------- git


def _git(repo, *args):
    return subprocess.run(["git", *args], cwd=repo, capture_output=True, text=True, check=True)


@pytest.fixture
def repo(tmp_path):
    if shutil.which("git") is None:
        pytest.skip("git not installed")
    r = tmp_path / "lab"
    (r / "seq").mkdir(parents=True)
    for name in ("small.yaml", "prep.yaml"):
        shutil.copy(CORPUS / name, r / "seq" / name)
    shutil.copy(RIG, r / "seq" / "rig.yaml")
    _git(r, "init", "-q")
    _git(r, "config", "user.email", "lab@example.invalid")
    _git(r, "config", "user.name", "lab")
    _git(r, "add", ".")
    _git(r, "commit", "-q", "-m", "v1")
    _apply(r / "seq", {"small.yaml": [["kick_time: 2 ms", "kick_time: 3 ms"]]})
    return r


def test_git_revision_against_working_file(repo, monkeypatch, capsys):
    monkeypatch.chdir(repo)
    assert main(["diff", "HEAD:seq/small.yaml", "seq/small.yaml", "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    jsonschema.validate(out, SCHEMA)
    assert out["old"]["kind"] == "git" and out["old"]["input"] == "HEAD:seq/small.yaml"
    kinds = {(c["kind"], c["subject"]) for c in out["changes"]}
    assert ("param-changed", "kick_time") in kinds and ("block-shifted", "image") in kinds
    # from inside the folder, REV:PATH is relative to it (git's './' form)
    monkeypatch.chdir(repo / "seq")
    assert main(["diff", "HEAD:small.yaml", "HEAD:small.yaml"]) == 0
    assert "no differences" in capsys.readouterr().out


def test_git_bad_revision_cannot_run(repo, monkeypatch, capsys):
    monkeypatch.chdir(repo)
    assert main(["diff", "nosuchrev:seq/small.yaml", "seq/small.yaml"]) == 2
    assert "cannot read nosuchrev:seq/small.yaml" in capsys.readouterr().err


def test_git_external_diff_driver(repo):
    """git's external diff protocol (gitattributes(5), 'diff.<driver>.command'): the command gets
    PATH OLD-FILE OLD-HEX OLD-MODE NEW-FILE NEW-HEX NEW-MODE and its output replaces git's (from memory)."""
    import os

    (repo / ".gitattributes").write_text("seq/*.yaml diff=seqgen\n", encoding="utf-8")
    _git(repo, "config", "diff.seqgen.command", f"'{sys.executable}' -m seqgen diff --git")
    # the used file has no rig of its own: it falls back to a line diff
    _apply(repo / "seq", {"prep.yaml": [["load_power: 2 W", "load_power: 1.8 W"]]})
    proc = subprocess.run(["git", "diff"], cwd=repo / "seq", capture_output=True, text=True,
                          env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert proc.returncode == 0, proc.stderr
    assert "seqgen diff a/seq/small.yaml -> b/seq/small.yaml" in proc.stdout
    assert "param kick_time: 2 ms -> 3 ms" in proc.stdout and "upstream: kick" in proc.stdout
    assert "-  load_power: 2 W" in proc.stdout and "+  load_power: 1.8 W" in proc.stdout


def test_git_driver_reformatting_and_new_file(repo, monkeypatch, tmp_path):
    """The driver called the way git calls it (7 arguments; /dev/null for a side that does not exist)."""
    import io

    from seqgen.diff.gitdriver import git_external_diff

    monkeypatch.chdir(repo)
    old = tmp_path / "blob_old.yaml"  # git hands the old blob over as a temporary file elsewhere
    old.write_text((CORPUS / "small.yaml").read_text(encoding="utf-8"), encoding="utf-8")
    new = repo / "seq" / "small.yaml"
    new.write_text("# a comment only\n" + old.read_text(encoding="utf-8"), encoding="utf-8")
    out = io.StringIO()
    assert git_external_diff(["seq/small.yaml", str(old), "1" * 40, "100644", str(new), "0" * 40, "100644"], out=out) == 0
    assert "no differences" in out.getvalue()
    assert "changed only in layout, comments, key order or equivalent units" in out.getvalue()
    out = io.StringIO()
    assert git_external_diff(["seq/small.yaml", "/dev/null", "0" * 40, "100644", str(new), "0" * 40, "100644"],
                             out=out) == 0
    assert "new file" in out.getvalue()
    assert git_external_diff(["too", "few"], out=io.StringIO()) == 2


# ----------------------------------------------------------------------------- build folders, inputs, exit codes


def test_build_folders(tmp_path):
    """Two build folders: tables, params and findings compare as they do between the sequence files."""
    from seqgen.emit.build import write_build
    from seqgen.pipeline import preflight

    case = _case("param_shifts_downstream")
    old = _version_folder(tmp_path, "old", "small.yaml")
    new = _version_folder(tmp_path, "new", "small.yaml", case["edits"])
    for src, out in ((old, tmp_path / "b_old"), (new, tmp_path / "b_new")):
        res = preflight(src)
        write_build(out, res.shot, res.compiled, res.findings)
    rep = diff_paths(str(tmp_path / "b_old"), str(tmp_path / "b_new"))
    jsonschema.validate(to_dict(rep), SCHEMA)
    want = {e for e in case["expect"] if e.startswith("output ")} | {"resolved param-changed kick_time"}
    assert set(_entries(rep)) == want
    # builds carry no DAC resolution: every code counts, so windows are the same or finer, never fewer outputs
    file_rep = diff_paths(str(old), str(new))
    for c in file_rep.by_level("output"):
        (b,) = rep.find("output", c.kind, c.subject)
        if c.kind == "output-differs":
            assert b.data["max_deviation"] == pytest.approx(c.data["max_deviation"], abs=1e-12)
    assert any("build folder" in n for n in rep.notes)
    assert main(["diff", str(tmp_path / "b_old"), str(tmp_path / "b_old")]) == 0


def test_not_a_build_folder(tmp_path, capsys):
    (tmp_path / "empty").mkdir()
    with pytest.raises(DiffInputError):
        load_version(str(tmp_path / "empty"))
    assert main(["diff", str(tmp_path / "empty"), str(tmp_path / "empty")]) == 2
    assert "manifest.json" in capsys.readouterr().err


def test_a_scan_build_folder_points_to_its_shots(tmp_path, capsys):
    old = _version_folder(tmp_path, "old", "small.yaml", {"small.yaml": [["  tof: 5 ms", "  tof: {value: 5 ms, scan: [4 ms, 6 ms]}"]]})
    assert main(["build", str(old), "-o", str(tmp_path / "b")]) == 0
    capsys.readouterr()
    assert main(["diff", str(tmp_path / "b"), str(tmp_path / "b")]) == 0  # a scan build against itself
    assert "no differences" in capsys.readouterr().out
    # against one shot's build or a sequence file: one line, exit 2 (the command could not run, GLOSSARY exit codes)
    for other in (tmp_path / "b" / "shot_0001", old):
        assert main(["diff", str(tmp_path / "b"), str(other)]) == 2
        err = capsys.readouterr().err
        assert "build of a scan" in err and "shot_0000" in err and len(err.strip().splitlines()) == 1
    # one shot's folder is an ordinary build: the two shots differ by the 2 ms of flight (the edit above)
    assert main(["diff", str(tmp_path / "b" / "shot_0000"), str(tmp_path / "b" / "shot_0001"), "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    dur = [c for c in out["changes"] if c["kind"] == "duration-changed"]
    assert dur and dur[0]["data"]["new_s"] - dur[0]["data"]["old_s"] == pytest.approx(0.002, abs=1e-9)


def _scan_builds(tmp_path, old_edits, new_edits):
    """Build the old version, edit the same file in place and build the new one (a shot's input hash includes its
    file path and positions, README "Parameter scans", so both are built from one path)."""
    src = _version_folder(tmp_path, "v", "small.yaml", old_edits)
    main(["build", str(src), "-o", str(tmp_path / "b_old")])
    _version_folder(tmp_path, "edited", "small.yaml", new_edits)
    shutil.copy(tmp_path / "edited" / "small.yaml", src)
    main(["build", str(src), "-o", str(tmp_path / "b_new")])
    return tmp_path / "b_old", tmp_path / "b_new"


def test_scan_builds_match_shots_by_param_values(tmp_path, capsys):
    """Old scan tof 4, 6, 8 ms; new 8, 6, 4, 10 ms (reordered, extended) with min: 5 ms, so 4 ms is refused.
    Expected from the edit: shots pair by tof, not by index (8 ms: old shot 2, new shot 0); 10 ms is new; 4 ms went
    built -> refused with one error (schema.param-out-of-range, README "Bounds"); the resolved shots of 6 and 8 ms are
    the same (the edit touches only the scan list and the bound, which the shot does not carry), while their build
    manifests differ (a manifest records the sha256 of the edited source file, README "Builds")."""
    old, new = _scan_builds(tmp_path, {"small.yaml": [["  tof: 5 ms", "  tof: {value: 5 ms, scan: [4 ms, 6 ms, 8 ms]}"]]},
                            {"small.yaml": [["  tof: 5 ms", "  tof: {value: 5 ms, scan: [8 ms, 6 ms, 4 ms, 10 ms], min: 5 ms}"]]})
    capsys.readouterr()
    rep = diff_paths(str(old), str(new))
    jsonschema.validate(to_dict(rep), SCHEMA)
    assert _entries(rep) == Counter(["resolved scan-values tof", "resolved scan-shots scan",
                                     "resolved scan-shot-added tof=10 ms", "resolved scan-shot-changed tof=4 ms",
                                     "output scan-shot-output tof=6 ms", "output scan-shot-output tof=8 ms"])
    assert rep.find(kind="scan-shots")[0].data["shots_new"] == 4
    (refused,) = rep.find(kind="scan-shot-changed")
    assert (refused.data["old"]["status"], refused.data["new"]["status"]) == ("built", "refused")
    assert (refused.data["old"]["findings"]["error"], refused.data["new"]["findings"]["error"]) == (0, 1)
    assert refused.data["new"]["input_sha256"] is None and refused.data["status_changed"]
    (eight,) = rep.find("output", "scan-shot-output", "tof=8 ms")
    assert (eight.data["old"]["index"], eight.data["new"]["index"]) == (2, 0)
    assert eight.data["old"]["input_sha256"] == eight.data["new"]["input_sha256"]
    assert eight.data["devices"] == []  # same tables
    assert eight.data["params"] == {"tof": {"value": pytest.approx(0.008, rel=1e-12), "unit": "s"}}
    (added,) = rep.find(kind="scan-shot-added")
    assert added.data["new"]["index"] == 3 and added.data["old"] is None
    note = next(n for n in rep.notes if "per-shot details" in n)
    assert f"seqgen diff {old / 'shot_0002'} {new / 'shot_0000'}" in note  # the first changed pair, 8 ms
    assert main(["diff", str(old), str(new)]) == 1
    text = capsys.readouterr().out
    assert "shot tof=10 ms only in the new scan" in text and "built -> refused" in text


def test_scan_build_with_a_broken_scan_json(tmp_path, capsys):
    """A hand-edited scan.json is a one-line refusal (exit 2), never a traceback."""
    for body in ('{"format": "seqgen-scan", "scan": {"params": [{"name": "tof"}]}, "shots": []}', "{not json",
                 '{"format": "seqgen-scan", "scan": {"params": [{"name": "tof", "unit": "zorkmids", "kind": "list",'
                 ' "values": [1]}], "combine": "grid", "nest": ["tof"], "order": "written", "seed": null}, "shots": []}'):
        folder = tmp_path / f"s{len(body)}"
        folder.mkdir()
        (folder / "scan.json").write_text(body, encoding="utf-8")
        assert main(["diff", str(folder), str(folder)]) == 2
        err = capsys.readouterr().err
        assert err.startswith("seqgen: ") and "Traceback" not in err


def test_bound_computed_from_a_param_follows_it(tmp_path):
    """max: 2 * kick_time + 2 ms with kick_time 2 ms -> 3 ms: the bound's text is the same, its value 6 ms -> 8 ms
    (arithmetic of the edit)."""
    bound = [["  tof: 5 ms", "  tof: {value: 5 ms, max: 2 * kick_time + 2 ms}"]]
    old = _version_folder(tmp_path, "old", "small.yaml", {"small.yaml": bound})
    new = _version_folder(tmp_path, "new", "small.yaml", {"small.yaml": bound + [["kick_time: 2 ms", "kick_time: 3 ms"]]})
    rep = diff_paths(str(old), str(new))
    (c,) = rep.find("resolved", "param-bounds", "tof")
    assert c.data["old"]["max"]["value"] == pytest.approx(0.006, rel=1e-12)
    assert c.data["new"]["max"]["value"] == pytest.approx(0.008, rel=1e-12)
    assert c.data["old"]["min"] is None and c.data["new"]["max"]["text"] == "2 * kick_time + 2 ms"
    assert "(via kick_time)" in c.message
    jsonschema.validate(to_dict(rep), SCHEMA)


def test_exit_codes_and_json(tmp_path, capsys):
    old = _version_folder(tmp_path, "old", "small.yaml")
    new = _version_folder(tmp_path, "new", "small.yaml", {"small.yaml": [["tof: 5 ms", "tof: 6 ms"]]})
    assert main(["diff", str(old), str(old)]) == 0
    capsys.readouterr()
    assert main(["diff", str(old), str(new), "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    jsonschema.validate(out, SCHEMA)
    assert out["identical"] is False and out["summary"]["total"] == len(out["changes"])
    (shift,) = [c for c in out["changes"] if c["kind"] == "block-shifted"]
    assert shift["subject"] == "image" and shift["data"]["cause"] == "edited" and shift["data"]["params"] == ["tof"]
    assert main(["diff", str(old), str(tmp_path / "missing.yaml")]) == 2
    assert main(["diff", str(old)]) == 2
    capsys.readouterr()


def test_broken_new_version_is_a_finding_not_a_traceback(tmp_path, capsys):
    # the old version has a check finding (96 A > 80 A); the broken new one cannot be checked, so that finding
    # is not reported as resolved
    old = _version_folder(tmp_path, "old", "small.yaml", {"small.yaml": [["kick_gradient: 8 G/cm", "kick_gradient: 24 G/cm"]]})
    new = _version_folder(tmp_path, "new", "small.yaml", {"small.yaml": [["kick_gradient: 8 G/cm", "kick_gradient: 24 G/cm"],
                                                                         ["kick_time: 2 ms", "kick_time: [2 ms"]]})
    assert main(["diff", str(old), str(new)]) == 1
    out = capsys.readouterr().out
    assert "schema.yaml-syntax" in out and "did not resolve" in out
    rep = diff_paths(str(old), str(new))
    (intro,) = rep.find("preflight", "finding-introduced")
    assert [c.kind for c in rep.changes] == ["finding-introduced"]  # no params 'removed': they were not read
    # 96 A is beyond both kick_current's hard limit and kick_coil's max_current (80 A each, the rig file)
    assert sorted(f.code for f in rep.old.findings) == ["safety.coil-current", "safety.hard-limit"]
    assert any("did not run" in n for n in rep.notes)
    # the edit is on line 12; a YAML parser reports an unclosed bracket where it gives up, at or after that line
    assert intro.data["code"] == "schema.yaml-syntax" and intro.data["line"] >= 12
    jsonschema.validate(to_dict(rep), SCHEMA)


def test_schema_is_valid_draft_2020_12():
    jsonschema.Draft202012Validator.check_schema(SCHEMA)  # the published 2020-12 meta-schema, via jsonschema


# --- one DAC code --------------------------------------------------------------------------------------------------

# probe_power in the demo rig file: range 0..5 V, 16 bits, calibration 0.05 V/uW. 2^bits codes span the range
# (IEEE Std 1658-2011, DAC terminology: code 0 = lo, one LSB = (hi - lo) / 2^bits), so one code is
# 5 V / 65536 = 1.5259e-3 uW of probe power.
PROBE_LSB_V = 5.0 / 2 ** 16
PROBE_V_PER_UW = 0.05


def test_one_dac_code_is_reported_by_diff_and_marked_by_the_plot(tmp_path, monkeypatch, capsys):
    """40 uW is 2 V, 26214.4 codes: code 26214; one code more is 40 uW + 1 LSB / (0.05 V/uW), code 26215. `seqgen diff` and the plot's
    diff windows share one comparison, so both see this change."""
    sides = {}
    for side in ("old", "new"):
        folder = tmp_path / side
        folder.mkdir()
        shutil.copytree(ROOT / "sequences" / "common", folder / "common")
        shutil.copytree(ROOT / "sequences" / "rigs", folder / "rigs")
        shutil.copy(ROOT / "sequences" / "na23_thermometry.yaml", folder / "thermo.yaml")
        sides[side] = f"{side}/thermo.yaml"
    one_code_uw = PROBE_LSB_V / PROBE_V_PER_UW
    _apply(tmp_path / "new", {"thermo.yaml": [["probe_power: 40 uW", f"probe_power: {40 + one_code_uw:.12g} uW"]]})
    monkeypatch.chdir(tmp_path)  # the rig file must sit under the project root (the current folder)
    # the image (YAML): load_dipole at 1 ms + 200 ms hold, evaporation 1.5 s, release 10 ms later, image at
    # release + tof (8 ms), after the shutter's 100 us hold: 1719.1 ms, for its 30 us duration
    start, end = 1.7191, 1.7191 + 30e-6

    assert main(["diff", sides["old"], sides["new"]]) == 1
    text = capsys.readouterr().out
    (line,) = [ln for ln in text.splitlines() if "output probe_power" in ln]
    assert "differs in 1 window(s) from 1719.1 ms to 1719.13 ms" in line
    assert "76.2939 uV" in line  # 5 V / 65536, one code
    assert sum("differs in" in ln for ln in text.splitlines()) == 1  # no other output changed

    assert main(["diff", sides["old"], sides["new"], "--json"]) == 1
    out = json.loads(capsys.readouterr().out)
    jsonschema.validate(out, SCHEMA)
    (change,) = [c for c in out["changes"] if c["kind"] == "output-differs"]
    assert change["subject"] == "probe_power"
    assert change["data"]["max_deviation"] == pytest.approx(PROBE_LSB_V, rel=1e-9)
    assert change["data"]["max_deviation_physical"] == pytest.approx(one_code_uw * 1e-6, rel=1e-6)
    (window,) = change["data"]["windows"]
    assert (window["start_s"], window["end_s"]) == (pytest.approx(start, abs=1e-9), pytest.approx(end, abs=1e-9))

    assert main(["plot", sides["old"], sides["new"], "-o", "diff.svg", "--no-physics", "--json"]) == 0
    drawn = json.loads(capsys.readouterr().out)
    assert list(drawn["differs"]) == ["probe_power"]
    ((w0, w1),) = drawn["differs"]["probe_power"]
    assert (w0, w1) == (pytest.approx(start, abs=1e-9), pytest.approx(end, abs=1e-9))
