"""The command line: exit codes, JSON output, explain, no tracebacks."""

import hashlib
import json
import shutil
from pathlib import Path

import pytest
import yaml

from seqgen.cli import main
from seqgen.registry import CODES, _load_all

from .conftest import SEQUENCES

ALL_SEQUENCES = sorted(p for p in SEQUENCES.rglob("*.yaml") if "faults" not in p.parts and "rigs" not in p.parts)


@pytest.mark.parametrize("path", ALL_SEQUENCES, ids=[p.stem for p in ALL_SEQUENCES])
def test_every_sequence_file_checks_clean(path, capsys):
    assert main(["check", str(path)]) == 0
    assert "caution:" in capsys.readouterr().out  # the safety caution closes every report


def test_check_json_and_exit_code_on_error(capsys):
    code = main(["check", str(SEQUENCES / "faults" / "overlap.yaml"), "--json"])
    out = json.loads(capsys.readouterr().out)
    assert code == 1
    assert any(f["code"] == "timing.overlap" and f["line"] == 9 for f in out["findings"])
    assert out["summary"]["error"] >= 1


def test_missing_file_is_exit_2(capsys):
    assert main(["check", "no/such/file.yaml"]) == 2


def test_build_refuses_errors_and_existing_folder(tmp_path, capsys):
    assert main(["build", str(SEQUENCES / "faults" / "overlap.yaml"), "-o", str(tmp_path / "x")]) == 1
    assert not (tmp_path / "x").exists()
    good = SEQUENCES / "na23_thermometry.yaml"
    assert main(["build", str(good), "-o", str(tmp_path / "b")]) == 0
    assert main(["build", str(good), "-o", str(tmp_path / "b")]) == 2
    assert main(["build", str(good), "-o", str(tmp_path / "b"), "--force"]) == 0


def test_explain_every_code_has_a_doc_and_source(capsys):
    _load_all()
    assert len(CODES) >= 40
    for code, info in CODES.items():
        assert info.doc.strip(), code
        assert info.source.strip(), code
        assert code.split(".")[0] in ("schema", "timing", "hardware", "physics", "safety"), code
    assert main(["explain", "timing.overlap"]) == 0
    assert "Source:" in capsys.readouterr().out
    assert main(["explain", "timing.overlp"]) == 2
    assert "timing.overlap" in capsys.readouterr().err


