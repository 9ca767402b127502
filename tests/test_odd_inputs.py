"""Odd inputs found in review: each gives a finding at its line, never a traceback or a silent wrong answer.

References: the JSON Schema draft 2020-12 `maximum` keyword (what the schema promises), the YAML 1.2.2 core
schema (ASCII digits only in numbers, from memory), IEEE 754 doubles (a 400-digit integer does not fit).
"""

import pytest

from seqgen.predict import per_shot_cache
from seqgen.cli import main
from seqgen.diff import diff_paths
from seqgen.load.yamlsrc import load_text
from seqgen.pipeline import preflight

from .conftest import SEQUENCES

RIG_TEXT = (SEQUENCES / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
HUGE = "1" + "0" * 400


def _project(tmp_path, rig_text, seq_text):
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")  # the project root
    (tmp_path / "rig.yaml").write_text(rig_text, encoding="utf-8")
    p = tmp_path / "s.yaml"
    p.write_text(seq_text, encoding="utf-8")
    return p


SEQ = ("seqgen: 1\nrig: rig.yaml\nsample: {species: Na23, state: {F: 1, mF: -1}, atoms: 1.0e5, temperature: 100 nK}\n"
       "blocks:\n  - name: k\n    at: 1 ms\n    actions:\n"
       "      - push: {coil: kick_coil, gradient: 8 G/cm, duration: 1 ms}\n")


@pytest.mark.parametrize("key,value", [("field_grows_along", f"[{HUGE}, 0, 0]"), ("axis", f"[{HUGE}, 0, 0]"),
                                       ("field_grows_along", "[0, 0, 0]"), ("axis", "[0, 0, 0]")])
def test_a_coil_vector_that_is_no_direction_is_a_rig_finding(tmp_path, key, value):
    old = "field_grows_along: [-1, 0, 0]" if key == "field_grows_along" else "axis: [1, 0, 0], field_grows_along"
    new = f"field_grows_along: {value}" if key == "field_grows_along" else f"axis: {value}, field_grows_along"
    assert RIG_TEXT.count(old) == 1
    p = _project(tmp_path, RIG_TEXT.replace(old, new), SEQ)
    res = preflight(p)
    bad = [f for f in res.findings if f.code == "schema.bad-rig"]
    assert bad and bad[0].file.endswith("rig.yaml") and bad[0].line > 0
    assert len(bad[0].message) < 200  # the number is cut, not printed in full
    assert not [f for f in res.findings if f.code == "schema.check-crashed"]


def test_a_large_but_finite_direction_is_normalised(tmp_path):
    p = _project(tmp_path, RIG_TEXT.replace("field_grows_along: [-1, 0, 0]", "field_grows_along: [-1e200, -1e200, 0]"),
                 SEQ)
    res = preflight(p)
    assert res.shot is not None
    v = res.shot.rig.coils["kick_coil"].field_grows_along
    assert v == pytest.approx((-2 ** -0.5, -2 ** -0.5, 0.0))


@pytest.mark.parametrize("where", ["sample", "magnetic_hold"])
def test_a_huge_quantum_number_is_a_schema_finding(tmp_path, where):
    if where == "sample":
        text = SEQ.replace("state: {F: 1, mF: -1}", f"state: {{F: {HUGE}, mF: -1}}")
    else:
        text = SEQ.replace("      - push: {coil: kick_coil, gradient: 8 G/cm, duration: 1 ms}\n",
                           f"      - magnetic_hold: {{currents: {{sg_coil: 40 A}}, duration: 10 ms, state: {{F: {HUGE}, mF: 0}}}}\n"
                           "      - release: {coils: [sg_coil]}\n")
    res = preflight(_project(tmp_path, RIG_TEXT, text))
    bad = [f for f in res.findings if f.code == "schema.bad-value"]
    assert bad and "maximum" in bad[0].message and "characters" in bad[0].message
    assert not [f for f in res.findings if f.code == "schema.check-crashed"]


def test_a_failing_shared_analysis_does_not_leave_a_stale_none():
    calls = []

    @per_shot_cache(lambda shot, x: ("t", x))
    def analysis(shot, x):
        calls.append(x)
        if len(calls) == 1:
            raise ValueError("first call fails")
        return x * 2

    shot = object()
    with pytest.raises(ValueError):
        analysis(shot, 3)
    assert analysis(shot, 3) == 6 and calls == [3, 3]  # retried, not None from the placeholder


@pytest.mark.parametrize("text,expected", [("-\u0663", "-\u0663"), ("1\u0663", "1\u0663"), ("-3", -3), ("1e3", 1000.0)])
def test_numbers_are_ascii_digits_only(text, expected):
    assert load_text(f"a: {text}\n", "x.yaml").data["a"] == expected


def test_diff_of_scans_that_do_not_expand_reports_their_findings(capsys):
    faults = SEQUENCES / "faults"
    rep = diff_paths(str(faults / "scan_zip_lengths_differ.yaml"), str(faults / "scan_too_many_shots.yaml"))
    codes = {(c.kind, c.data.get("code")) for c in rep.changes if c.level == "preflight"}
    assert ("finding-introduced", "schema.scan-too-large") in codes
    assert ("finding-resolved", "schema.scan-length-mismatch") in codes
    assert main(["diff", str(faults / "scan_zip_lengths_differ.yaml"), str(faults / "scan_too_many_shots.yaml")]) == 1


def test_diff_takes_allow_outside_root(tmp_path, capsys):
    assert main(["diff", "--allow-outside-root", str(SEQUENCES / "na23_thermometry.yaml"),
                 str(SEQUENCES / "na23_thermometry.yaml")]) == 0


def test_an_absolute_path_inside_the_project_is_a_warning_with_its_relative_form(tmp_path):
    # an absolute path works only where the project sits; the hint gives the path relative to the file
    p = _project(tmp_path, RIG_TEXT, SEQ.replace("rig: rig.yaml", f"rig: {tmp_path / 'rig.yaml'}"))
    res = preflight(p)
    hits = [f for f in res.findings if f.code == "schema.absolute-path"]
    assert [(f.severity, f.line) for f in hits] == [("warning", 2)]
    assert "'rig.yaml'" in hits[0].hint
    assert res.shot is not None  # it still works here
    # a relative path is quiet
    assert not [f for f in preflight(_project(tmp_path, RIG_TEXT, SEQ)).findings if f.code == "schema.absolute-path"]


def test_a_mistake_reached_by_two_paths_is_reported_once(tmp_path):
    # '5 ms ms' is read once for the param and once where it is used: one finding at the param's line
    text = SEQ.replace("      - push: {coil: kick_coil, gradient: 8 G/cm, duration: 1 ms}\n",
                       "      - hold: {duration: tof}\n").replace("blocks:\n", "params:\n  tof: 5 ms ms\nblocks:\n")
    res = preflight(_project(tmp_path, RIG_TEXT, text))
    bad = [(f.code, f.line, f.column) for f in res.findings if f.code == "schema.bad-expression"]
    assert bad == [("schema.bad-expression", 5, 3)]
