"""The package face: `import seqgen` and the README's worked example, as a notebook would use them."""

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import seqgen

ROOT = Path(__file__).resolve().parents[1]
THERMO = str(ROOT / "sequences" / "na23_thermometry.yaml")


def _readme_example() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Python API", 1)[1]
    return re.search(r"```python\n(.*?)```", section, re.S).group(1)


def test_every_public_name_resolves_and_is_listed():
    for name in seqgen.__all__:
        assert getattr(seqgen, name) is not None, name
    assert {"preflight", "Result", "plan_scan", "run_scan", "write_build", "diff", "Finding", "Shot"} <= set(seqgen.__all__)
    with pytest.raises(AttributeError):
        seqgen.no_such_name  # noqa: B018


def test_import_seqgen_alone_loads_no_stage():
    code = "import sys, seqgen; print(sorted(m for m in sys.modules if m.startswith('seqgen.')))"
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True).stdout
    assert out.strip() == "['seqgen.version']"  # the version leaf, no stage


def test_the_readme_example_runs(monkeypatch, tmp_path, capsys):
    monkeypatch.chdir(ROOT)
    code = _readme_example().replace('"thermometry.png"', repr(str(tmp_path / "thermometry.png")))
    exec(compile(code, "README.md (Python API)", "exec"), {})
    out = capsys.readouterr().out
    assert out.startswith("ok False")
    assert "schema.wrong-dimension" in out and "no substitute" in out
    assert (tmp_path / "thermometry.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_an_override_with_units_equals_the_same_number_in_si_and_moves_the_image():
    base = seqgen.preflight(THERMO)
    text = seqgen.preflight(THERMO, overrides={"tof": "12 ms"})
    number = seqgen.preflight(THERMO, overrides={"tof": 0.012})
    assert text.ok and number.ok
    for a, b in zip(text.compiled.tables, number.compiled.tables):
        assert np.array_equal(a.ticks, b.ticks) and np.array_equal(a.values, b.values)

    def image_time(res):
        return res.shot.actions("image")[0].t0

    # the file says tof: 8 ms and the image block is placed `after: release + tof`: 12 ms - 8 ms later
    assert image_time(text) - image_time(base) == pytest.approx(4e-3, abs=1e-12)


def test_diff_is_the_package_and_the_comparison():
    from seqgen.diff import core  # noqa: F401  (a submodule import must not replace the callable face)

    assert callable(seqgen.diff)

    report = seqgen.diff(THERMO, THERMO)
    assert report.identical
    assert seqgen.diff.diff_paths is seqgen.diff_paths


def test_resolve_shot_stays_a_function_after_the_stages_are_imported():
    seqgen.preflight(THERMO)  # imports the resolve package, which binds `seqgen.resolve` to it
    src = seqgen.load_sources(THERMO)
    shot, findings = seqgen.resolve_shot(src, {"tof": "12 ms"})
    assert shot is not None and not seqgen.has_errors(findings)


def test_every_public_callable_has_a_docstring():
    for name in seqgen.__all__:
        value = getattr(seqgen, name)
        if callable(value) and not isinstance(value, type(seqgen)):
            assert (value.__doc__ or "").strip(), name


def test_rules_argument_is_checked_and_a_subset_runs_only_those_codes():
    with pytest.raises(TypeError, match="Rule"):
        seqgen.preflight(THERMO, rules=["physics.pulse-detuned"])
    res = seqgen.preflight(str(ROOT / "sequences" / "faults" / "pulse_detuned.yaml"),
                           rules=[r for r in seqgen.RULES if r.code == "physics.pulse-detuned"])
    assert {f.code for f in res.findings if f.severity != "note"} == {"physics.pulse-detuned"}
    assert seqgen.preflight(THERMO, rules=None).ok


def test_explain_all_and_unknown():
    assert "physics.pulse-detuned" in seqgen.explain("all")
    assert seqgen.explain("physics.pulse-detund") is None
