"""Turn document values into SI floats, raising findings with positions."""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, replace

from ..findings import Finding, make
from ..load.yamlsrc import Document
from .expr import ExprError, evaluate, is_plain_name, names_in
from .units import DIMENSIONLESS, Qty, UnitError, close_units, describe_kind, dims_of, format_qty, kind_of, kind_units, parse_simple, \
    same_dims, split_quantity, suggest_unit, unit_name
from ..codes import (
    BAD_EXPRESSION, BAD_VALUE, DIVISION_BY_ZERO, MISSING_UNIT, NEGATIVE_DURATION, NON_FINITE, OVERFLOW, UNDEFINED_PARAM,
    UNKNOWN_UNIT, WRONG_DIMENSION,
)

ABSURD = 1e12  # in SI base units: larger magnitudes are typos (a 1e30 s hold)
_KIND_CODE = {"undefined": UNDEFINED_PARAM, "zero-division": DIVISION_BY_ZERO, "overflow": OVERFLOW,
              "dimension": WRONG_DIMENSION}


class Bad(Exception):
    def __init__(self, finding: Finding):
        super().__init__(finding.message)
        self.finding = finding


class Env(dict):
    """Resolved params, name -> Qty, that also knows where each param is defined: `defs` maps a name to
    (raw value as written, Document, path), so a finding about a param's value points at its definition;
    `written` maps a name to the values of all its definitions (those another file's replace too), whose
    units tell the fix for one written without a unit."""

    __slots__ = ("defs", "written")

    def __init__(self, *args, defs: dict | None = None, written: dict | None = None, **kwargs):
        super().__init__(*args, **kwargs)
        self.defs = defs or {}
        self.written = written or {}


_NOT_FINITE_WORDS = frozenset(("nan", ".nan", "inf", ".inf", "-inf", "-.inf", "infinity"))


def to_qty(raw, doc: Document, path: tuple, env: dict) -> Qty:
    # the position is looked up only for a finding: most values are fine, and a large file has many
    if isinstance(raw, bool):
        return Qty(1.0 if raw else 0.0)
    if isinstance(raw, (int, float)):
        try:
            value = float(raw)
        except OverflowError:  # an integer of hundreds of digits
            raise Bad(make(OVERFLOW, f"a {len(str(raw))}-digit number is too large", doc.pos(path),
                           hint="check for a typo; write large numbers with an exponent")) from None
        if not math.isfinite(value):
            raise Bad(make(NON_FINITE, f"value {raw} is not finite", doc.pos(path), hint="give a finite number"))
        return Qty(value)
    if not isinstance(raw, str):
        raise Bad(make(BAD_EXPRESSION, f"expected a quantity, got {type(raw).__name__}", doc.pos(path)))
    text = raw.strip()
    if text.lower() in _NOT_FINITE_WORDS:
        raise Bad(make(NON_FINITE, f"value '{text}' is not finite", doc.pos(path), hint="give a finite number"))
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
            raise Bad(_unknown_unit(text, exc, doc.pos(path)))
        q = None
    if q is None:
        try:
            q = evaluate(text, env)
        except ExprError as exc:
            code = _KIND_CODE.get(exc.kind, BAD_EXPRESSION)
            raise Bad(make(code, f"{exc}", doc.pos(path), hint=exc.hint))
    if not math.isfinite(q.value):
        if "nan" in text.lower() or "inf" in text.lower():
            raise Bad(make(NON_FINITE, f"'{text}' is not finite", doc.pos(path), hint="give a finite number"))
        raise Bad(make(OVERFLOW, f"'{text[:60]}' overflows: too large for a number", doc.pos(path),
                       hint="check for a typo in the exponent"))
    return q


