"""Units at the edge: text like "2.5 ms" or "4 G/cm" -> SI float plus dimension.

Unit names are parsed by pint (a well-kept units library) once per distinct
unit text and cached; inside seqgen every quantity is a float in SI base units
with a small dimension vector, which keeps resolution fast and exact about
dimensions.
"""

from __future__ import annotations

import math
import os
import re
import sys
import threading
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

from ..textfmt import fmt_si

_UREG = None
_UREG_LOCK = threading.Lock()


def _cache_folder() -> Path | None:
    """Where pint keeps its parsed definitions between runs: a per-user cache folder ($XDG_CACHE_HOME, else
    ~/.cache), per Python version (the files are pickles); None (no cache) when it cannot be written."""
    try:
        base = os.environ.get("XDG_CACHE_HOME", "")
        root = Path(base) if os.path.isabs(base) else Path.home() / ".cache"
        folder = root / "seqgen" / f"pint-py{sys.version_info[0]}.{sys.version_info[1]}"
        folder.mkdir(parents=True, exist_ok=True)
    except (OSError, RuntimeError):  # RuntimeError: no home folder to be found
        return None
    return folder if os.access(folder, os.W_OK | os.X_OK) else None


def _new_registry():
    import pint  # here, not at the head: commands that parse no unit never load pint

    folder = _cache_folder()
    if folder is not None:
        try:  # building the registry from pint's text definitions takes ~0.1 s; its own cache skips that
            return pint.UnitRegistry(autoconvert_offset_to_baseunit=False, cache_folder=folder)
        except Exception:  # a cache file cut short (a killed run, a concurrent first write): drop it, build anew
            for stale in (*folder.glob("*.pickle"), *folder.glob("*.json")):
                try:
                    stale.unlink()
                except OSError:
                    pass
    return pint.UnitRegistry(autoconvert_offset_to_baseunit=False)


def _ureg():
    """The one pint registry of the process, built on first use."""
    global _UREG
    if _UREG is None:
        with _UREG_LOCK:
            if _UREG is None:
                ureg = _new_registry()
                # pint's gauss belongs to the Gaussian-CGS system (square-root dimensions); labs
                # mean the SI-compatible 1 G = 1e-4 T, so every G / gauss word is mapped to it.
                ureg.define("labgauss = 1e-4 * tesla = LabG")
                _UREG = ureg
    return _UREG


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


# ----------------------------------------------------------------------------- pint's answers, kept on disk
# Loading pint costs about 0.15 s, more than a whole check of a small file. Each unit text's answer (SI factor,
# dimension) is written to a per-user cache file the first time pint gives it; a later run reads the answers it
# needs from there and loads pint only for a text it has never seen. The answers are pint's own, never a
# hand-written table. The file is named by what they depend on: this module's source (the gauss word, the
# text clean-up), pint's installed files and the Python version; an upgrade of either starts a new file.
_ANSWERS_MAX = 4096  # unit texts kept: a few hundred kB at most
_ANSWERS: dict | None = None
_ANSWERS_LOCK = threading.Lock()


@lru_cache(maxsize=1)
def _answers_file() -> Path | None:
    """The cache file for this module and this pint, or None (no folder to write, pint not installed)."""
    from importlib.util import find_spec
    import hashlib

    from ..physics import stored

    try:
        spec = find_spec("pint")
        if spec is None or not spec.origin:
            return None
        pint_dir = Path(spec.origin).parent
        h = hashlib.sha256(f"{sys.version}|{pint_dir}".encode())
        h.update(Path(__file__).read_bytes())
        for name in ("__init__.py", "default_en.txt", "constants_en.txt", "registry.py"):
            st = (pint_dir / name).stat()
            h.update(f"|{name}:{st.st_size}:{st.st_mtime_ns}".encode())
    except (OSError, ValueError, ImportError):
        return None
    where = stored.folder("units")
    return None if where is None else where / f"answers-{h.hexdigest()[:32]}.json"


def _read_answers(path: Path) -> dict:
    """The answers in `path` ({text: (factor, dims)}); empty when the file is missing, cut short or not ours."""
    import json

    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
        return {text: (float(factor), tuple(float(d) for d in dims)) for text, (factor, dims) in doc.items()
                if isinstance(text, str) and len(dims) == 7}
    except (OSError, ValueError, TypeError, AttributeError):
        return {}


def _known_answers() -> dict:
    global _ANSWERS
    if _ANSWERS is None:
        with _ANSWERS_LOCK:
            if _ANSWERS is None:
                path = _answers_file()
                _ANSWERS = _read_answers(path) if path is not None else {}
    return _ANSWERS


