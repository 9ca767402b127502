"""A small, safe evaluator for param expressions with units.

Only arithmetic (+ - * / **), numbers with units ("2 * tof + 1 ms"), names of
params, the constants pi and e, and a few math functions are accepted. The
text is parsed with Python's `ast` module and walked by hand; nothing is ever
passed to `eval`, and attribute access, subscripts, imports and any other call
are refused.
"""

from __future__ import annotations

import ast
import keyword
import math
import re
from functools import lru_cache
from typing import Callable, Mapping

from .units import DIMENSIONLESS, Qty, UnitError, describe_dims, same_dims, unit_factor

MAX_EXPONENT = 64.0
MAX_LENGTH = 2000


class ExprError(ValueError):
    def __init__(self, kind: str, message: str, hint: str = "", names: tuple = ()):
        super().__init__(message)
        self.kind = kind  # "syntax", "undefined", "dimension", "zero-division", "overflow", "forbidden"
        self.hint = hint
        self.names = names


# a number followed by a unit; the unit may not start like an exponent, or '1e308 * 10' would read as 1 * e308
_NUM_UNIT = re.compile(r"(?<![\w.])((?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(?![eE][-+]?\d)([A-Za-z_][A-Za-z0-9_]*)")
_FUNCS: dict[str, Callable] = {
    "sqrt": math.sqrt, "exp": math.exp, "log": math.log, "log10": math.log10, "sin": math.sin,
    "cos": math.cos, "tan": math.tan, "abs": abs, "min": min, "max": max,
}
_DIMLESS_ONLY = {"exp", "log", "log10", "sin", "cos", "tan"}
_CONSTS = {"pi": math.pi, "e": math.e}


@lru_cache(maxsize=8192)
def parse(text: str) -> ast.Expression:
    if len(text) > MAX_LENGTH:
        raise ExprError("syntax", f"expression longer than {MAX_LENGTH} characters")
    norm = text.replace("µ", "u").replace("μ", "u").replace("^", "**").replace("·", "*")
    norm = _NUM_UNIT.sub(lambda m: f"({m.group(1)}*{m.group(2)})", norm)
    try:
        return ast.parse(norm.strip(), mode="eval")
    except SyntaxError as exc:
        raise ExprError("syntax", f"cannot read '{text}' as a quantity or expression ({exc.msg})",
                        "write a number with a unit ('2.5 ms') or an expression of params ('2 * tof + 1 ms')") from None
    except (ValueError, MemoryError, RecursionError):
        raise ExprError("syntax", f"cannot read '{text}'") from None


def is_plain_name(text: str) -> bool:
    """True when `parse(text)` is a bare name: evaluating it then only looks the name up."""
    return len(text) <= MAX_LENGTH and text.isascii() and text.isidentifier() and not keyword.iskeyword(text)


def names_in(text: str) -> set[str]:
    """Names an expression refers to that are not functions or constants."""
    tree = parse(text)
    found = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.Name) and node.id not in _CONSTS and node.id not in _FUNCS:
            found.add(node.id)
    return found


def evaluate(text: str, env: Mapping[str, Qty]) -> Qty:
    tree = parse(text)
    try:
        q = _eval(tree.body, env)
    except RecursionError:
        raise ExprError("syntax", "expression nests too deeply") from None
    if not math.isfinite(q.value):
        raise ExprError("overflow", f"'{text}' evaluates to {q.value}", "check the expression for overflow")
    return q


