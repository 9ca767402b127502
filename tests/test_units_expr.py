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