def _keep_answer(text: str, answer: tuple[float, Dims]) -> None:
    """Add one answer of pint's to the cache file (merged with what another process may have written since;
    written under a temporary name and renamed, so a reader never sees half a file)."""
    from ..physics import stored

    path = _answers_file()
    if path is None:
        return
    with _ANSWERS_LOCK:
        merged = _read_answers(path)
        merged.update(_ANSWERS or {})
        merged[text] = answer
        if len(merged) > _ANSWERS_MAX:
            return
        if not stored.replace_json(path, {t: [f, list(d)] for t, (f, d) in sorted(merged.items())}):
            return
    stored.prune(path.parent, keep=4, pattern="answers-*.json")  # files of earlier pint or seqgen versions


@lru_cache(maxsize=4096)
def unit_factor(unit_text: str) -> tuple[float, Dims]:
    """SI factor and dimension of a unit expression such as 'G/cm' or 'mW' (pint's answer, from the disk cache
    when pint gave it before)."""
    known = _known_answers().get(unit_text)
    if known is not None:
        return known
    answer = _pint_factor(unit_text)
    if _ANSWERS is not None:
        _ANSWERS[unit_text] = answer
    _keep_answer(unit_text, answer)
    return answer


def _pint_factor(unit_text: str) -> tuple[float, Dims]:
    text = unit_text.strip().replace("µ", "u").replace("μ", "u").replace("^", "**")
    text = _GAUSS_WORD.sub(lambda m: (m.group(1) or "") + "LabG", text)
    if not text:
        return 1.0, DIMENSIONLESS
    try:
        q = _ureg().Quantity(1.0, text)
        if not q._ok_for_muldiv():
            raise UnitError("offset temperature units (degC, degF) are not accepted; use K")
        base = q.to_base_units()
    except (UnitError, ImportError):  # ImportError: pint is not installed, not a bad unit
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


_UNIT_TEXT = re.compile(r"[A-Za-zµμΩ_][A-Za-z0-9µμΩ_]*(\s*[*/]\s*[A-Za-zµμΩ_][A-Za-z0-9µμΩ_]*(\*\*|\^)?-?\d*)*(\*\*|\^)?-?\d*")


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
    if not _UNIT_TEXT.fullmatch(unit.strip()):
        return None
    factor, dims = unit_factor(unit)
    return Qty(number * factor, dims)


def split_quantity(text: str) -> tuple | None:
    """('80', 'mS') for '80 mS', ('2', None) for '2'; None if the text is not '<number> [unit]'."""
    m = _QTY_RE.match(text)
    if not m:
        return None
    unit = m.group(2).strip() if m.group(2) else None
    if unit is not None and not _UNIT_TEXT.fullmatch(unit):
        return None  # '2 * n * 1 mW' is an expression, not a number with a unit
    return m.group(1), unit


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


def format_qty(q: Qty) -> str:
    return fmt_si(q.value, display_unit(q.dims))


def same_dims(a: Dims, b: Dims) -> bool:
    return all(abs(x - y) < 1e-9 for x, y in zip(a, b))


# ----------------------------------------------------------------------------- words for messages
# What a new user reads when a unit is wrong: the kind of quantity a dimension is ("a time", "a magnetic
# field gradient"), the units of that kind a lab writes (the first is the usual one), and close unit names.

_KINDS = (  # (unit whose dimension defines the kind, kind, units of that kind to suggest)
    ("s", "time", ("ms", "us", "s", "ns")),
    ("Hz", "frequency", ("kHz", "MHz", "Hz", "GHz")),
    ("W", "power", ("mW", "W", "uW", "nW")),
    ("V", "voltage", ("V", "mV", "kV")),
    ("A", "current", ("A", "mA")),
    ("T", "magnetic field", ("G", "mG", "T", "mT")),
    ("T/m", "magnetic field gradient", ("G/cm", "T/m")),
    ("T/m^2", "magnetic field curvature", ("G/cm^2", "T/m^2")),
    ("m", "length", ("mm", "um", "m", "nm", "cm")),
    ("m/s", "velocity", ("mm/s", "m/s", "um/s", "cm/s")),
    ("m/s^2", "acceleration", ("m/s^2",)),
    ("K", "temperature", ("nK", "uK", "mK", "K")),
    ("J", "energy", ("J", "eV")),
    ("kg", "mass", ("kg", "g")),
    ("S", "conductance", ("S", "mS")),
    ("ohm", "resistance", ("ohm", "kohm")),
    ("C", "charge", ("C",)),
    ("F", "capacitance", ("F", "nF")),
    ("H", "inductance", ("H", "mH")),
    ("W/m^2", "intensity", ("mW/cm^2", "W/m^2")),
    ("A/s", "current slew rate", ("A/s", "A/ms")),
    ("V/s", "voltage slew rate", ("V/s", "V/ms")),
    ("W/s", "power slew rate", ("W/s", "mW/ms")),
    ("Hz/s", "frequency sweep rate", ("MHz/s", "kHz/ms", "Hz/s")),
    ("T/m/A", "field gradient per current", ("G/cm/A",)),
    ("T/A", "field per current", ("G/A",)),
    ("", "plain number", ()),
)
_KIND_OF: dict = {}
# unit names a lab writes, for "did you mean" on an unknown unit (compared without regard to case first)
_KNOWN_UNITS = tuple(dict.fromkeys(
    [p + b for b, ps in (("s", "mun"), ("Hz", "kMG"), ("W", "munk"), ("V", "mk"), ("A", "mk"), ("K", "mun"),
                         ("m", "kcmun"), ("T", "mu"), ("G", "mk"), ("eV", "mukM")) for p in ("",) + tuple(ps)]
    + [u for _, _, units in _KINDS for u in units] + ["J", "rad", "deg", "dB", "min", "kg", "g"]))


