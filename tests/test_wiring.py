"""Device wiring (README "Wiring"): the edges seqgen generates on a parent's lines, the manifest's wiring entry and
the reference player running a wired device off its parent's edges.

Expected times come from the sequence and rig texts (sequences/good/wired_devices.yaml: writes at 1, 2 and
3 ms; rig_wired.yaml: a 2 us trigger latency, 1 us pulses, the master's 200 ns minimum interval, the analog
card's 1 MHz timebase) and README's rule for the start edge, not from seqgen."""

import hashlib
import json

import jsonschema
import numpy as np
import pytest

from seqgen.cli import main
from seqgen.player import play

from .conftest import ROOT, SEQUENCES

WIRED = SEQUENCES / "good" / "wired_devices.yaml"
DEMO = SEQUENCES / "na23_thermometry.yaml"
UNWIRED = SEQUENCES / "good" / "rb87_crossed_trap_ramp.yaml"  # its rig states no start/advance/clock


@pytest.fixture(scope="module")
def wired_build(tmp_path_factory):
    out = tmp_path_factory.mktemp("wired") / "b"
    assert main(["build", str(WIRED), "-o", str(out), "--force", "--tables", "npz,csv"]) == 0
    return out


def _csv(path):
    lines = path.read_text().splitlines()
    head = lines[0].split(",")
    rows = [dict(zip(head, r.split(","))) for r in lines[1:]]
    return rows


def _rises(rows, column):
    vals = [int(r[column]) for r in rows]
    return [float(rows[i]["time_s"]) for i in range(1, len(rows)) if vals[i] and not vals[i - 1]]


def test_start_trigger_comes_once_at_a_fixed_time_near_the_start(wired_build):
    rows = _csv(wired_build / "dio.csv")
    # README: the pulse at the master's first row after row 0 (200 ns) or later, so that pulse + 2 us latency
    # falls on a 1 us tick of the analog card: 2.2 us rounds up to a start at 3 us, the pulse at 1 us
    assert _rises(rows, "ao_start") == pytest.approx([1e-6], abs=1e-12)
    # the pulse is the line's min_pulse, 1 us
    up = next(i for i, r in enumerate(rows) if r["ao_start"] == "1")
    assert float(rows[up + 1]["time_s"]) - float(rows[up]["time_s"]) == pytest.approx(1e-6, abs=1e-12)


def test_stepped_device_gets_one_edge_per_row_after_the_first(wired_build):
    edges = _rises(_csv(wired_build / "dio.csv"), "synth_step")
    synth = _csv(wired_build / "synth.csv")
    assert edges == pytest.approx([1e-3, 2e-3, 3e-3], abs=1e-12)  # the synthesizer's writes
    assert len(edges) == len(synth) - 1


