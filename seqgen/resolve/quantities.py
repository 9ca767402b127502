"""Turn document values into SI floats, raising findings with positions."""

from __future__ import annotations

import math

from ..findings import Finding, make
from ..load.yamlsrc import Document
from . import errors as E
from .expr import ExprError, evaluate, is_plain_name, names_in
from .units import DIMENSIONLESS, Qty, UnitError, describe_dims, dims_of, display_unit, parse_simple, same_dims

ABSURD = 1e12  # in SI base units: larger magnitudes are typos (a 1e30 s hold)
_KIND_CODE = {"undefined": E.UNDEFINED, "zero-division": E.ZERO_DIV, "overflow": E.OVERFLOW,
              "dimension": E.WRONG_DIMENSION}


class Bad(Exception):
    def __init__(self, finding: Finding):
        super().__init__(finding.message)
        self.finding = finding


_NOT_FINITE_WORDS = frozenset(("nan", ".nan", "inf", ".inf", "-inf", "-.inf", "infinity"))


def to_qty(raw, doc: Document, path: tuple, env: dict) -> Qty:
    # the position is looked up only for a finding: most values are fine, and a large file has many
    if isinstance(raw, bool):
        return Qty(1.0 if raw else 0.0)
    if isinstance(raw, (int, float)):
        try:
            value = float(raw)
        except OverflowError:  # an integer of hundreds of digits
            raise Bad(make(E.OVERFLOW, f"a {len(str(raw))}-digit number is too large", doc.pos(path),
                           hint="check for a typo; write large numbers with an exponent")) from None
        if not math.isfinite(value):
            raise Bad(make(E.NON_FINITE, f"value {raw} is not finite", doc.pos(path), hint="give a finite number"))
        return Qty(value)
    if not isinstance(raw, str):
        raise Bad(make(E.EXPRESSION, f"expected a quantity, got {type(raw).__name__}", doc.pos(path)))
    text = raw.strip()
    if text.lower() in _NOT_FINITE_WORDS:
        raise Bad(make(E.NON_FINITE, f"value '{text}' is not finite", doc.pos(path), hint="give a finite number"))
    if text in env and is_plain_name(text):  # a param's name: what evaluate() returns, without the walk
        q = env[text]
        if type(q) is Qty and math.isfinite(q.value):
            return q
    try:
        q = parse_simple(text)
    except UnitError as exc:
        # '10 ms / n' looks like a number with a unit, but n is a param: read it as an expression
        try:
            uses_params = bool(names_in(text) & set(env))
        except ExprError:
            uses_params = False
        if not uses_params:
            raise Bad(make(E.BAD_UNIT, str(exc), doc.pos(path), hint="use SI units with prefixes, e.g. ms, us, mW, G/cm, MHz"))
        q = None
    if q is None:
        try:
            q = evaluate(text, env)
        except ExprError as exc:
            code = _KIND_CODE.get(exc.kind, E.EXPRESSION)
            raise Bad(make(code, f"{exc}", doc.pos(path), hint=exc.hint))
    if not math.isfinite(q.value):
        if "nan" in text.lower() or "inf" in text.lower():
            raise Bad(make(E.NON_FINITE, f"'{text}' is not finite", doc.pos(path), hint="give a finite number"))
        raise Bad(make(E.OVERFLOW, f"'{text[:60]}' overflows: too large for a number", doc.pos(path),
                       hint="check for a typo in the exponent"))
    return q


def quantity(raw, expect: str, doc: Document, path: tuple, env: dict, *, positive: bool = False,
             nonnegative: bool = False, what: str = "") -> float:
    """Value in SI base units, checked against the dimension of unit text `expect`."""
    q = to_qty(raw, doc, path, env)
    want = dims_of(expect) if expect else DIMENSIONLESS
    value = q.value
    if (q.dims == want or same_dims(q.dims, want)) and abs(value) <= ABSURD * max(1.0, _scale(expect)) and \
            not (positive and value <= 0) and not (nonnegative and value < 0):
        return value  # the usual case, decided without building a label or a position
    pos = doc.pos(path)
    label = what or (path[-1] if path else "value")
    if not same_dims(q.dims, want):
        if same_dims(q.dims, DIMENSIONLESS) and q.value != 0:
            raise Bad(make(E.MISSING_UNIT, f"{label}: {raw!r} has no unit; expected {display_unit(want)}", pos,
                           hint=f"write it with a unit, e.g. '{raw} {expect}'"))
        if not (same_dims(q.dims, DIMENSIONLESS) and q.value == 0):
            raise Bad(make(E.WRONG_DIMENSION, f"{label}: {raw!r} is {describe_dims(q.dims)}, expected {display_unit(want)}",
                           pos, hint=f"give a value in {expect} (or a unit of the same kind)"))
    if abs(q.value) > ABSURD * max(1.0, _scale(expect)):
        raise Bad(make(E.OVERFLOW, f"{label}: {raw!r} is an absurd magnitude", pos, hint="check for a typo in the exponent"))
    if positive and q.value <= 0:
        raise Bad(make(E.NEGATIVE_DURATION, f"{label} must be positive, got {raw!r}", pos, hint="give a positive value"))
    if nonnegative and q.value < 0:
        raise Bad(make(E.NEGATIVE_DURATION, f"{label} must not be negative, got {raw!r}", pos))
    return q.value


def _scale(expect: str) -> float:
    # frequencies of synths reach 1e10 Hz; allow a larger ceiling for them
    return 1e3 if expect in ("Hz",) else 1.0
