"""The command line: exit codes, JSON output, explain, no tracebacks."""

import json

import pytest

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