def test_manifest_records_the_wiring(wired_build):
    manifest = json.loads((wired_build / "manifest.json").read_text())
    schema = json.loads((ROOT / "schemas" / "manifest.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(manifest)
    devs = manifest["devices"]
    assert "wiring" not in devs["dio"]  # the free-running master
    assert devs["ao"]["wiring"] == {"start_on": "ao_start", "start_latency_s": pytest.approx(2e-6),
                                    "start_s": pytest.approx(3e-6, abs=1e-15)}
    assert devs["synth"]["wiring"]["step_on"] == "synth_step"


def test_unwired_rig_has_no_wiring(tmp_path):
    out = tmp_path / "b"
    assert main(["build", str(UNWIRED), "-o", str(out), "--force"]) in (0, 1)
    manifest = json.loads((out / "manifest.json").read_text())
    assert all("wiring" not in d for d in manifest["devices"].values())


def test_player_plays_wired_rows_at_their_edges(wired_build):
    w = play(wired_build, [0.0])
    assert w["coil"].appear_s[1] == pytest.approx(1e-3, abs=1e-12)  # start edge + latency
    assert list(w["rf.freq"].appear_s[1:]) == pytest.approx([1e-3, 2e-3, 3e-3], abs=1e-12)


def test_player_follows_a_moved_start_edge(wired_build, tmp_path):
    # a loader that moved the trigger edge 0.5 us earlier: the analog card's rows follow the edge, not their ticks
    import shutil

    b = tmp_path / "moved"
    shutil.copytree(wired_build, b)
    manifest = json.loads((b / "manifest.json").read_text())
    text = (b / "dio.csv").read_text().replace("\n10,1e-06,1,", "\n5,5e-07,1,", 1)
    (b / "dio.csv").write_text(text)
    dio = manifest["devices"]["dio"]["files"]
    dio.pop("npz")
    dio["csv"]["sha256"] = hashlib.sha256(text.encode()).hexdigest()
    (b / "manifest.json").write_text(json.dumps(manifest))
    w = play(b, np.array([0.0]))
    assert w["coil"].appear_s[1] == pytest.approx(1e-3 - 0.5e-6, abs=1e-12)
    assert w["coil"].appear_s[0] == 0.0  # the armed value


def test_wiring_lines_must_be_digital_lines_of_another_device():
    # a rig whose device starts on one of its own lines: a finding at the rig's line, no traceback
    from seqgen.load.yamlsrc import load_text
    from seqgen.resolve.rig import build_rig

    text = ("seqgen_rig: 1\nname: own\ndevices:\n  dio:\n    timebase: 1 MHz\n    start: {on: trig}\n"
            "channels:\n  trig: {device: dio, kind: digital}\n")
    rig, found = build_rig(load_text(text, "rig.yaml"))
    assert [(f.code, f.line) for f in found] == [("hardware.wiring-bad", 6)]
    assert rig.devices["dio"].start_on is None  # left free-running


def test_show_and_plot_mark_the_generated_edges(tmp_path, capsys):
    assert main(["show", str(WIRED)]) == 0
    shown = [line.split() for line in capsys.readouterr().out.splitlines()]
    edges = [row for row in shown if row[:1] == ["wiring"]]
    # one start pulse on ao_start and a pulse per synthesizer row after the first (writes at 1, 2 and 3 ms)
    assert sum("ao_start" in row for row in edges) == 2 and sum("synth_step" in row for row in edges) == 6
    svg = tmp_path / "p.svg"
    assert main(["plot", str(WIRED), "-o", str(svg)]) == 0
    text = svg.read_text()
    assert "ao_start (wiring)" in text and "synth_step (wiring)" in text


def _copy_wired(tmp_path, rig_edits=()):
    """The good wired sequence and its rig copied into tmp_path, the rig edited (old, new) pairs."""
    import shutil

    shutil.copy(WIRED, tmp_path / WIRED.name)
    rig = (WIRED.parent / "rig_wired.yaml").read_text()
    for old, new in rig_edits:
        assert rig.count(old) == 1, old
        rig = rig.replace(old, new)
    (tmp_path / "rig_wired.yaml").write_text(rig)
    return tmp_path / WIRED.name


def test_generated_pulses_last_the_childs_min_trigger_pulse(tmp_path, monkeypatch):
    # the synthesizer takes pulses of at least 3 us (the edit); the line's own pulse is 1 us (the default): each
    # step pulse lasts 3 us, and the manifest carries the limits the rig states
    monkeypatch.chdir(tmp_path)
    seq = _copy_wired(tmp_path, [("advance: {per_edge: synth_step}",
                                  "advance: {per_edge: synth_step}\n    min_trigger_pulse: 3 us\n"
                                  "    min_trigger_period: 100 us\n    trigger_jitter: 50 ns")])
    out = tmp_path / "b"
    assert main(["build", str(seq), "-o", str(out), "--force", "--tables", "npz,csv"]) == 0
    rows = _csv(out / "dio.csv")
    vals = [int(r["synth_step"]) for r in rows]
    times = [float(r["time_s"]) for r in rows]
    widths = [times[j] - times[i] for i in range(1, len(rows)) if vals[i] and not vals[i - 1]
              for j in [next(k for k in range(i + 1, len(rows)) if not vals[k])]]
    assert widths == pytest.approx([3e-6] * 3, abs=1e-12)
    wiring = json.loads((out / "manifest.json").read_text())["devices"]["synth"]["wiring"]
    assert wiring["min_trigger_pulse_s"] == pytest.approx(3e-6) and wiring["trigger_jitter_s"] == pytest.approx(50e-9)
    assert wiring["min_trigger_period_s"] == pytest.approx(100e-6)


@pytest.mark.parametrize("text", ["min_trigger_period: 5", "min_trigger_pulse: -1 us", "trigger_jitter: 3 V",
                                  "min_trigger_period: [1 us]"])
def test_bad_trigger_limits_are_findings_at_their_line(text, tmp_path, monkeypatch, capsys):
    # `seqgen check` of the rig file: an error at the key's line (8), no traceback
    monkeypatch.chdir(tmp_path)
    (tmp_path / "rig.yaml").write_text(
        "seqgen_rig: 1\nname: t\ndevices:\n  dio: {timebase: 10 MHz}\n  synth:\n    timebase: 1 MHz\n"
        f"    advance: {{per_edge: step}}\n    {text}\nchannels:\n  step: {{device: dio, kind: digital}}\n")
    assert main(["check", "rig.yaml", "--json"]) == 1
    doc = json.loads(capsys.readouterr().out)
    errors = [f for f in doc["findings"] if f["severity"] == "error"]
    assert errors and all(f["line"] == 8 for f in errors), errors


def test_diff_of_two_builds_names_wiring_and_code_changes(tmp_path, monkeypatch):
    # the same sequence built on its rig and on one with a 3 us trigger latency and two's complement codes for the
    # coil (the edits): the builds' manifests differ in the analog card's wiring and the coil's code convention
    from seqgen.diff import diff_paths

    monkeypatch.chdir(tmp_path)
    (tmp_path / "a").mkdir()
    (tmp_path / "b").mkdir()
    old = _copy_wired(tmp_path / "a")
    new = _copy_wired(tmp_path / "b", [("latency: 2 us}", "latency: 3 us}"),
                                       ("range: [0 V, 10 V], bits: 16}", "range: [0 V, 10 V], bits: 16, code: twos_complement}")])
    for seq, out in ((old, tmp_path / "oa"), (new, tmp_path / "ob")):
        assert main(["build", str(seq), "-o", str(out), "--force", "--tables", "npz"]) == 0
    rep = diff_paths(str(tmp_path / "oa"), str(tmp_path / "ob"))
    (lat,) = rep.find("rig", "wiring", "ao.start_latency_s")
    assert (float(lat.old), float(lat.new)) == (pytest.approx(2e-6), pytest.approx(3e-6))
    (code,) = rep.find("rig", "handoff", "coil.code.convention")
    assert (code.old, code.new) == ("straight_binary", "twos_complement")  # README: a unipolar range's default
    # and from the sequence files themselves, through the resolved rigs
    rep = diff_paths(str(old), str(new))
    assert rep.find("rig", "wiring", "ao.start_latency_s") and rep.find("rig", "handoff", "coil.code_convention")


def test_demo_rig_is_wired_and_the_demo_builds_clean(tmp_path):
    # the demo rig file: dio_main free-running; ao_main started on ao_start, 500 ns trigger latency; synth_rf
    # stepped on rf_step. README: the start pulse at the master's first row after row 0 (200 ns) or later, so
    # that pulse + 500 ns falls on a 1 us tick of ao_main: the card starts at 1 us, the pulse at 500 ns
    out = tmp_path / "b"
    assert main(["build", str(DEMO), "-o", str(out), "--force", "--tables", "npz,csv"]) == 0
    devs = json.loads((out / "manifest.json").read_text())["devices"]
    assert "wiring" not in devs["dio_main"]
    assert devs["ao_main"]["wiring"]["start_on"] == "ao_start"
    assert devs["ao_main"]["wiring"]["start_s"] == pytest.approx(1e-6, abs=1e-15)
    assert devs["synth_rf"]["wiring"]["step_on"] == "rf_step"
    assert _rises(_csv(out / "dio_main.csv"), "ao_start") == pytest.approx([0.5e-6], abs=1e-12)


def test_a_wiring_loop_is_told_the_same_whatever_the_hash_seed():
    """Same input, same bytes: the loop's message must not depend on Python's string hashing."""
    import os
    import subprocess
    import sys

    from .conftest import ROOT

    outs = set()
    for seed in ("1", "2", "3"):
        env = dict(os.environ, PYTHONHASHSEED=seed, PYTHONPATH=str(ROOT))
        proc = subprocess.run([sys.executable, "-m", "seqgen", "check", "sequences/faults/rig_wiring_cycle.yaml",
                               "--json"], cwd=ROOT, env=env, capture_output=True, text=True, timeout=120)
        outs.add(proc.stdout)
    assert len(outs) == 1 and "wiring" in outs.pop()
