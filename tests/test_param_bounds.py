"""Bounds on params: `params: {tof: {value: 14 ms, min: 1 ms, max: 30 ms}}`.

The bound is the author's own statement, so the outside reference is the meaning of an inclusive bound:
a value exactly at `min:` / `max:` meets it and any value beyond it does not, as for `minimum` / `maximum`
in JSON Schema Validation draft 2020-12, sections 6.2.4 and 6.2.2 ("greater than or exactly equal to").
Values are compared in SI units; SI prefixes (milli = 1e-3, micro = 1e-6) from the SI Brochure, 9th ed.
(2019), table 7. Scan ranges: numpy.linspace (ends included), as README "Parameter scans" states.
"""

import numpy as np
import pytest

from seqgen.cli import main
from seqgen.pipeline import preflight
from seqgen.scan.plan import plan_scan
from seqgen.scan.run import run_scan
from seqgen.scan.summary import summarize

from .conftest import SEQUENCES

RIG = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").resolve()
CODE = "schema.param-out-of-range"
MS = 1e-3


@pytest.fixture(autouse=True)
def _repo_rig_from_tmp_path(monkeypatch):
    # the sequences live in tmp_path and name the repository's rig by absolute path (outside their root)
    monkeypatch.setenv("SEQGEN_ALLOW_OUTSIDE", "1")


BASE = """seqgen: 1
rig: {rig}
params:
{params}
blocks:
  - name: a
    at: 0 s
    actions:
      - ramp: {{channel: guide_power, to: 0.5 W, over: 1 ms}}
      - ramp: {{channel: guide_power, to: 0 W, over: 1 ms, at: 1 ms + tof}}
"""


def _seq(tmp_path, *params, name="s.yaml"):
    path = tmp_path / name
    path.write_text(BASE.format(rig=RIG, params="\n".join("  " + p for p in params)), encoding="utf-8")
    return path


def _hits(path, code=CODE):
    return [f for f in preflight(path).findings if f.code == code]


# ----------------------------------------------------------------------------- one value


@pytest.mark.parametrize("value,fires", [
    ("1 ms", False),  # exactly at min: meets it (inclusive, JSON Schema 6.2.4)
    ("1000 us", False),  # the same time in another prefix (SI Brochure: 1000 x 1e-6 s = 1e-3 s)
    ("0.999999 ms", True),  # one ppm below
    ("-2 ms", True),
    ("30 ms", False),  # exactly at max: (inclusive, JSON Schema 6.2.2)
    ("0.03 s", False),
    ("30.00003 ms", True),  # one ppm above
])
def test_a_value_at_the_bound_passes_and_beyond_fails(tmp_path, value, fires):
    path = _seq(tmp_path, f"tof: {{value: {value}, min: 1 ms, max: 30 ms}}")
    hits = _hits(path)
    assert bool(hits) == fires
    if fires:
        h = hits[0]
        assert h.severity == "error" and h.line == 4  # the param's line
        bound = "min: 1 ms" if "below" in h.message else "max: 30 ms"
        assert bound in h.message and h.hint
        assert preflight(path).shot is None  # the shot is refused


def test_bounds_without_scan_and_one_sided(tmp_path):
    assert not _hits(_seq(tmp_path, "tof: {value: 5 ms, min: 0 s}"))
    assert _hits(_seq(tmp_path, "tof: {value: 5 ms, max: 4 ms}"))[0].message.startswith("'tof' = 5 ms is above")
    assert not _hits(_seq(tmp_path, "tof: {value: 0 s, min: 0}"))  # a bare 0 fits every dimension


def test_a_computed_value_is_held_to_its_bounds(tmp_path):
    # t2 = 2 tof: with tof = 12 ms, 24 ms > max 20 ms
    path = _seq(tmp_path, "tof: 12 ms", "t2: {value: 2 * tof, max: 20 ms}")
    h = _hits(path)
    assert len(h) == 1 and h[0].line == 5 and "2 * tof = 24 ms" in h[0].message and "max: 20 ms" in h[0].message
    assert not _hits(_seq(tmp_path, "tof: 10 ms", "t2: {value: 2 * tof, max: 20 ms}"))  # exactly at max


def test_a_bound_may_be_an_expression_of_other_params(tmp_path):
    assert not _hits(_seq(tmp_path, "tmin: 2 ms", "tof: {value: 4 ms, min: 2 * tmin}"))  # 4 ms == 2 x 2 ms
    assert _hits(_seq(tmp_path, "tmin: 2 ms", "tof: {value: 3 ms, min: 2 * tmin}"))


