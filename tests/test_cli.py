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