def _kinds() -> dict:
    if not _KIND_OF:
        for unit, kind, units in _KINDS:
            try:
                _KIND_OF.setdefault(dims_of(unit), (kind, units))
            except UnitError:  # pragma: no cover - every unit above is known to pint
                continue
    return _KIND_OF


def _dims_key(dims: Dims) -> Dims:
    return tuple(float(x) for x in dims)


def kind_of(dims: Dims) -> str | None:
    """The kind of quantity of a dimension ('time', 'magnetic field gradient'), or None if it has no name here."""
    hit = _kinds().get(_dims_key(dims))
    return hit[0] if hit else None


def kind_units(dims: Dims) -> tuple:
    """Units a lab writes for quantities of this dimension, the usual one first (empty if none is known)."""
    hit = _kinds().get(_dims_key(dims))
    return hit[1] if hit else ()


def describe_kind(dims: Dims) -> str:
    """'a time', 'a magnetic field gradient (T/m)'-style words for a dimension; its base units if unnamed."""
    kind = kind_of(dims)
    if kind is None:
        return describe_dims(dims)
    return f"{'an' if kind[0] in 'aeiou' else 'a'} {kind}"


def usual_unit(dims: Dims, fallback: str = "") -> str:
    """The unit a lab usually writes for this dimension ('ms' for a time), else `fallback` or the SI unit."""
    units = kind_units(dims)
    return units[0] if units else (fallback or display_unit(dims))


def unit_name(unit_text: str) -> str | None:
    """The spelled-out name of a single unit word ('mS' -> 'millisiemens', 'G' -> 'gauss'); None for a compound
    unit or an unknown one."""
    text = unit_text.strip()
    if not re.fullmatch(r"[A-Za-zµμΩ]+", text):
        return None
    try:
        unit_factor(text)
        word = format(_ureg().Unit(_GAUSS_WORD.sub(lambda m: (m.group(1) or "") + "LabG", text.replace("µ", "u")
                                                  .replace("μ", "u"))))
    except Exception:  # pint raises many types for bad text
        return None
    return word.replace("labgauss", "gauss").replace("_", " ")


@lru_cache(maxsize=1024)
def _prefix_of(unit: str) -> str:
    """The SI prefix of a single unit word ('kilo' of 'kHz', 'micro' of 'uW'); '' for an unprefixed unit
    ('min' is a minute, not a milli-inch), a compound or an unknown one."""
    if not re.fullmatch(r"[A-Za-z]+", unit):
        return ""
    try:
        readings = tuple(_ureg().parse_unit_name(unit))
    except Exception:  # pint raises many types for bad text
        return ""
    if not readings or any(not prefix for prefix, _, _ in readings):
        return ""
    return readings[0][0]


def _one_edit(a: str, b: str) -> bool:
    """True if `a` and `b` differ by one letter changed, added or dropped (and share a letter, so that two
    unrelated one-letter units such as s and m are not taken for each other)."""
    if a == b or abs(len(a) - len(b)) > 1 or not set(a) & set(b):
        return False
    if len(a) == len(b):
        return sum(x != y for x, y in zip(a, b)) == 1
    short, long_ = sorted((a, b), key=len)
    return any(long_[:i] + long_[i + 1:] == short for i in range(len(long_)))