def _eval(node, env) -> Qty:
    if isinstance(node, ast.Constant):
        if isinstance(node.value, bool) or not isinstance(node.value, (int, float)):
            raise ExprError("forbidden", f"only numbers are allowed, not {str(node.value)[:40]!r}")
        try:
            return Qty(float(node.value))
        except OverflowError:  # an integer literal of hundreds of digits
            raise ExprError("overflow", "number too large", "check for a typo in the number") from None
    if isinstance(node, ast.Name):
        return _name(node.id, env)
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, (ast.UAdd, ast.USub)):
        q = _eval(node.operand, env)
        return Qty(-q.value if isinstance(node.op, ast.USub) else q.value, q.dims)
    if isinstance(node, ast.BinOp):
        a = _eval(node.left, env)
        b = _eval(node.right, env)
        return _binop(node.op, a, b)
    if isinstance(node, ast.Call):
        if not isinstance(node.func, ast.Name) or node.func.id not in _FUNCS or node.keywords:
            raise ExprError("forbidden", "only the functions " + ", ".join(sorted(_FUNCS)) + " may be called")
        name = node.func.id
        args = [_eval(a, env) for a in node.args]
        if not args:
            raise ExprError("syntax", f"{name}() needs an argument")
        return _call(name, args)
    raise ExprError("forbidden", f"'{type(node).__name__}' is not allowed in an expression",
                    "use only numbers with units, param names, + - * / ** and math functions")


UNDEFINED_HINT = "define it under params:"  # the fix for a name that is no param, unit or constant


def _name(name: str, env) -> Qty:
    if name in env:
        return env[name]
    if name in _CONSTS:
        return Qty(_CONSTS[name])
    try:
        factor, dims = unit_factor(name)
        return Qty(factor, dims)
    except UnitError:
        import difflib

        close = difflib.get_close_matches(name, list(env), n=1)
        hint = f"did you mean '{close[0]}'?" if close else UNDEFINED_HINT
        raise ExprError("undefined", f"'{name}' is neither a param nor a unit", hint, (name,)) from None


def _binop(op, a: Qty, b: Qty) -> Qty:
    try:
        if isinstance(op, (ast.Add, ast.Sub)):
            if not same_dims(a.dims, b.dims):
                raise ExprError("dimension", f"cannot add {describe_dims(a.dims)} and {describe_dims(b.dims)}")
            return Qty(a.value + b.value if isinstance(op, ast.Add) else a.value - b.value, a.dims)
        if isinstance(op, ast.Mult):
            return Qty(a.value * b.value, tuple(x + y for x, y in zip(a.dims, b.dims)))
        if isinstance(op, ast.Div):
            if b.value == 0:
                raise ExprError("zero-division", "division by zero", "check the divisor param is not zero")
            return Qty(a.value / b.value, tuple(x - y for x, y in zip(a.dims, b.dims)))
        if isinstance(op, ast.Pow):
            if not same_dims(b.dims, DIMENSIONLESS):
                raise ExprError("dimension", "an exponent must be dimensionless")
            if abs(b.value) > MAX_EXPONENT:
                raise ExprError("overflow", f"exponent {b.value:g} is larger than {MAX_EXPONENT:g}")
            if a.value < 0 and b.value != int(b.value):
                raise ExprError("overflow", "fractional power of a negative number")
            if a.value == 0 and b.value < 0:
                raise ExprError("zero-division", "zero to a negative power")
            return Qty(a.value ** b.value, tuple(x * b.value for x in a.dims))
    except OverflowError:
        raise ExprError("overflow", "number too large", "check the expression for overflow") from None
    raise ExprError("forbidden", f"operator '{type(op).__name__}' is not allowed")


def _call(name: str, args: list[Qty]) -> Qty:
    if name in ("min", "max"):
        if any(not same_dims(a.dims, args[0].dims) for a in args):
            raise ExprError("dimension", f"{name}() arguments must have one dimension")
        pick = min if name == "min" else max
        return pick(args, key=lambda q: q.value)
    if len(args) != 1:
        raise ExprError("syntax", f"{name}() takes one argument")
    (a,) = args
    if name in _DIMLESS_ONLY and not same_dims(a.dims, DIMENSIONLESS):
        raise ExprError("dimension", f"{name}() needs a dimensionless argument, got {describe_dims(a.dims)}")
    try:
        if name == "sqrt":
            if a.value < 0:
                raise ExprError("overflow", "square root of a negative number")
            return Qty(math.sqrt(a.value), tuple(x / 2 for x in a.dims))
        if name == "abs":
            return Qty(abs(a.value), a.dims)
        return Qty(_FUNCS[name](a.value))
    except (ValueError, OverflowError) as exc:
        raise ExprError("overflow", f"{name}({a.value:g}): {exc}", "check the argument: it is out of the function's "
                        "range") from None
