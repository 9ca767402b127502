"""Units at the edge: text like "2.5 ms" or "4 G/cm" -> SI float plus dimension.

Unit names are parsed by pint (a well-kept units library) once per distinct
unit text and cached; inside seqgen every quantity is a float in SI base units
with a small dimension vector, which keeps resolution fast and exact about
dimensions.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

import pint

_UREG = pint.UnitRegistry(autoconvert_offset_to_baseunit=False)
# pint's gauss belongs to the Gaussian-CGS system (square-root dimensions); labs
# mean the SI-compatible 1 G = 1e-4 T, so every G / gauss word is mapped to it.
_UREG.define("labgauss = 1e-4 * tesla = LabG")
_GAUSS_WORD = re.compile(r"\b(da|[yzafpnumcdhkMGTP])?(G|gauss|Gs)\b")
_BASE = ("[length]", "[mass]", "[time]", "[current]", "[temperature]", "[substance]", "[luminosity]")
_SYMBOL = ("m", "kg", "s", "A", "K", "mol", "cd")

Dims = tuple  # 7 exponents, floats


DIMENSIONLESS: Dims = (0.0,) * 7


@dataclass(frozen=True)
class Qty:
    """A value in SI base units with its dimension exponents."""

    value: float
    dims: Dims = DIMENSIONLESS

    def __str__(self) -> str:
        return format_qty(self)


class UnitError(ValueError):
    pass


@lru_cache(maxsize=4096)
def unit_factor(unit_text: str) -> tuple[float, Dims]:
    """SI factor and dimension of a unit expression such as 'G/cm' or 'mW'."""
    text = unit_text.strip().replace("µ", "u").replace("μ", "u").replace("^", "**")
    text = _GAUSS_WORD.sub(lambda m: (m.group(1) or "") + "LabG", text)
    if not text:
        return 1.0, DIMENSIONLESS
    try:
        q = _UREG.Quantity(1.0, text)
        if not q._ok_for_muldiv():
            raise UnitError("offset temperature units (degC, degF) are not accepted; use K")
        base = q.to_base_units()
    except UnitError:
        raise
    except Exception as exc:  # pint raises many types for bad text
        raise UnitError(f"unknown unit '{unit_text}'") from exc
    dim = base.dimensionality
    dims = tuple(float(dim.get(b, 0)) for b in _BASE)
    return float(base.magnitude), dims


def is_unit_name(word: str) -> bool:
    try:
        unit_factor(word)
        return True
    except UnitError:
        return False


_QTY_RE = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([^\d\s].*)?$")


@lru_cache(maxsize=16384)
def parse_simple(text: str) -> Qty | None:
    """Parse '<number> [unit]' quickly; None if the text is not of that form."""
    m = _QTY_RE.match(text)
    if not m:
        return None
    number = float(m.group(1))
    unit = m.group(2)
    if unit is None:
        return Qty(number)
    if not re.fullmatch(r"[A-Za-zµμΩ_][A-Za-z0-9µμΩ_]*(\s*[*/]\s*[A-Za-zµμΩ_][A-Za-z0-9µμΩ_]*(\*\*|\^)?-?\d*)*(\*\*|\^)?-?\d*", unit.strip()):
        return None
    factor, dims = unit_factor(unit)
    return Qty(number * factor, dims)


@lru_cache(maxsize=256)
def dims_of(unit_text: str) -> Dims:
    return unit_factor(unit_text)[1]


def describe_dims(dims: Dims) -> str:
    parts = []
    for sym, e in zip(_SYMBOL, dims):
        if e == 0:
            continue
        parts.append(sym if e == 1 else f"{sym}^{e:g}")
    return " ".join(parts) if parts else "dimensionless"


# Display units for common dimensions, so messages read "45 mW", not "0.045 kg m^2 s^-3".
_DISPLAY = {}


def _init_display():
    for unit in ("s", "W", "V", "A", "Hz", "K", "m", "m/s", "T", "T/m", "J", "W/m^2", "kg", "rad/s"):
        _DISPLAY.setdefault(dims_of(unit), unit)


def display_unit(dims: Dims) -> str:
    if not _DISPLAY:
        _init_display()
    return _DISPLAY.get(dims, describe_dims(dims))


_PREFIXES = ((1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"), (1e-9, "n"), (1e-12, "p"))


def format_value(value: float, unit: str) -> str:
    """Engineering notation with an SI prefix: 0.0025 s -> '2.5 ms'."""
    if unit in ("", "dimensionless"):
        return f"{value:.6g}"
    if not math.isfinite(value) or value == 0:
        return f"{value:g} {unit}"
    if unit in ("kg", "m/s", "W/m^2", "T/m", "rad/s") or " " in unit or "^" in unit:
        return f"{value:.6g} {unit}"
    a = abs(value)
    for factor, prefix in _PREFIXES:
        if a >= factor * 0.9999999:
            return f"{value / factor:.6g} {prefix}{unit}"
    return f"{value:.6g} {unit}"


def format_qty(q: Qty) -> str:
    return format_value(q.value, display_unit(q.dims))


def same_dims(a: Dims, b: Dims) -> bool:
    return all(abs(x - y) < 1e-9 for x, y in zip(a, b))
