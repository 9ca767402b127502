"""Number formatting for diff reports: times in ms / us, quantities with SI prefixes."""

from __future__ import annotations

import math

from ..textfmt import fmt_si, fmt_time_fixed
from .model import REL_TOL, TIME_TOL_S


def t(value: float | None) -> str:
    """A time: 'us' below 1 ms, else 'ms' (us resolution kept: 2723.06 ms)."""
    return "-" if value is None else fmt_time_fixed(value)


def dt(value: float) -> str:
    """A signed time difference."""
    return ("+" if value >= 0 else "-") + t(abs(value))


def q(value, unit: str = "") -> str:
    if value is None:
        return "none"
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, (int, float)):
        return fmt_si(float(value), unit) if unit else f"{float(value):.6g}"
    if isinstance(value, (tuple, list)):
        return "(" + ", ".join(q(v, unit) for v in value) + ")"
    return str(value)


def close(a, b, *, abs_tol: float = 0.0) -> bool:
    """Equal within the diff's relative tolerance (recursing into tuples)."""
    if isinstance(a, (tuple, list)) and isinstance(b, (tuple, list)):
        return len(a) == len(b) and all(close(x, y, abs_tol=abs_tol) for x, y in zip(a, b))
    if isinstance(a, bool) or isinstance(b, bool) or a is None or b is None:
        return a == b
    if isinstance(a, (int, float)) and isinstance(b, (int, float)):
        if math.isnan(a) or math.isnan(b):
            return math.isnan(a) and math.isnan(b)
        return math.isclose(a, b, rel_tol=REL_TOL, abs_tol=abs_tol)
    return a == b


def close_t(a: float | None, b: float | None) -> bool:
    if a is None or b is None:
        return a is b
    return abs(a - b) <= TIME_TOL_S


_PREFIX = {"G": 1e9, "M": 1e6, "k": 1e3, "": 1.0, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12}


def pair(a, b, unit: str = "", exact: bool = True) -> tuple[str, str]:
    """Both values formatted with the digits each needs (6 to 12; `exact=False`: 6), and at least enough to
    tell them apart."""
    if not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in (a, b)):
        return q(a, unit), q(b, unit)
    da, db = (_needed(float(a)), _needed(float(b))) if exact else (6, 6)
    sa, sb = _digits(float(a), unit, da), _digits(float(b), unit, db)
    d = max(da, db)
    while sa == sb and a != b and d < 12:
        d += 1
        sa, sb = _digits(float(a), unit, d), _digits(float(b), unit, d)
    return sa, sb


def _needed(v: float) -> int:
    for d in range(6, 13):
        if math.isclose(float(f"{v:.{d}g}"), v, rel_tol=1e-12, abs_tol=0.0):
            return d
    return 12


def _digits(v: float, unit: str, digits: int) -> str:
    text = q(v, unit)
    if not unit or " " not in text:
        return f"{v:.{digits}g}" if not unit else text
    shown = text.split(" ", 1)[1]
    prefix = shown[: len(shown) - len(unit)] if shown.endswith(unit) else None
    if prefix in _PREFIX:
        return f"{v / _PREFIX[prefix]:.{digits}g} {shown}"
    return f"{v:.{digits}g} {shown}"