def quantity(raw, expect: str, doc: Document, path: tuple, env: dict, *, positive: bool = False,
             nonnegative: bool = False, what: str = "", units: tuple = (), span: tuple | None = None) -> float:
    """Value in SI base units, checked against the dimension of unit text `expect`. For the fix of a value
    without a unit: `units`, the units this place is written in (a channel's calibration unit), and `span`,
    (lo, hi) in SI of a value that fits (a channel's range)."""
    q = to_qty(raw, doc, path, env)
    want = dims_of(expect) if expect else DIMENSIONLESS
    value = q.value
    if (q.dims == want or same_dims(q.dims, want)) and abs(value) <= ABSURD * max(1.0, _scale(expect)) and \
            not (positive and value <= 0) and not (nonnegative and value < 0):
        return value  # the usual case, decided without building a label or a position
    pos = doc.pos(path)
    label = what or (path[-1] if path else "value")
    if not same_dims(q.dims, want):
        missing = same_dims(q.dims, DIMENSIONLESS) and q.value != 0
        if missing or not (same_dims(q.dims, DIMENSIONLESS) and q.value == 0):
            fit = Fit(tuple(units), key_examples(doc, path, want), span)
            raise Bad(_dimension_finding(raw, q, want, expect, label, pos, env, fit))
    if abs(q.value) > ABSURD * max(1.0, _scale(expect)):
        raise Bad(make(OVERFLOW, f"{label}: {raw!r} is an absurd magnitude", pos, hint="check for a typo in the exponent"))
    code = NEGATIVE_DURATION if same_dims(want, dims_of("s")) else BAD_VALUE  # a 0 K temperature is no duration
    if positive and q.value <= 0:
        raise Bad(make(code, f"{label} must be positive, got {_value_text(raw, q, env)}", pos, hint="give a positive value"))
    if nonnegative and q.value < 0:
        raise Bad(make(code, f"{label} must not be negative, got {_value_text(raw, q, env)}", pos,
                       hint="give a value of 0 or more"))
    return q.value


def close_hint(name: str, options) -> str:
    """'did you mean ...?' for the option closest to a misspelt name, else the known options ('' if none)."""
    close = difflib.get_close_matches(name, list(options), n=1)
    return f"did you mean '{close[0]}'?" if close else ("known: " + ", ".join(sorted(options)) if options else "")


def _scale(expect: str) -> float:
    # frequencies of synths reach 1e10 Hz; allow a larger ceiling for them
    return 1e3 if expect in ("Hz",) else 1.0


# ----------------------------------------------------------------------------- messages a new user can act on


@dataclass(frozen=True)
class Fit:
    """What tells the unit a value should have been written in: `units`, those of the place (a channel's
    calibration unit); `seen`, (unit, SI value) of the same key elsewhere in the file (`key_examples`) and of
    the param's other definitions; `span`, (lo, hi) in SI of a value that fits the place."""

    units: tuple = ()
    seen: tuple = ()
    span: tuple | None = None


def seen_in(raw, want) -> tuple | None:
    """(unit, SI value) of `raw` if it is a nonzero '<number> <unit>' of dimension `want`, else None."""
    if isinstance(raw, dict):  # a param written {value: ..., min: ...}
        raw = raw.get("value")
    split = split_quantity(raw) if isinstance(raw, str) else None
    if not split or not split[1]:
        return None
    try:
        q = parse_simple(raw)
    except UnitError:
        return None
    return (split[1], q.value) if q is not None and q.value and same_dims(q.dims, want) else None


