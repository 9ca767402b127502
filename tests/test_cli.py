"""The command line: exit codes, JSON output, explain, no tracebacks."""

import json
import shutil
from pathlib import Path

import pytest
import yaml

from seqgen.cli import main
from seqgen.codes import ALL as CODES
from seqgen.resolve.units import parse_simple

from .conftest import SEQUENCES, readme_shuffled_order

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

    import seqgen.emit.build
    import seqgen.emit.plot
    import seqgen.emit.report
    import seqgen.scan.run

    out = tmp_path / ("out.png" if verb == "plot" else "out.html" if verb == "report" else "out")
    target, argv, what = {
        "build": ((seqgen.emit.build, "write_build"), ["build", str(THERMO), "-o", str(out)], "build to"),
        "build-scan": ((seqgen.scan.run, "run_scan"), ["build", str(SCANNED), "-o", str(out), "--jobs", "1"],
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
    import seqgen.scan.run

    monkeypatch.setattr(seqgen.scan.run, "run_scan", _raiser(seqgen.scan.run.ClusterUnavailable("no cluster here")))
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
    order = readme_shuffled_order(seed, len(written))
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


# ----------------------------------------------------------------------------- messages a new user stumbles over
# Each message must say file:line, what is wrong in the user's words and a fix that works: the fix is applied to
# the file and the file checked again. Unit facts: SI Brochure, 9th ed. (2019): S (siemens) is the unit of
# conductance, unit symbols are case-sensitive (m milli, M mega), 1 G = 1e-4 T (from memory).


def _seq(tmp_path, body: str, name="seq.yaml"):
    shutil.copy(RIG, tmp_path / "rig.yaml")
    p = tmp_path / name
    p.write_text("seqgen: 1\nrig: rig.yaml\n" + body, encoding="utf-8")
    return p


def _hits(path, code, capsys):
    rc, doc = _json(["check", str(path), "--json"], capsys)
    return rc, [f for f in doc["findings"] if f["code"] == code]


def _write_fix(hint: str) -> str:
    return hint.split("write '", 1)[1].split("'", 1)[0]


PARAM_BODY = """params:
  kick_time: 2
  kick_gradient: 8 G
blocks:
  - name: a
    at: 10 ms
    actions:
      - set: {channel: probe_shutter, value: 1}
      - hold: {duration: kick_time}
      - set: {channel: probe_shutter, value: 0}
      - push: {coil: kick_coil, gradient: kick_gradient, duration: 1 ms}
"""


def test_a_param_of_the_wrong_kind_is_reported_where_it_is_defined_and_its_fix_resolves(tmp_path, capsys):
    path = _seq(tmp_path, PARAM_BODY)
    lines = path.read_text(encoding="utf-8").splitlines()
    def_line = {ln.split(":")[0].strip(): i + 1 for i, ln in enumerate(lines) if ln.startswith("  kick_")}
    use_line = {k: next(i + 1 for i, ln in enumerate(lines) if f": {k}" in ln and i + 1 != def_line[k]) for k in def_line}
    for code, name, fixed in (("schema.missing-unit", "kick_time", "kick_time: 2 ms"),
                              ("schema.wrong-dimension", "kick_gradient", "kick_gradient: 8 G/cm")):
        rc, hits = _hits(path, code, capsys)
        assert rc == 1 and len(hits) == 1, hits
        f = hits[0]
        assert f["line"] == def_line[name] and f"param '{name}'" in f["message"]
        assert f"line {use_line[name]}" in f["message"]  # ... and where it is used
        assert _write_fix(f["hint"]) == fixed and "write it with a unit" not in f["hint"]
        lines[def_line[name] - 1] = "  " + _write_fix(f["hint"])
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    g = [f for f in _hits(path, "schema.wrong-dimension", capsys)[1]]
    assert "did you mean G/cm?" not in str(g)
    rc, doc = _json(["check", str(path), "--json"], capsys)
    assert rc == 0 and not [f for f in doc["findings"] if f["code"].startswith("schema.")]


@pytest.mark.parametrize("action,written,code,words,fixed", [
    ("hold: {duration: %s}", "80 mS", "schema.wrong-dimension",
     ["80 millisiemens (a conductance)", "expected a time", "did you mean ms?"], "80 ms"),
    ("pulse: {channel: sheet_power, value: %s, duration: 1 ms}", "0.43 mw", "schema.unknown-unit",
     ["unknown unit 'mw'", "did you mean mW?"], "0.43 mW"),
    ("hold: {duration: %s}", "3", "schema.missing-unit", ["has no unit; expected a time"], "3 ms"),
])
def test_a_written_value_gets_a_fix_in_the_expected_unit(tmp_path, capsys, action, written, code, words, fixed):
    body = ("blocks:\n  - name: a\n    at: 10 ms\n    actions:\n      - set: {channel: probe_shutter, value: 1}\n"
            f"      - {action % written}\n      - set: {{channel: probe_shutter, value: 0}}\n")
    path = _seq(tmp_path, body)
    rc, hits = _hits(path, code, capsys)
    assert rc == 1 and hits and hits[0]["line"] == 8
    assert all(w in hits[0]["message"] for w in words), hits[0]["message"]
    assert _write_fix(hits[0]["hint"]) == fixed
    path.write_text(path.read_text(encoding="utf-8").replace(action % written, action % fixed), encoding="utf-8")
    assert _json(["check", str(path), "--json"], capsys)[0] == 0


def test_a_rig_file_is_checked_as_a_rig(tmp_path, capsys):
    # README "Commands": check of a rig file validates it against schemas/rig.schema.json and the rig builder
    rc, doc = _json(["check", str(RIG), "--json"], capsys)
    assert rc == 0 and [f["code"] for f in doc["findings"]] == ["schema.rig-file"]
    assert "add 'seqgen: 1'" not in json.dumps(doc)
    rig = yaml.safe_load(RIG.read_text(encoding="utf-8"))
    name = next(n for n, c in rig["channels"].items() if c.get("kind") == "analog")
    lo, hi = rig["channels"][name]["output"]["range"]
    bad = tmp_path / "bad_rig.yaml"
    text = RIG.read_text(encoding="utf-8")
    bad.write_text(text.replace(f"range: [{lo}, {hi}]", f"range: [{hi}, {lo}]", 1), encoding="utf-8")
    rc, doc = _json(["check", str(bad), "--json"], capsys)
    assert rc == 1 and "schema.bad-rig" in [f["code"] for f in doc["findings"]]
    assert main(["show", str(RIG)]) == 1
    assert "this is a rig file" in capsys.readouterr().out


def test_json_and_format_text_contradict_and_are_refused(capsys):
    for other in ("text", "sarif"):
        code, err = _run(["check", str(THERMO), "--json", "--format", other], capsys)
        assert code == 2 and len(err) == 1 and "--json" in err[0] and f"--format {other}" in err[0]
    assert main(["check", str(THERMO), "--json", "--format", "json"]) == 0


@pytest.mark.parametrize("scanned", [False, True])
def test_the_safety_caution_comes_last_after_the_report_line(tmp_path, capsys, monkeypatch, scanned):
    monkeypatch.chdir(tmp_path)
    path = _scanned(tmp_path) if scanned else THERMO
    out = tmp_path / "r.html"
    main(["check", str(path), "--report", str(out), "--jobs", "1"])
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[-1].startswith("caution:") and lines[-2] == f"report written to {out}"
    assert sum(ln.startswith("caution:") for ln in lines) == 1


def test_explain_all_cuts_summaries_at_a_sentence_or_a_word(capsys):
    # (common practice, no source): a summary is a whole first sentence, or a cut at a word with an ellipsis
    assert main(["explain", "all"]) == 0
    for line in capsys.readouterr().out.splitlines():
        code, severity, text = line.split(None, 2)
        doc = " ".join(CODES[code].doc.split())
        if text.endswith("..."):
            kept = text[:-3]
            assert doc.startswith(kept) and doc[len(kept)] in " ,;:", (code, text)
            assert kept.count("`") % 2 == 0, (code, text)
        else:
            assert doc.startswith(text) and text[-1] in ".?!" or text == doc, (code, text)


def test_outside_root_and_missing_use_name_the_paths(tmp_path, capsys, monkeypatch):
    proj = tmp_path / "proj"
    proj.mkdir()
    (proj / "seqgen.toml").write_text("", encoding="utf-8")
    shutil.copy(RIG, tmp_path / "rig.yaml")
    seq = proj / "s.yaml"
    seq.write_text("seqgen: 1\nrig: ../rig.yaml\nuse:\n  - file: ../other.yaml\n  - file: common/gone.yaml\n"
                   "blocks:\n  - name: a\n    actions:\n      - hold: {duration: 1 ms}\n", encoding="utf-8")
    monkeypatch.chdir(proj)
    rc, doc = _json(["check", "s.yaml", "--json"], capsys)
    by = {f["code"]: f for f in doc["findings"]}
    for code in ("schema.rig-outside-root", "schema.use-outside-root"):
        assert f"'{proj}' (the current folder)" in by[code]["message"], by[code]
    missing = by["schema.file-missing"]
    assert missing["line"] == 5 and f"looked in {proj / 'common'}" in missing["message"]
    monkeypatch.chdir(tmp_path)
    rc, doc = _json(["check", "proj/s.yaml", "--json"], capsys)
    assert any("root 'proj'" in f["message"] for f in doc["findings"] if f["code"] == "schema.rig-outside-root")


def test_scan_steps_messages(tmp_path, capsys):
    def run(scan):
        path = _seq(tmp_path, f"params:\n  t: {{value: 2 ms, scan: {scan}}}\nblocks:\n  - name: a\n    at: 10 ms\n"
                    "    actions:\n      - hold: {duration: t}\n")
        rc, doc = _json(["check", str(path), "--json", "--jobs", "1"], capsys)
        return rc, doc, [f for f in doc["findings"] if f["severity"] == "error"]

    rc, _, errs = run("{from: 1 ms, to: 3 ms, steps: two}")
    assert rc == 1 and errs[0]["hint"] == "give an integer"  # English article before a vowel sound
    rc, _, errs = run("{from: 1 ms, to: 3 ms, steps: 0}")
    assert errs[0]["code"] == "schema.bad-value" and "give 2 or more" in errs[0]["hint"]
    rc, _, errs = run("{from: 1 ms, to: 3 ms, steps: 1}")  # one step would drop to: silently
    assert errs[0]["code"] == "schema.bad-scan" and errs[0]["line"] == 4 and "to: 3 ms would be ignored" in errs[0]["message"]
    rc, doc, errs = run("[1 ms]")
    assert rc == 0 and not errs
    main(["check", str(tmp_path / "seq.yaml"), "--jobs", "1"])
    assert "t 1 ms (1 value)" in capsys.readouterr().out


def _rig_numbers():
    rig = yaml.safe_load(RIG.read_text(encoding="utf-8"))
    ch = rig["channels"]["sg_current"]
    dev = rig["devices"][ch["device"]]
    slope = float(ch["calibration"]["linear"]["slope"].split()[0])  # V per A
    tick = 1 / parse_simple(dev["timebase"]).value
    h = parse_simple(dev["min_interval"]).value
    lo, hi = (parse_simple(v).value for v in ch["output"]["range"])
    lsb = (hi - lo) / 2 ** ch["output"]["bits"]  # IEEE Std 1658-2011: 2^N LSB span the range
    return slope, tick, h, lsb


def test_magnetic_hold_ramp_deviation_is_the_hold_bound_and_its_tolerance_is_accepted(tmp_path, capsys):
    """A linear 0 -> 40 A ramp over 20 ms on sg_current: rows may be no closer than the device's minimum interval
    h, so each row holds over h / tick ticks while the curve moves on. Piecewise-constant approximation of a
    curve of slope y' with rows h apart: error <= y' h / 2 (A Practical Guide to Splines, Springer (1978)); at
    the device's ticks a row holding two ticks whose curve values differ by y' tick is off by at least
    y' tick / 2 (elementary). Half an LSB (the default tolerance) lies below that, so the warning is real."""
    slope, tick, h, lsb = _rig_numbers()
    y1 = 40 * slope / 20e-3  # V/s
    body = ("blocks:\n  - name: hold\n    at: 10 ms\n    actions:\n"
            "      - magnetic_hold: {currents: {sg_coil: 40 A}, duration: 300 ms, ramp_on: 20 ms%s}\n"
            "      - release: {coils: [sg_coil]}\n")
    rc, hits = _hits(_seq(tmp_path, body % ""), "hardware.ramp-undersampled", capsys)
    assert len(hits) == 1
    err = hits[0]["data"]["max_error"]
    assert y1 * (h - tick) / 2 * (1 - 1e-6) <= err <= y1 * h / 2 * (1 + 1e-6)
    assert hits[0]["data"]["tolerance"] == pytest.approx(lsb / 2, rel=1e-9) and lsb / 2 < y1 * tick / 2
    tol_mv = err * 1e3 * 1.01
    rc, doc = _json(["check", str(_seq(tmp_path, body % f", tolerance: {tol_mv:.4f} mV")), "--json"], capsys)
    assert rc == 0 and not [f for f in doc["findings"] if f["code"] in ("hardware.ramp-undersampled", "schema.unknown-key")]
    rc, hits = _hits(_seq(tmp_path, body % ", tolerance: 0.2 mA"), "schema.wrong-dimension", capsys)
    assert rc == 1 and hits[0]["line"] == 7 and "expected a voltage" in hits[0]["message"]


def test_majorana_line_names_the_gradient_it_uses(capsys):
    # one coil's quadrupole: |B| grows along the axis at b' and radially at b'/2 (div B = 0, Maxwell's equations);
    # the cloud size k_B T / (|mu| b') uses the weakest one
    fault = SEQUENCES / "faults" / "magnetic_majorana.yaml"
    rig = yaml.safe_load(RIG.read_text(encoding="utf-8"))
    per_amp = parse_simple(rig["coils"]["sg_coil"]["gradient_per_amp"].replace("/A", "")).value
    amps = parse_simple(yaml.safe_load(fault.read_text(encoding="utf-8").split("\n", 1)[1])["blocks"][0]["actions"][0]
                        ["magnetic_hold"]["currents"]["sg_coil"]).value
    axial_g_cm = per_amp * amps * 100
    _, doc = _json(["show", str(fault), "--physics", "--json"], capsys)
    items = next(r["items"] for r in doc["physics"] if r["kind"] == "magnetic_hold")
    line = next(i for i in items if i.startswith("cloud size"))
    assert f"b' = {axial_g_cm / 2:.4g} G/cm" in line and "radial" in line and f"{axial_g_cm:.4g} G/cm along its axis" in line


def test_readme_documents_end_leave_on_and_accept(tmp_path, capsys):
    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text(encoding="utf-8")
    block = next(b.split("\n", 1)[1] for b in readme.split("```yaml")[1:] if "leave_on" in b.split("```")[0])
    example = yaml.safe_load(block.split("```")[0])
    left = example["end"]["leave_on"][0]
    body = (f"blocks:\n  - name: a\n    at: 10 ms\n    actions:\n      - set: {{channel: {left}, value: 1}}\n")
    rc, hits = _hits(_seq(tmp_path, body), "safety.left-on", capsys)
    assert hits  # left on: reported
    rc, doc = _json(["check", str(_seq(tmp_path, body + block.split("```")[0])), "--json"], capsys)
    assert not [f for f in doc["findings"] if f["code"] in ("safety.left-on",) or f["code"].startswith("schema.")]


# ----------------------------------------------------------------------------- the safety caution in JSON


def _validator(name):
    import jsonschema

    from .conftest import ROOT

    return jsonschema.Draft202012Validator(json.loads((ROOT / "schemas" / name).read_text(encoding="utf-8")))


@pytest.mark.parametrize("argv", [
    ["check", str(THERMO), "--json"],  # one shot
    ["check", str(SEQUENCES / "faults" / "overlap.yaml"), "--json"],  # with error findings
    ["check", str(SCANNED), "--json", "--jobs", "1"],  # a scan
    ["check", str(SCANNED), "--json", "--shot", "1"],  # one shot of a scan
    ["check", str(SEQUENCES / "faults" / "scan_zip_lengths_differ.yaml"), "--json"],  # a scan that cannot expand
    ["check", str(RIG), "--json"],  # a rig file
])
def test_check_json_is_one_object_with_the_caution(argv, capsys):
    from seqgen.caution import CAUTION

    main(argv)
    doc = json.loads(capsys.readouterr().out)
    assert isinstance(doc, dict) and doc["caution"] == CAUTION and isinstance(doc["findings"], list)


def test_build_json_and_both_diff_outputs_carry_the_caution(tmp_path, capsys):
    from seqgen.caution import CAUTION

    code, doc = _json(["build", str(THERMO), "-o", str(tmp_path / "b"), "--json"], capsys)
    assert code == 0 and doc["caution"] == CAUTION
    old = SEQUENCES / "faults" / "overlap.yaml"
    code, doc = _json(["diff", str(THERMO), str(old), "--json"], capsys)
    assert code == 1 and doc["caution"] == CAUTION
    schema = _validator("diff.schema.json")
    schema.validate(doc)
    assert not schema.is_valid({k: v for k, v in doc.items() if k != "caution"})  # the caution is required
    assert main(["diff", str(THERMO), str(old)]) == 1
    assert capsys.readouterr().out.rstrip("\n").splitlines()[-1] == "caution: " + CAUTION


def test_a_broken_table_writer_is_one_line_and_exit_2_and_keeps_the_build(tmp_path, capsys, monkeypatch):
    from importlib.metadata import EntryPoint

    import seqgen.emit.writers as W

    out = tmp_path / "b"
    assert main(["build", str(THERMO), "-o", str(out)]) == 0
    before = {p.name: p.read_bytes() for p in out.iterdir()}
    # an installed plugin whose object is no writer (a module-level int), as a broken package would declare
    monkeypatch.setattr(W, "declared_entry_points",
                        lambda: (EntryPoint("bad", "seqgen.emit.writers:CSV_ROW_LIMIT", "seqgen.writers"),))
    W.available_writers.cache_clear()
    try:
        code, err = _run(["build", str(THERMO), "-o", str(out), "--force"], capsys)
    finally:
        W.available_writers.cache_clear()
    assert code == 2 and len(err) == 1 and err[0].startswith("seqgen: table writer") and "not a writer" in err[0] \
        and "bad = seqgen.emit.writers:CSV_ROW_LIMIT" in err[0]
    assert {p.name: p.read_bytes() for p in out.iterdir()} == before


def test_a_missing_package_is_said_once_not_as_every_unit_unknown(tmp_path):
    """Run outside its environment (pint not importable), seqgen says so and exits 2, instead of reporting
    every unit of the file as unknown."""
    import subprocess
    import sys

    code = ("import sys; sys.modules['pint'] = None; from seqgen.cli import main; "
            "sys.exit(main(['check', 'sequences/na23_thermometry.yaml']))")
    from .conftest import ROOT

    env = dict(__import__("os").environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path))
    proc = subprocess.run([sys.executable, "-c", code], cwd=ROOT, env=env, capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 2, proc.stdout + proc.stderr
    assert "missing" in proc.stderr and "pint" in proc.stderr and "unknown unit" not in proc.stdout
