"""Overrides of params: `resolve(src, overrides)` / `preflight(path, overrides=...)`.

An override is a text with units (read as the file's values are), a plain number (SI, in the param's
dimension) or a quantity object (what scans pass). A bad one is a finding at the param's definition, with a
fix, never a traceback. Outside references: SI prefixes milli = 1e-3, micro = 1e-6 (SI Brochure, 9th ed.
(2019), table 7, as scipy.constants gives them); the SI base unit of power is the watt and of time the
second (SI Brochure, 9th ed. (2019), section 2.3); an inclusive bound as in JSON Schema Validation draft
2020-12, sections 6.2.2 / 6.2.4.
"""

import pytest
from scipy.constants import micro, milli

from seqgen.check import RULES
from seqgen.pipeline import preflight
from seqgen.resolve.sequence import resolve
from seqgen.resolve.sources import load_sources
from seqgen.resolve.units import Qty, dims_of

from .conftest import SEQUENCES

SCATTER = SEQUENCES / "na23_barrier_scatter.yaml"
BOUNDS = SEQUENCES / "faults" / "param_bounds.yaml"  # tof: {value: -2 ms, min: 1 ms, max: 30 ms}
SHEET_LINE = 16  # where sheet_power is defined in the demo (0.48 mW)


@pytest.fixture(scope="module")
def scatter():
    return load_sources(SCATTER)


def _param(shot, name):
    return next(p for p in shot.params if p.name == name)


def _errors(findings):
    return [f for f in findings if f.severity == "error"]


def _barrier(shot):
    return next(a for a in shot.phys if a.kind == "barrier")


def test_preflight_takes_a_text_with_units():
    res = preflight(SCATTER, overrides={"sheet_power": "3.0 mW"}, rules=())
    assert res.ok and not _errors(res.findings)
    p = _param(res.shot, "sheet_power")
    assert p.value == pytest.approx(3.0 * milli) and p.dims == dims_of("W") and p.text == "3.0 mW"
    assert _barrier(res.shot).args["power"] == pytest.approx(3.0 * milli)  # the action reads the override
    assert res.compiled is not None


def test_a_text_a_number_in_si_and_a_quantity_give_the_same_shot(scatter):
    shots = [resolve(scatter, {"sheet_power": v})[0] for v in ("3 mW", "3000 uW", 3 * milli, Qty(3 * milli, dims_of("W")))]
    assert all(s is not None for s in shots)
    for s in shots[1:]:
        assert _param(s, "sheet_power").value == pytest.approx(_param(shots[0], "sheet_power").value, rel=1e-12)
        assert s.segments == shots[0].segments and s.phys == shots[0].phys


def test_a_plain_number_is_si_in_the_params_dimension(scatter):
    shot, findings = resolve(scatter, {"sheet_time": 0.012, "sheet_power": 500 * micro})
    assert shot is not None and not _errors(findings)
    t = _param(shot, "sheet_time")
    assert t.value == pytest.approx(12 * milli) and t.dims == dims_of("s")
    assert _barrier(shot).args["duration"] == pytest.approx(12 * milli)
    assert _param(shot, "sheet_power").dims == dims_of("W")


def test_an_override_may_be_an_expression_of_other_params(scatter):
    shot, findings = resolve(scatter, {"sheet_power": "dimple_power / 10"})
    assert shot is not None and not _errors(findings)
    assert _param(shot, "sheet_power").value == pytest.approx(20 * milli / 10)  # dimple_power: 20 mW in the file


def test_no_override_gives_the_written_values(scatter):
    shot, _ = resolve(scatter, {})
    assert _param(shot, "sheet_power").value == pytest.approx(0.48 * milli)
    assert _param(shot, "sheet_power").text == "0.48 mW"


def test_a_wrong_dimension_is_a_finding_with_a_fix(scatter):
    shot, findings = resolve(scatter, {"sheet_power": "3 s"})
    assert shot is None
    (f,) = _errors(findings)
    assert f.code == "schema.wrong-dimension" and f.line == SHEET_LINE
    assert "override of param 'sheet_power'" in f.message and "power" in f.message
    assert "'3 mW'" in f.hint  # the fix: the number with the param's unit
    # the fix applied resolves
    shot, findings = resolve(scatter, {"sheet_power": "3 mW"})
    assert shot is not None and not _errors(findings)