def key_examples(doc: Document, path: tuple, want) -> tuple:
    """(unit, SI value) of every quantity of dimension `want` written with a unit under the same key as the
    last name of `path` anywhere in `doc` (the waists of the other beams for a beam's waist), in file order;
    if there is none, of those beside it in its mapping (`fall:` for `rise:`), else of those as deep in the
    same section (`path[0]`: the latencies of the other channels for a channel's min_pulse)."""
    key = next((p for p in reversed(path) if isinstance(p, str)), None)
    if key is None or not isinstance(doc.data, dict):
        return ()
    same_key, section = [], []
    stack = [(doc.data, None, 0)]
    while stack:
        node, top, depth = stack.pop()
        items = node.items() if isinstance(node, dict) else enumerate(node)
        children = []
        for k, v in items:
            top_k = k if top is None else top
            if isinstance(v, (dict, list)):
                children.append((v, top_k, depth + 1))
                if k == key and isinstance(node, dict):  # a param {value: ..., min: ...}, or a list of values
                    same_key += [h for h in map(lambda x: seen_in(x, want), v if isinstance(v, list) else (v,)) if h]
                continue
            if k == key and isinstance(node, dict):
                hit = seen_in(v, want)
                if hit:
                    same_key.append(hit)
            elif top_k == path[0] and depth + 1 == len(path):  # as deep in the same section: another entry's
                hit = seen_in(v, want)
                if hit:
                    section.append(hit)
        stack.extend(reversed(children))
    if same_key:
        return tuple(same_key)
    parent = doc.data
    for p in path[:-1]:  # the mapping the value stands in: its siblings ('rise: ..' beside 'fall: 2.1 ms')
        try:
            parent = parent[p]
        except (KeyError, IndexError, TypeError):
            parent = None
            break
    siblings = [seen_in(v, want) for k, v in parent.items() if k != path[-1]] if isinstance(parent, dict) else []
    return tuple([h for h in siblings if h] or section)


def _shown(raw) -> str:
    return raw.strip() if isinstance(raw, str) else repr(raw)


def _value_text(raw, q: Qty, env) -> str:
    """What was written, and its value when it names params ('sheet_power' = 0 W)."""
    written = _shown(raw)
    if isinstance(raw, str) and names_of(raw) & set(env or ()):
        return f"{written!r} = {format_qty(q)}"
    return repr(written) if isinstance(raw, str) else written


def _unknown_unit(text: str, exc: UnitError, pos) -> Finding:
    """schema.unknown-unit, naming the unit names closest to the one written ('mw' -> 'mW')."""
    split = split_quantity(text)
    unit = split[1] if split and split[1] else None
    close = close_units(unit) if unit else []
    if not close:
        return make(UNKNOWN_UNIT, str(exc), pos, hint="use SI units with prefixes, e.g. ms, us, mW, G/cm, MHz")
    number = split[0]
    return make(UNKNOWN_UNIT, f"unknown unit '{unit}' in '{text}'; did you mean {' or '.join(close)}?", pos,
                hint=f"write '{number} {close[0]}' (unit names are case-sensitive: m is milli, M is mega)")


def _what_it_is(text: str, dims) -> str:
    """'80 mS is 80 millisiemens (a conductance)' / "'2 * t' is a time": what a written value is."""
    split = split_quantity(text)
    kind = describe_kind(dims)
    if split and split[1]:
        name = unit_name(split[1])
        if name:
            plural = float(split[0]) != 1 and not name.endswith(("s", "z", "x"))
            return f"{text} is {split[0]} {name}{'s' if plural else ''} ({kind})"
        return f"{text} is {kind}"
    return f"'{text}' is {kind}"


def _expected(want, expect: str) -> str:
    units = kind_units(want) or ((expect,) if expect else ())
    kind = describe_kind(want)
    return f"{kind} ({', '.join(units)})" if units else kind


def _dimension_finding(raw, q: Qty, want, expect: str, label: str, pos, env, fit: Fit = Fit()) -> Finding:
    """schema.missing-unit / schema.wrong-dimension for a value used as `label`, in the user's words: what
    the value is, what the place expects, and a fix to write. A param named as the value (`duration:
    kick_time`) is reported at its definition, with the place it is used."""
    text = _shown(raw)
    defs = getattr(env, "defs", None) or {}
    if isinstance(raw, str) and text in defs:
        draw, ddoc, dpath = defs[text]
        where = f"line {pos.line}" if ddoc.file == pos.file else f"{pos.file}:{pos.line}"
        others = tuple(seen_in(raw_w, want) for raw_w in getattr(env, "written", {}).get(text, ()))
        fit = replace(fit, seen=tuple(x for x in others if x) + fit.seen)
        return _dimension_words(draw, q, want, expect, f"its use as {label} at {where}", ddoc.pos(dpath),
                                name=text, defs=defs, fit=fit)
    return _dimension_words(raw, q, want, expect, label, pos, defs=defs, fit=fit)