def _unit_pool(dims: Dims) -> list:
    """Unit names of dimension `dims` a lab writes: the kind's units (usual first), then other known names."""
    pool = list(kind_units(dims))
    for u in _KNOWN_UNITS:
        if u not in pool:
            try:
                if same_dims(dims_of(u), dims):
                    pool.append(u)
            except UnitError:  # pragma: no cover - every known name is a pint unit
                continue
    return pool


def _log_distance(number: float, unit: str, center) -> float:
    """How far (in decades) `number` written in `unit` lands from the values seen (`center`: their log10
    magnitudes, from `_center`): from their mean, or 0 when it is one of them (20 beside a '20 ms' written under
    the same key is taken in ms, whatever the others' average)."""
    try:
        v = abs(number) * unit_factor(unit)[0]
    except UnitError:  # pragma: no cover - candidates are known units
        return math.inf
    if not v > 0:
        return math.inf
    logv = math.log10(v)
    if min(abs(logv - c) for c in center) < 1e-6:
        return 0.0
    return abs(logv - sum(center) / len(center))


def _center(seen) -> tuple | None:
    """log10 of the magnitudes (SI) of the values seen for the same key: where plausible values lie."""
    logs = tuple(math.log10(abs(v)) for _, v in seen if v)
    return logs or None


def suggest_unit(dims: Dims, number: float | None = None, prefer=(), seen=(), span=None, fallback: str = "") -> str:
    """The unit to write after a bare `number` where a quantity of dimension `dims` is expected. Candidates, in
    this order: `prefer` (a channel's calibration unit), then the units `seen` for the same key ((unit, SI
    value) pairs) and the dimension's usual units, the one that puts the value nearest to the values seen
    first. With `span` (lo, hi in SI: a channel's limits or range) the first candidate that puts the value
    inside it, else the first."""
    cands = []
    for u in prefer:
        try:
            if u and same_dims(dims_of(u), dims):
                cands.append(u)
        except UnitError:
            continue
    units = list(dict.fromkeys([u for u, _ in seen] + list(kind_units(dims))))
    center = _center(seen) if number else None
    if center is not None:  # nearest to the values seen first; a tie goes to a unit seen, then the usual one
        units.sort(key=lambda u: round(_log_distance(number, u, center), 9))
    cands += [u for u in units if u not in cands] or [usual_unit(dims, fallback)]
    if number and span is not None:
        lo, hi = span
        for u in cands:
            try:
                if lo <= number * unit_factor(u)[0] <= hi:
                    return u
            except UnitError:  # pragma: no cover - candidates are known units
                continue
    return cands[0]


def close_units(unit_text: str, dims: Dims | None = None, n: int = 3, number: float | None = None,
                seen=()) -> list:
    """Unit names close to `unit_text`: the same letters in another case first ('mw' -> 'mW', 'mS' -> 'ms'),
    then similar spellings. With `dims`, only units of that dimension: after the same letters in another case,
    those one letter away or with the same prefix ('uW' -> 'um' for a length, 'kg' -> 'kHz' for a frequency;
    nearest first to the values `seen` for the same key when `number` is given), then, for a unit that lacks a
    per-length to be a gradient (G where G/cm is expected), that unit per cm or per m."""
    import difflib

    text = unit_text.strip()
    pool = _unit_pool(dims) if dims is not None else list(_KNOWN_UNITS)
    if dims is not None:
        for extra in (f"{text}/cm", f"{text}/m"):  # a field where a gradient is expected, and the like
            try:
                if same_dims(dims_of(extra), dims) and extra not in pool:
                    pool.append(extra)
            except UnitError:
                continue
    same_case = [u for u in pool if u.lower() == text.lower() and u != text]
    if dims is not None:
        prefix = _prefix_of(text)
        near = [u for u in pool if u not in same_case and u != text and "/" not in u and
                (_one_edit(u, text) or (prefix and _prefix_of(u) == prefix))]
        center = _center(seen) if number else None
        if center is not None:
            near.sort(key=lambda u: round(_log_distance(number, u, center), 9))
        per_length = [u for u in pool if u in (f"{text}/cm", f"{text}/m")]
        gauss_first = sorted(per_length, key=lambda u: not (u.endswith("/cm") and "G" in text))
        return (same_case + near + gauss_first[:1])[:n]
    lowered = {}
    for u in pool:
        lowered.setdefault(u.lower(), []).append(u)
    if same_case:  # a slip of the shift key: the one that fits is the one to name
        return same_case[:n]
    out = []
    for low in difflib.get_close_matches(text.lower(), list(lowered), n=n, cutoff=0.6):
        out += [u for u in lowered[low] if u not in out and u != text]
    return out[:n]