def test_a_text_without_unit_is_a_finding_as_in_the_file(scatter):
    (f,) = _errors(resolve(scatter, {"sheet_power": "3"})[1])
    assert f.code == "schema.missing-unit" and f.line == SHEET_LINE and "'3 mW'" in f.hint


def test_a_misspelt_unit_is_a_finding_with_did_you_mean(scatter):
    (f,) = _errors(resolve(scatter, {"sheet_power": "3 mw"})[1])
    assert f.code == "schema.unknown-unit" and "did you mean mW" in f.message and "'3 mW'" in f.hint


def test_an_unknown_param_name_is_a_finding_with_did_you_mean(scatter):
    shot, findings = resolve(scatter, {"sheet_pwr": "3 mW"})
    assert shot is None
    (f,) = _errors(findings)
    assert f.code == "schema.undefined-param" and "'sheet_pwr'" in f.message
    assert f.hint == "did you mean 'sheet_power'?"
    assert f.file.endswith("na23_barrier_scatter.yaml") and f.line > 0


@pytest.mark.parametrize("value, code", [
    (float("nan"), "schema.non-finite"), (float("inf"), "schema.non-finite"), (10 ** 400, "schema.overflow"),
    ([3], "schema.bad-expression"), (None, "schema.bad-expression"), (True, "schema.bad-expression"),
    ("3 mW +", "schema.bad-expression"), ("sheet_power * 2", "schema.bad-expression"), ("", "schema.bad-expression"),
])
def test_a_bad_override_is_a_finding_never_a_traceback(scatter, value, code):
    shot, findings = resolve(scatter, {"sheet_power": value})
    assert shot is None
    errors = _errors(findings)
    assert [f.code for f in errors] == [code]
    assert errors[0].line == SHEET_LINE and errors[0].hint


def test_a_bare_zero_fits_any_dimension_as_in_the_file(scatter):
    shot, _ = resolve(scatter, {"sheet_time": "5 ms", "dimple_power": "0"})
    assert shot is not None
    p = _param(shot, "dimple_power")
    assert p.value == 0 and p.dims == dims_of("W")


def test_an_override_is_held_to_the_params_bounds():
    src = load_sources(BOUNDS)
    shot, findings = resolve(src, {"tof": "5 ms"})  # within min: 1 ms and max: 30 ms
    assert shot is not None and not _errors(findings)
    assert _param(shot, "tof").value == pytest.approx(5 * milli)
    for value in ("30 ms", 30 * milli, "1 ms"):  # inclusive bounds
        shot, findings = resolve(src, {"tof": value})
        assert shot is not None and not _errors(findings), value
    shot, findings = resolve(src, {"tof": "31 ms"})
    (f,) = _errors(findings)
    assert shot is None and f.code == "schema.param-out-of-range" and f.line == 7
    assert "override" in f.message and "above its max" in f.message and "scan" not in f.message


def test_a_scan_value_keeps_its_words():
    src = load_sources(BOUNDS)
    _, findings = resolve(src, {"tof": Qty(31 * milli, dims_of("s"))})
    (f,) = _errors(findings)
    assert f.message.startswith("scan value")


def test_preflight_runs_the_rules_it_is_given():
    everything = preflight(SEQUENCES / "faults" / "out_of_range.yaml")
    codes = {f.code for f in everything.findings}
    assert "hardware.out-of-range" in codes
    none = preflight(SEQUENCES / "faults" / "out_of_range.yaml", rules=())
    assert not any(f.code.startswith(("hardware.", "physics.", "timing.", "safety.")) for f in none.findings)
    only = tuple(r for r in RULES if r.code == "hardware.out-of-range")
    assert len(only) == 1
    one = preflight(SEQUENCES / "faults" / "out_of_range.yaml", rules=only)
    assert {f.code for f in one.findings if f.code.startswith("hardware.")} == {"hardware.out-of-range"}