def _dimension_words(raw, q: Qty, want, expect: str, label: str, pos, *, name: str | None = None,
                     defs: dict | None = None, fit: Fit = Fit()) -> Finding:
    """The finding for value `raw` (its Qty `q`) where `want` is expected; `name`: the param it defines (the
    finding then sits at the definition and `label` says where it is used). The unit a fix proposes comes
    from `fit` (the place's unit, the same key's units in the file), else it is the dimension's usual one."""
    text = _shown(raw)
    kind = kind_of(want)
    split = split_quantity(text) if isinstance(raw, str) else (text, None)
    number = _number(split[0]) if split is not None else None
    usual = suggest_unit(want, number, fit.units, fit.seen, fit.span, expect)
    others = [u for u in kind_units(want) if u != usual][:3]
    more = f" (or another {kind} unit: {', '.join(others)})" if kind and others else ""

    def quoted(value: str) -> str:  # what to write, as it would stand in the file
        return f"'{name}: {value}'" if name else f"'{value}'"

    plain = split is not None and split[1] is None  # a bare number
    shown = text if split is not None else f"'{text}'"
    if same_dims(q.dims, DIMENSIONLESS):  # a bare number (or an expression of bare numbers)
        if name:
            message = f"param '{name}' is {shown} with no unit, but {label} needs {describe_kind(want)}"
        else:
            message = f"{label}: {shown} has no unit; expected {describe_kind(want)}"
        if plain:
            return make(MISSING_UNIT, message, pos, hint=f"write {quoted(f'{split[0]} {usual}')}{more}")
        used = names_of(text)
        bare = [n for n in sorted(defs or {}) if n in used and _is_bare_number(defs[n][0])]
        if bare:
            raw_b, doc_b, path_b = defs[bare[0]]
            unit_b = suggest_unit(want, _number(_shown(raw_b)), fit.units, fit.seen, fit.span, expect)
            hint = (f"give '{bare[0]}' a unit where it is defined (line {doc_b.pos(path_b).line}), e.g. "
                    f"'{bare[0]}: {_shown(raw_b)} {unit_b}'")
        else:
            hint = f"make it {_expected(want, expect)}"
        return make(MISSING_UNIT, message, pos, hint=hint)
    unit = split[1] if split else None
    close = close_units(unit, want, number=number, seen=fit.seen) if unit else []
    expected = describe_kind(want) if unit else _expected(want, expect)
    what_it_is = _what_it_is(text, q.dims)
    if name:
        message = f"param '{name}': {what_it_is}, but {label} expects {expected}"
    else:
        message = f"{label}: {what_it_is}, expected {expected}"
    if same_dims(want, DIMENSIONLESS):
        hint = f"write {quoted(split[0])} (a plain number, without a unit)" if unit else "give a plain number"
    elif close:
        message += f"; did you mean {' or '.join(close)}?"
        hint = f"write {quoted(f'{split[0]} {close[0]}')}"
    elif unit:
        hint = f"give {describe_kind(want)}, e.g. {quoted(f'{split[0]} {usual}')}{more}"
    else:
        hint = f"give {_expected(want, expect)}"
    return make(WRONG_DIMENSION, message, pos, hint=hint)


def _number(text: str) -> float | None:
    try:
        value = float(text)
    except (OverflowError, ValueError):
        return None
    return value if math.isfinite(value) else None


def names_of(text: str) -> set:
    """The names an expression uses (empty if it cannot be read)."""
    try:
        return names_in(text)
    except ExprError:
        return set()


def _is_bare_number(raw) -> bool:
    return isinstance(raw, (int, float)) and not isinstance(raw, bool) and raw != 0
