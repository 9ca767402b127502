"""Every output carries the safety caution: here the ones the writer and report tests do not cover."""

import io
import json
from pathlib import Path

from seqgen import CAUTION
from seqgen.cli import main
from seqgen.diff.gitdriver import git_external_diff

ROOT = Path(__file__).resolve().parents[1]
THERMO = ROOT / "sequences" / "na23_thermometry.yaml"


def test_show_json_carries_the_caution(capsys):
    main(["show", str(THERMO), "--json"])
    assert json.loads(capsys.readouterr().out)["caution"] == CAUTION


def test_plot_json_carries_the_caution(capsys, tmp_path):
    assert main(["plot", str(THERMO), "-o", str(tmp_path / "t.svg"), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["caution"] == CAUTION


def test_git_diff_driver_text_ends_with_the_caution(tmp_path):
    old = tmp_path / "old.yaml"
    old.write_text(THERMO.read_text(encoding="utf-8"), encoding="utf-8")
    out = io.StringIO()
    rel = "sequences/na23_thermometry.yaml"
    assert git_external_diff([rel, str(old), "0" * 40, "100644", str(THERMO), "1" * 40, "100644"], out=out) == 0
    assert out.getvalue().rstrip("\n").splitlines()[-1] == f"caution: {CAUTION}"


def test_the_wording_defers_to_codes_procedures_and_licensed_practice():
    for words in ("no substitute", "interlocks", "laser-safety", "local codes and regulations", "procedures",
                  "licensed practice"):
        assert words in CAUTION


def test_show_and_plot_text_end_with_the_caution(capsys, tmp_path):
    main(["show", str(THERMO), "--physics"])
    assert capsys.readouterr().out.rstrip("\n").splitlines()[-1] == f"caution: {CAUTION}"
    assert main(["plot", str(THERMO), "-o", str(tmp_path / "t.svg")]) == 0
    assert capsys.readouterr().out.rstrip("\n").splitlines()[-1] == f"caution: {CAUTION}"


def test_diff_json_of_a_missing_input_is_a_document_with_the_caution(capsys, tmp_path):
    assert main(["diff", str(tmp_path / "nope.yaml"), str(THERMO), "--json"]) == 2
    doc = json.loads(capsys.readouterr().out)
    assert doc["caution"] == CAUTION and "nope.yaml" in doc["error"]