def test_show_lists_rows_per_ramp(capsys):
    assert main(["show", str(SEQUENCES / "na23_thermometry.yaml"), "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["timeline"]
    ramps = [r for r in rows if "->" in r["values"]]
    assert ramps and all(isinstance(r["rows"], int) and r["rows"] > 1 for r in ramps)


# ----------------------------------------------------------------------------- could not write: exit 2
# Every verb that writes reports a refused or failed write the same way: one line on stderr, exit code 2
# (README: "2 the command could not run"), no traceback. Error texts: POSIX errno through os.strerror.

THERMO = SEQUENCES / "na23_thermometry.yaml"  # not scanned
SCANNED = SEQUENCES / "na23_barrier_scatter.yaml"  # scans a param


def _raiser(exc):
    def boom(*args, **kwargs):
        raise exc
    return boom


def _enospc(path="x"):
    import errno
    import os

    return OSError(errno.ENOSPC, os.strerror(errno.ENOSPC), str(path))


def _run(argv, capsys):
    code = main(argv)
    cap = capsys.readouterr()
    assert "Traceback" not in cap.out + cap.err
    return code, cap.err.strip().splitlines()


@pytest.mark.parametrize("verb", ["build", "build-scan", "plot", "report"])
def test_a_failed_write_is_one_line_and_exit_2(verb, tmp_path, monkeypatch, capsys):
    import os

    import seqgen.batch
    import seqgen.emit.build
    import seqgen.emit.plot
    import seqgen.emit.report

    out = tmp_path / ("out.png" if verb == "plot" else "out.html" if verb == "report" else "out")
    target, argv, what = {
        "build": ((seqgen.emit.build, "write_build"), ["build", str(THERMO), "-o", str(out)], "build to"),
        "build-scan": ((seqgen.batch, "run_scan"), ["build", str(SCANNED), "-o", str(out), "--jobs", "1"],
                       "the scan to"),
        "plot": ((seqgen.emit.plot, "save_figure"), ["plot", str(THERMO), "-o", str(out), "--no-physics"], ""),
        "report": ((seqgen.emit.report, "write_report"), ["check", str(THERMO), "--report", str(out)],
                   "the report to"),
    }[verb]
    monkeypatch.setattr(*target, _raiser(_enospc(out)))
    code, err = _run(argv, capsys)
    assert code == 2
    assert err == [f"seqgen: cannot write {what + ' ' if what else ''}{out}: {os.strerror(28)}"]  # 28: ENOSPC


@pytest.mark.parametrize("verb", ["build", "build-scan", "plot", "report"])
def test_an_existing_output_is_refused_with_exit_2(verb, tmp_path, capsys):
    out = tmp_path / ("out.svg" if verb == "plot" else "out.html" if verb == "report" else "out")
    if verb in ("plot", "report"):
        out.write_text("keep me", encoding="utf-8")
    else:
        out.mkdir()
        (out / "keep.txt").write_text("keep me", encoding="utf-8")
    argv = {
        "build": ["build", str(THERMO), "-o", str(out)],
        "build-scan": ["build", str(SCANNED), "-o", str(out), "--jobs", "1"],
        "plot": ["plot", str(THERMO), "-o", str(out), "--no-physics"],
        "report": ["check", str(THERMO), "--report", str(out)],
    }[verb]
    code, err = _run(argv, capsys)
    assert code == 2
    assert len(err) == 1 and err[0].startswith("seqgen: ") and str(out) in err[0] and "--force" in err[0]
    kept = out if verb in ("plot", "report") else out / "keep.txt"
    assert kept.read_text(encoding="utf-8") == "keep me"


def test_cluster_unavailable_and_bad_plot_options_are_exit_2(capsys, tmp_path, monkeypatch):
    import seqgen.batch

    monkeypatch.setattr(seqgen.batch, "run_scan", _raiser(seqgen.batch.ClusterUnavailable("no cluster here")))
    assert _run(["check", str(SCANNED), "--cluster", "tcp://127.0.0.1:1"], capsys) == (2, ["seqgen: no cluster here"])
    code, err = _run(["plot", str(THERMO), "-o", str(tmp_path / "x.bmp")], capsys)
    assert code == 2 and len(err) == 1 and err[0].startswith("seqgen: ") and not (tmp_path / "x.bmp").exists()


# ----------------------------------------------------------------------------- --shot N: one shot of a scan
# The expected values come from the YAML written here (read back with PyYAML), the demo rig file's device
# minimum interval (read with PyYAML) and the run order README "Parameter scans" documents for `order:
# shuffled`: written positions sorted by sha256("seqgen-order:<seed>:<i>") (hashlib, FIPS 180-4 SHA-256).

RIG = SEQUENCES / "rigs" / "na23_demo_rig.yaml"

SCANNED_TMPL = """seqgen: 1
rig: rig.yaml
params:
  t_on: {value: 5 ms, scan: [2 ms, 7 ms, 11 ms, 13 ms]}
  ramp_time: {value: 40 us, scan: [1 us, 40 us]}
scan: {order: shuffled, seed: 3}
blocks:
  - name: pulse
    at: t_on
    actions:
      - ramp: {channel: guide_power, to: 0.5 W, over: ramp_time}
      - hold: {duration: 1 ms}
      - set: {channel: guide_power, value: 0 W}
"""


def _scanned(tmp_path, text=SCANNED_TMPL, name="scanned.yaml"):
    shutil.copy(RIG, tmp_path / "rig.yaml")
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def _ms(text: str) -> float:
    value, unit = text.split()
    return float(value) * {"ms": 1e-3, "us": 1e-6, "s": 1.0}[unit]


def _run_order(path):
    """[(t_on, ramp_time) in seconds] in run order, from the YAML and the README's rules (grid: first
    written param slowest; shuffled: written positions sorted by sha256 of 'seqgen-order:<seed>:<i>')."""
    doc = yaml.safe_load(Path(path).read_text(encoding="utf-8"))
    t_on = [_ms(v) for v in doc["params"]["t_on"]["scan"]]
    ramp = [_ms(v) for v in doc["params"]["ramp_time"]["scan"]]
    written = [(a, b) for a in t_on for b in ramp]
    seed = doc["scan"]["seed"]
    order = sorted(range(len(written)), key=lambda i: hashlib.sha256(f"seqgen-order:{seed}:{i}".encode()).digest())
    return [(written[i], i) for i in order]


def _json(argv, capsys):
    code = main(argv)
    cap = capsys.readouterr()
    assert "Traceback" not in cap.out + cap.err
    return code, json.loads(cap.out)


def test_show_shot_n_resolves_that_shot_in_run_order(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = _scanned(tmp_path)
    for n, ((t_on, ramp), written) in enumerate(_run_order(path)):
        code, doc = _json(["show", str(path), "--shot", str(n), "--json"], capsys)
        starts = [r["start_s"] for r in doc["timeline"] if r["block"] == "pulse"]
        assert min(starts) == pytest.approx(t_on, abs=1e-9)  # the block sits at this shot's t_on
        ramps = [r for r in doc["timeline"] if r["action"] == "ramp"]
        assert ramps[0]["end_s"] - ramps[0]["start_s"] == pytest.approx(ramp, abs=1e-9)
        scan = doc["scan"]
        assert (scan["shot"], scan["written_index"], scan["shots"], scan["base"]) == (n, written, 8, False)
        assert scan["params"]["t_on"] == {"value": pytest.approx(t_on), "unit": "s"}
    assert main(["show", str(path), "--shot", "1"]) in (0, 1)
    head = capsys.readouterr().out.splitlines()[0]
    (t_on, ramp), _ = _run_order(path)[1]
    assert "shot 1 of the 8 shots of the scan" in head and f"t_on = {t_on * 1e3:g} ms" in head


def test_show_without_shot_names_the_base_shot_and_its_values(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = _scanned(tmp_path)
    doc = yaml.safe_load(path.read_text(encoding="utf-8"))["params"]
    code, out = _json(["show", str(path), "--json"], capsys)
    base = {n: _ms(doc[n]["value"]) for n in ("t_on", "ramp_time")}
    assert out["scan"]["base"] and out["scan"]["shot"] is None and out["scan"]["shots"] == 8
    assert {n: v["value"] for n, v in out["scan"]["params"].items()} == pytest.approx(base)
    assert min(r["start_s"] for r in out["timeline"] if r["block"] == "pulse") == pytest.approx(base["t_on"])
    # t_on = 5 ms is not among the scan values, so the base shot is none of the scan's shots
    assert out["scan"]["same_as"] is None
    main(["show", str(path)])
    head = capsys.readouterr().out.splitlines()[0]
    assert "base shot of a scan of 8 shots" in head and "t_on = 5 ms" in head and "ramp_time = 40 us" in head
    assert "--shot 0..7" in head
    # a base value that is one of the scan's points: the header names that shot (index in run order)
    path2 = _scanned(tmp_path, SCANNED_TMPL.replace("value: 5 ms", "value: 11 ms"), "same.yaml")
    _, out = _json(["show", str(path2), "--json"], capsys)
    want = [i for i, ((t, r), _) in enumerate(_run_order(path2)) if t == _ms("11 ms") and r == _ms("40 us")]
    assert [out["scan"]["same_as"]] == want


def test_check_shot_n_preflights_only_that_shot(tmp_path, capsys, monkeypatch):
    # timing.ramp-too-fast fires for a ramp shorter than its device's minimum interval (README "What preflight
    # checks"); ao_main's minimum interval is read from the rig file
    monkeypatch.chdir(tmp_path)
    path = _scanned(tmp_path)
    dev = yaml.safe_load(RIG.read_text(encoding="utf-8"))["devices"]["ao_main"]
    min_interval = _ms(dev["min_interval"])
    for n, ((t_on, ramp), _) in enumerate(_run_order(path)):
        code, out = _json(["check", str(path), "--shot", str(n), "--json"], capsys)
        fast = any(f["code"] == "timing.ramp-too-fast" for f in out["findings"])
        assert fast == (ramp < min_interval) and code == (1 if fast else 0)
        assert out["scan"]["shot"] == n
    main(["check", str(path), "--shot", "0"])
    out = capsys.readouterr().out
    assert out.startswith(f"{path}: shot 0 of the 8 shots of the scan") and "caution:" in out


@pytest.mark.parametrize("verb", ["show", "plot", "check"])
def test_a_bad_shot_is_one_line_and_exit_2(verb, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    path = _scanned(tmp_path)
    extra = ["-o", str(tmp_path / "x.png")] if verb == "plot" else []
    for n, plain, why in ((8, path, "numbered 0 to 7"), (-1, path, "numbered 0 to 7"), (0, THERMO, "scans no param")):
        code, err = _run([verb, str(plain), *extra, "--shot", str(n)], capsys)
        assert code == 2 and len(err) == 1 and err[0].startswith(f"seqgen: --shot {n}: ") and why in err[0], err
    assert not (tmp_path / "x.png").exists()


def test_shot_is_no_option_of_build_and_takes_an_integer(tmp_path, capsys):
    # argparse refuses an unknown option or a value that is not an int with exit status 2 (Python documentation)
    for argv in (["build", str(SCANNED), "-o", str(tmp_path / "b"), "--shot", "1"], ["show", str(SCANNED), "--shot", "x"]):
        with pytest.raises(SystemExit) as exc:
            main(argv)
        assert exc.value.code == 2
    assert not (tmp_path / "b").exists()


def test_shot_of_a_scan_that_cannot_be_expanded_gives_its_finding(capsys):
    fault = SEQUENCES / "faults" / "scan_zip_lengths_differ.yaml"
    expect = fault.read_text(encoding="utf-8").splitlines()[0].split("expect:")[1].split("@")[0].strip()
    code, out = _json(["show", str(fault), "--shot", "0", "--json"], capsys)
    assert code == 1 and expect in [f["code"] for f in out["findings"]]
    main(["show", str(fault)])  # without --shot: the base shot, saying the scan cannot be expanded
    assert "the scan cannot be expanded" in capsys.readouterr().out.splitlines()[0]