# ----------------------------------------------------------------------------- bad bounds


def test_a_bound_of_another_dimension_is_a_finding_at_its_line(tmp_path):
    path = _seq(tmp_path, "tof: {value: 5 ms,", "  min: 1 mW}")
    h = _hits(path, "schema.wrong-dimension")
    assert h and h[0].line == 5 and "min:" in h[0].message
    h = _hits(_seq(tmp_path, "tof: {value: 5 ms, max: 30}"), "schema.missing-unit")
    assert h and h[0].line == 4 and "'30 ms'" in h[0].hint


def test_min_above_max_is_a_finding(tmp_path):
    h = _hits(_seq(tmp_path, "tof: {value: 5 ms, min: 30 ms, max: 1 ms}"))
    assert len(h) == 1 and "above its max" in h[0].message


def test_a_misspelt_bound_key_is_refused_by_the_schema(tmp_path):
    found = preflight(_seq(tmp_path, "tof: {value: 5 ms, minimum: 1 ms}")).findings
    assert any(f.code == "schema.unknown-key" and "min" in (f.message + f.hint) for f in found)


def test_a_use_override_is_held_to_the_bounds_of_the_file_that_defines_it(tmp_path):
    (tmp_path / "part.yaml").write_text(
        "seqgen: 1\nfragment: true\nparams:\n  tof: {value: 5 ms, min: 1 ms}\n", encoding="utf-8")
    text = BASE.format(rig=RIG, params="  other: 1 ms").replace(
        "params:", "use:\n  - file: part.yaml\n    params: {tof: -3 ms}\nparams:")
    path = tmp_path / "main.yaml"
    path.write_text(text, encoding="utf-8")
    h = _hits(path)
    assert len(h) == 1 and h[0].line == 5 and "part.yaml" in h[0].message  # at the override, naming the bound


# ----------------------------------------------------------------------------- scans


def test_a_scan_fails_exactly_the_shots_beyond_the_bound():
    """sequences/faults/param_bounds_scan.yaml: tof from -10 ms to 16 ms in 4 steps, min: 1 ms, max: 30 ms."""
    path = SEQUENCES / "faults" / "param_bounds_scan.yaml"
    scan = run_scan(plan_scan(path), jobs=1)
    tof = [pt[0].value for pt in scan.plan.points]
    assert tof == pytest.approx(list(np.linspace(-10 * MS, 16 * MS, 4)))  # numpy.linspace, ends included
    codes = {c.code: c for c in summarize(scan)}
    fired = codes[CODE]
    assert list(fired.shots) == [i for i, v in enumerate(tof) if v < 1 * MS]
    assert [r.ok for r in scan.shots] == [1 * MS <= v <= 30 * MS for v in tof]  # the others run and pass
    # the printed firing range agrees with the bound: every firing value is below 1 ms, the first quiet one not
    below = max(v for v in tof if v < 1 * MS)
    above = min(v for v in tof if v >= 1 * MS)
    assert below < 1 * MS <= above
    assert fired.where == f"for tof <= {below / MS:.6g} ms; quiet from {above / MS:.6g} ms"


def test_check_prints_the_firing_range_of_a_scan_with_a_value_at_each_bound(tmp_path, capsys):
    # scan values at and beyond both bounds: 1 ms and 30 ms pass (inclusive), 0.5 ms and 31 ms fail
    path = _seq(tmp_path, "tof: {value: 5 ms, min: 1 ms, max: 30 ms, scan: [0.5 ms, 1 ms, 5 ms, 30 ms, 31 ms]}")
    assert main(["check", str(path), "--jobs", "1"]) == 1
    out = capsys.readouterr().out
    assert f"{CODE} (error): 2 of 5 shots, for (tof = 500 us or tof = 31 ms)" in out
    assert "3 of 5 shots pass" in out


def test_a_scanned_param_drives_a_bounded_computed_one(tmp_path):
    # t2 = 2 tof with max 20 ms: the shots with tof > 10 ms fail
    path = _seq(tmp_path, "tof: {value: 5 ms, scan: [5 ms, 10 ms, 11 ms]}", "t2: {value: 2 * tof, max: 20 ms}")
    scan = run_scan(plan_scan(path), jobs=1)
    assert [r.ok for r in scan.shots] == [True, True, False]
    assert {c.code: c for c in summarize(scan)}[CODE].where == "for tof >= 11 ms; quiet up to 10 ms"
