"""Units and expressions against SI definitions (SI Brochure, 9th ed., 2019) and scipy.constants."""

import math

import pytest
from scipy import constants as C

from seqgen.resolve.expr import ExprError, evaluate, names_in
from seqgen.resolve.units import dims_of, parse_simple, same_dims, unit_factor


@pytest.mark.parametrize("text,si", [
    ("2.5 ms", 2.5e-3), ("45 mW", 45e-3), ("1.77 GHz", 1.77e9), ("60 nK", 60e-9), ("9 mm/s", 9e-3),
    ("3 us", 3e-6), ("3 µs", 3e-6),
    # 1 G = 1e-4 T exactly (SI Brochure, non-SI units accepted for use: gauss); 1 G/cm = 0.01 T/m
    ("4 G/cm", 0.04), ("2 mG", 2e-7),
])
def test_simple_quantities_in_si(text, si):
    q = parse_simple(text)
    assert q.value == pytest.approx(si, rel=1e-12)


def test_gauss_has_tesla_dimensions():
    assert same_dims(dims_of("G"), dims_of("T"))
    assert same_dims(dims_of("G/cm"), dims_of("T/m"))


def test_hertz_and_electronvolt_against_scipy_constants():
    f, _ = unit_factor("eV")
    assert f == pytest.approx(C.electron_volt, rel=1e-12)
    f, _ = unit_factor("u")  # pint reads "u" as the atomic mass unit
    assert f == pytest.approx(C.atomic_mass, rel=1e-9)


def test_expression_with_params_and_units():
    env = {"tof": parse_simple("14 ms")}
    assert evaluate("2 * tof + 1 ms", env).value == pytest.approx(29e-3)
    assert evaluate("pi/2", env).value == pytest.approx(math.pi / 2)
    assert names_in("2 * tof + 1 ms") >= {"tof"}


@pytest.mark.parametrize("text,kind", [
    ("__import__('os')", "forbidden"), ("tof.real", "forbidden"), ("[1][0]", "forbidden"),
    ("1 / 0", "zero-division"), ("2 ** 1000", "overflow"), ("tof + 1 V", "dimension"), ("tfo * 2", "undefined"),
    ("exp(1 ms)", "dimension"), ("(lambda: 1)()", "forbidden"),
])
def test_expression_refusals(text, kind):
    env = {"tof": parse_simple("14 ms")}
    with pytest.raises(ExprError) as exc:
        evaluate(text, env)
    assert exc.value.kind == kind


def test_did_you_mean_for_misspelt_param():
    with pytest.raises(ExprError) as exc:
        evaluate("tfo * 2", {"tof": parse_simple("1 ms")})
    assert "tof" in exc.value.hint


# ----------------------------------------------------------------------------- messages a new user can act on
# Unit symbols are case-sensitive and prefixes differ by case (m milli, M mega); S is the siemens, the SI unit of
# conductance; 1 G = 1e-4 T, so a gradient in G/cm is a field per length (SI Brochure, 9th ed., 2019: prefixes,
# unit symbols, non-SI units) (from memory). Each fix a message gives is applied and must then resolve.

from seqgen.load.yamlsrc import load_text  # noqa: E402
from seqgen.resolve.quantities import Bad, quantity  # noqa: E402
from seqgen.resolve.units import close_units, kind_of, unit_name  # noqa: E402


def _refusal(value, expect, key="duration"):
    doc = load_text(f"a:\n  {key}: {value}\n", "f.yaml")
    with pytest.raises(Bad) as exc:
        quantity(doc.data["a"][key], expect, doc, ("a", key), {})
    return exc.value.finding


def _fixed(hint: str) -> str:
    return hint.split("write '", 1)[1].split("'", 1)[0]


def test_unit_names_and_kinds_follow_the_si():
    assert unit_name("mS") == "millisiemens" and unit_name("G") == "gauss" and unit_name("uK") == "microkelvin"
    assert kind_of(dims_of("mS")) == "conductance" and kind_of(dims_of("ms")) == "time"
    assert kind_of(dims_of("G")) == "magnetic field" and kind_of(dims_of("G/cm")) == "magnetic field gradient"


def test_millisiemens_where_a_time_is_expected_names_both_and_suggests_ms():
    f = _refusal("80 mS", "s")
    assert f.code == "schema.wrong-dimension" and f.line == 2
    assert "80 mS is 80 millisiemens (a conductance), expected a time; did you mean ms?" in f.message
    assert _fixed(f.hint) == "80 ms" and parse_simple(_fixed(f.hint)).value == pytest.approx(0.080, rel=1e-12)


def test_a_field_where_a_gradient_is_expected_names_the_kinds_and_suggests_per_cm():
    f = _refusal("8 G", "T/m", key="gradient")
    assert f.code == "schema.wrong-dimension"
    assert "magnetic field" in f.message and "expected a magnetic field gradient" in f.message
    assert "did you mean G/cm?" in f.message
    assert parse_simple(_fixed(f.hint)).value == pytest.approx(0.08, rel=1e-12)  # 8 G/cm = 0.08 T/m


def test_an_unknown_unit_in_the_wrong_case_suggests_the_known_one():
    f = _refusal("0.43 mw", "W", key="power")
    assert f.code == "schema.unknown-unit" and "did you mean mW?" in f.message
    assert parse_simple(_fixed(f.hint)).value == pytest.approx(0.43e-3, rel=1e-12)
    assert close_units("Mhz") == ["MHz"] and close_units("furlongz") == []


def test_a_bare_number_gets_a_unit_of_the_expected_kind():
    f = _refusal("5", "s")
    assert f.code == "schema.missing-unit" and "has no unit; expected a time" in f.message
    assert _fixed(f.hint) == "5 ms" and "write it with a unit" not in f.hint
    f = _refusal("0.5", "W", key="to")
    assert _fixed(f.hint) == "0.5 mW" and same_dims(parse_simple(_fixed(f.hint)).dims, dims_of("W"))
