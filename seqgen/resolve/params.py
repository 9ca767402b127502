"""Params of a resolved sequence: definitions, overrides, bounds (`min:` / `max:`), and the sample.

Definitions come from the used files first, then their use-entry params, then the
main file (a later one wins). Params are resolved in dependency order (`order.py`),
so an expression may name any other param. An override replaces a param's value:
a quantity object (scans pass those, taken as they are), a text with units
('12 ms', read as the file's values are, checked against the dimension of the
param as the file defines it) or a plain number (SI, in that dimension).
"""

from __future__ import annotations

import math
import numbers
from dataclasses import replace


from ..codes import (
    BAD_EXPRESSION, BAD_SAMPLE, MISSING_UNIT, NON_FINITE, OVERFLOW, PARAM_CYCLE, PARAM_OUT_OF_RANGE, UNDEFINED_PARAM,
)
from ..findings import Finding, make
from ..load.yamlsrc import Document
from ..model import Param, Sample
from .expr import UNDEFINED_HINT, ExprError, names_in
from .order import DepGraph
from .quantities import Bad, Env, Fit, _dimension_words, close_hint, quantity, to_qty
from .sources import Sources
from .units import DIMENSIONLESS, Qty, UnitError, describe_kind, display_unit, format_qty, parse_simple, same_dims, \
    split_quantity, suggest_unit

MAX_ATOMS = 1e12  # more atoms than any laser-cooled sample holds (common practice, no source): a typo


def param_entries(src: Sources) -> tuple[dict, dict]:
    """(entries, bounds): name -> (raw, Document, path) of the definition that wins, and
    name -> {"min"/"max": (raw, Document, path)} (a later min:/max: replaces an earlier one). Used files first,
    then their use-entry params, then the main file; later wins. Sources with errors may hold a document
    without data: it defines nothing."""
    entries: dict[str, tuple] = {}
    bounds: dict[str, dict] = {}
    for d, entry, parent, upath in src.used:
        for name, raw in ((d.data or {}).get("params") or {}).items():
            entries[name] = (raw, d, ("params", name))
            _note_bounds(bounds, name, raw, d, ("params", name))
        for name, raw in (entry.get("params") or {}).items():
            entries[name] = (raw, parent, upath + ("params", name))
    for name, raw in ((src.main.data or {}).get("params") or {}).items():
        entries[name] = (raw, src.main, ("params", name))
        _note_bounds(bounds, name, raw, src.main, ("params", name))
    return entries, bounds


def resolve_params(src: Sources, overrides: dict | None, findings: list):
    """(params, env) of the sources with `overrides` (param name -> Qty, text or SI number); (None, None)
    when a param cannot be resolved (the findings say why)."""
    entries, bounds = param_entries(src)
    overrides = overrides or {}
    fixed, given = _sort_overrides(overrides, entries, src.main, findings)
    if fixed is None:
        return None, None
    return _resolve_params(entries, fixed, given, findings, bounds, _all_written(src))


def _all_written(src: Sources) -> dict:
    """name -> the values of every definition of the param, in every file (for the unit of a fix)."""
    out: dict = {}
    for d, entry, _, _ in src.used:
        for params in ((d.data or {}).get("params") or {}, entry.get("params") or {}):
            for name, raw in params.items():
                out.setdefault(name, []).append(raw)
    for name, raw in ((src.main.data or {}).get("params") or {}).items():
        out.setdefault(name, []).append(raw)
    return out


def _sort_overrides(overrides: dict, entries: dict, main: Document, findings: list):
    """(fixed, given): quantity objects, taken as they are, and texts / numbers, read at the param's turn.
    (None, None) when an override names no param or is of no usable type (the findings say so)."""
    fixed, given, ok = {}, {}, True
    for name, v in overrides.items():
        if name not in entries:
            where = ("params",) if isinstance(main.data, dict) and "params" in main.data else ()
            findings.append(make(UNDEFINED_PARAM, f"override names '{name}', which is no param of this sequence",
                                 main.pos(where), hint=close_hint(str(name), entries) or "the sequence has no params"))
            ok = False
        elif isinstance(v, Qty):
            fixed[name] = v
        elif isinstance(v, str) or (isinstance(v, numbers.Real) and not isinstance(v, bool)):
            given[name] = v
        else:
            _, d, path = entries[name]
            findings.append(make(BAD_EXPRESSION, f"override of param '{name}' is {type(v).__name__} {repr(v)[:60]}",
                                 d.pos(path), hint="give a text with units ('12 ms') or a number in SI units"))
            ok = False
    return (fixed, given) if ok else (None, None)


def _note_bounds(bounds: dict, name: str, raw, doc: Document, path: tuple) -> None:
    if isinstance(raw, dict):
        for key in ("min", "max"):
            if key in raw:
                bounds.setdefault(name, {})[key] = (raw[key], doc, path + (key,))


def _resolve_params(entries: dict, fixed: dict, given: dict, findings: list, bounds: dict, written: dict | None = None):
    """`fixed`: name -> Qty taken as it is (its written value is not read); `given`: name -> text or SI number,
    read once the params it names (and those of the written value, which gives its dimension) are known."""
    graph = DepGraph()
    texts = {}
    bounds = {n: dict(b) for n, b in bounds.items() if n in entries}
    for name, (raw, d, path) in entries.items():
        value = raw["value"] if isinstance(raw, dict) else raw
        texts[name] = (value, d, path + (("value",) if isinstance(raw, dict) else ()))
        graph.add_node(name)
        for key, (braw, bdoc, bpath) in list(bounds.get(name, {}).items()):  # a bound may name other params
            try:
                bdeps = names_in(braw) if isinstance(braw, str) else set()
            except ExprError as exc:
                findings.append(make(BAD_EXPRESSION, str(exc), bdoc.pos(bpath), hint=exc.hint))
                del bounds[name][key]
                continue
            if name in bdeps and not _plain_quantity(braw):
                findings.append(make(BAD_EXPRESSION, f"the {key}: of param '{name}' names '{name}' itself",
                                     bdoc.pos(bpath), hint=f"give {key}: as a quantity, e.g. '{key}: 1 ms'"))
                del bounds[name][key]
                continue
            for dep in bdeps:
                if dep in entries:
                    graph.add_edge(dep, name)
        if isinstance(given.get(name), str):
            try:
                deps = names_in(given[name])
            except ExprError as exc:
                findings.append(_as_override(make(BAD_EXPRESSION, str(exc), d.pos(path), hint=exc.hint), name))
                return None, None
            if name in deps:
                findings.append(make(BAD_EXPRESSION, f"override of param '{name}' names '{name}' itself", d.pos(path),
                                     hint=_self_hint(value)))
                return None, None
            for dep in deps:
                if dep in entries:
                    graph.add_edge(dep, name)
        if isinstance(value, str) and name not in fixed:
            try:
                deps = names_in(value)
            except ExprError as exc:
                findings.append(make(BAD_EXPRESSION, str(exc), d.pos(path), hint=exc.hint))
                continue
            for dep in deps:
                if dep in entries:
                    graph.add_edge(dep, name)
    order = graph.order()
    if order is None:
        members = graph.find_cycle()
        _, d, path = texts[members[0]]
        findings.append(make(PARAM_CYCLE, "params depend on each other in a cycle: " + " -> ".join(members + [members[0]]),
                             d.pos(path), hint="give one of them a plain value"))
        return None, None
    env = Env(defs=texts, written=written)  # name -> Qty; knows each param's definition, for findings about its value
    params = []
    ok = True
    for name in order:
        value, d, path = texts[name]
        text = str(value)
        if name in fixed:
            q = fixed[name]
        else:
            try:
                q = to_qty(value, d, path, env)
                if name in given:
                    q, text = _override(name, given[name], q, d, path, env, value)
            except Bad as bad:
                findings.append(bad.finding)
                ok = False
                continue
        env[name] = q
        params.append(Param(name, q.value, q.dims, text, d.pos(path)))
        if name in bounds and bounds[name]:
            how = "scan" if name in fixed else ("override" if name in given else "file")
            bad = _out_of_bounds(name, q, value, bounds[name], entries[name], how, env)
            if bad:
                findings.extend(bad)
                ok = False
    return (params, env) if ok else (None, None)


def _self_hint(written) -> str:
    """The fix for an override that names its own param: the value itself (the file's, as an example)."""
    if isinstance(written, str) and _plain_quantity(written):
        return f"give the value itself, e.g. '{written.strip()}' (the file's value)"
    return "give the value itself: a quantity with units, or an expression of other params"


def _as_override(f: Finding, name: str) -> Finding:
    """A finding about an override, at the param's definition (an override has no line of its own)."""
    return replace(f, message=f"override of param '{name}': {f.message}")


def _override(name: str, v, written: Qty, doc: Document, path: tuple, env: dict, raw=None) -> tuple[Qty, str]:
    """(value, text) of param `name` overridden by `v` (a text with units or an SI number); `written` is the
    param's value as the file defines it (`raw` as written there), which gives the dimension and the unit of
    a fix. Raises Bad with the finding."""
    if not isinstance(v, str):  # a plain number: SI, in the param's dimension
        try:
            value = float(v)
        except OverflowError:  # an integer of hundreds of digits
            raise Bad(_as_override(make(OVERFLOW, f"a {len(str(v))}-digit number is too large", doc.pos(path),
                                        hint="write large numbers with an exponent"), name)) from None
        if not math.isfinite(value):
            raise Bad(_as_override(make(NON_FINITE, f"value {v} is not finite", doc.pos(path),
                                        hint="give a finite number"), name))
        q = Qty(value, written.dims)
        return q, format_qty(q)
    try:
        q = to_qty(v, doc, path, env)  # read as a value in the file is, with the same findings
    except Bad as bad:
        f = bad.finding
        if f.code == UNDEFINED_PARAM and f.hint == UNDEFINED_HINT:  # 'twelve': a value was meant, not a param
            f = replace(f, hint=f"give a text with units, e.g. '{_example(written, raw)}'")
        raise Bad(_as_override(f, name)) from None
    if not same_dims(q.dims, written.dims):
        if same_dims(q.dims, DIMENSIONLESS) and q.value == 0:  # a bare 0 fits every dimension, as in the file
            q = Qty(0.0, written.dims)
        else:
            raise Bad(_dimension_words(v, q, written.dims, display_unit(written.dims),
                                       f"override of param '{name}'", doc.pos(path),
                                       fit=Fit(units=_written_unit(raw))))
    return q, v.strip()


def _is_bare(raw) -> bool:
    return isinstance(raw, (int, float)) and not isinstance(raw, bool) and raw != 0


def _value_without_unit(name: str, written, bound: Qty, key: str, braw, entry: tuple) -> Finding:
    """schema.missing-unit for param `name` written as a bare number beside a `key:` bound with a unit."""
    raw, doc, path = entry
    where = path + (("value",) if isinstance(raw, dict) else ())
    unit = suggest_unit(bound.dims, float(written), _written_unit(braw))
    value = f"{written} {unit}" if isinstance(raw, dict) else f"{name}: {written} {unit}"
    return make(MISSING_UNIT, f"param '{name}' is {written} with no unit, but its {key}: is {describe_kind(bound.dims)}",
                doc.pos(where), hint=f"write '{value}'")


def _written_unit(raw) -> tuple:
    """(unit,) of a param written as a number with a unit ('8 ms' -> ('ms',)), else ()."""
    split = split_quantity(raw.strip()) if isinstance(raw, str) else None
    return (split[1],) if split and split[1] else ()


def _example(written: Qty, raw) -> str:
    """A value to write for a param: as the file writes it ('8 ms'), else its value in words ('8 ms')."""
    if isinstance(raw, str) and _written_unit(raw):
        return raw.strip()
    return format_qty(written)


def _plain_quantity(text: str) -> bool:
    """'14 ms', '0.3' (a number with a unit, no param), as opposed to an expression or a param name."""
    try:
        return parse_simple(text.strip()) is not None
    except UnitError:
        return False


BOUND_RTOL = 1e-12  # a value within this relative distance of a bound meets it (unit conversions round)


def _out_of_bounds(name: str, q: Qty, written, spec: dict, entry: tuple, how: str, env) -> list[Finding]:
    """The findings of param `name` (value `q`) against its `min:` / `max:`: a bound that is no quantity of
    the param's dimension, `min:` above `max:`, or the value outside them (at the param's line). `how` the
    value came: "file" (as written), "scan" (a scan's value) or "override" (a text or number given by the caller)."""
    out: list[Finding] = []
    lim: dict[str, float] = {}
    for key in ("min", "max"):
        if key not in spec:
            continue
        braw, bdoc, bpath = spec[key]
        try:
            b = to_qty(braw, bdoc, bpath, env)
        except Bad as bad:
            out.append(bad.finding)
            continue
        if not same_dims(b.dims, q.dims):
            if same_dims(b.dims, DIMENSIONLESS) and b.value == 0:  # a bare 0 fits every dimension
                b = Qty(0.0, q.dims)
            elif how == "file" and _is_bare(written) and same_dims(q.dims, DIMENSIONLESS):
                # '{value: 14, min: 1 ms}': the value lacks its unit, not the bound
                return [_value_without_unit(name, written, b, key, braw, entry)]
            else:
                value = entry[0]["value"] if isinstance(entry[0], dict) else entry[0]
                out.append(_dimension_words(braw, b, q.dims, display_unit(q.dims), f"{key}: of param '{name}'",
                                            bdoc.pos(bpath), fit=Fit(units=_written_unit(value))))
                continue
        lim[key] = b.value
    if out:
        return out
    _, doc, path = entry
    pos = doc.pos(path)

    def shown(v: float) -> str:
        return format_qty(Qty(v, q.dims))

    def where(key: str) -> str:
        bpos = spec[key][1].pos(spec[key][2])
        if bpos.file != pos.file:
            return f" (set at {bpos})"
        return f" (line {bpos.line})" if bpos.line != pos.line else ""

    if "min" in lim and "max" in lim and lim["min"] > lim["max"]:
        braw, bdoc, bpath = spec["min"]
        return [make(PARAM_OUT_OF_RANGE, f"param '{name}' has min: {shown(lim['min'])} above its max: "
                     f"{shown(lim['max'])}, so no value can meet both", bdoc.pos(bpath),
                     hint="swap min: and max:, or fix the one with the typo")]
    v = q.value
    for key, beyond in (("min", lambda lo: v < lo - BOUND_RTOL * max(abs(lo), abs(v))),
                        ("max", lambda hi: v > hi + BOUND_RTOL * max(abs(hi), abs(v)))):
        if key not in lim or not beyond(lim[key]):
            continue
        b = lim[key]
        side, least = ("below", "at or above") if key == "min" else ("above", "at or below")
        computed = isinstance(written, str) and how == "file" and not _plain_quantity(written)
        if how == "scan":
            what = f"scan value {shown(v)} of '{name}'"
            hint = (f"keep every scan value of '{name}' {least} {shown(b)} (this shot is refused, the others run), "
                    f"or change {key}: if such values are meant")
        elif how == "override":
            what = f"override {shown(v)} of '{name}'"
            hint = f"give '{name}' an override {least} {shown(b)}, or change {key}: if such values are meant"
        elif computed:
            what = f"'{name}' = {str(written).strip()} = {shown(v)}"
            hint = (f"'{name}' follows the params it is computed from: change them so it stays {least} "
                    f"{shown(b)}, or change {key}: if such values are meant")
        else:
            what = f"'{name}' = {shown(v)}"
            hint = f"give '{name}' a value {least} {shown(b)}, or change {key}: if such values are meant"
        out.append(make(PARAM_OUT_OF_RANGE, f"{what} is {side} its {key}: {shown(b)}{where(key)}", pos, hint=hint,
                        data={"value": v, key: b}))
    return out


def read_sample(doc: Document, env, findings) -> Sample | None:
    """The `sample:` of the main file (species, state, atoms, temperature, trap frequencies), or None."""
    s = doc.data.get("sample")
    if not s:
        return None
    pos = doc.pos(("sample",))
    st = s.get("state") or {}
    F, mF = st.get("F"), st.get("mF")
    if F is not None and mF is not None and abs(mF) > F:
        findings.append(make(BAD_SAMPLE, f"state F={F}, mF={mF} is impossible (|mF| > F)", doc.pos(("sample", "state")),
                             hint="mF runs from -F to F"))
    try:
        from ..physics.atoms import get_species

        sp = get_species(s["species"])
        name = sp.name
    except KeyError as exc:
        findings.append(make(BAD_SAMPLE, f"unknown species '{s['species']}'", doc.pos(("sample", "species")),
                             hint=str(exc).strip("'\"")))
        name = s["species"]
    except ImportError:  # pragma: no cover - physics data missing
        name = s["species"]

    def q(key, unit):
        if key not in s:
            return None
        try:
            return quantity(s[key], unit, doc, ("sample", key), env, positive=True)
        except Bad as bad:
            findings.append(bad.finding)
            return None

    def count(key):
        """An atom number (atoms, detection_floor): finite and below MAX_ATOMS, else a finding and None."""
        v = s.get(key)
        if v is None or isinstance(v, bool) or not isinstance(v, (int, float)):
            return v
        if not math.isfinite(v):
            findings.append(make(NON_FINITE, f"sample {key}: {v!r} is not a finite number", doc.pos(("sample", key)),
                                 hint=f"give the number of atoms, e.g. '{key}: 2e5'"))
            return None
        if v > MAX_ATOMS:
            findings.append(make(OVERFLOW, f"sample {key}: {v:.3g} atoms is an absurd number for a cold-atom sample "
                                 f"(more than {MAX_ATOMS:.0e})", doc.pos(("sample", key)),
                                 hint="check the exponent for a typo"))
            return None
        return v

    tf = None
    if s.get("trap_frequencies"):
        try:
            tf = tuple(quantity(v, "Hz", doc, ("sample", "trap_frequencies", i), env, positive=True)
                       for i, v in enumerate(s["trap_frequencies"]))
        except Bad as bad:
            findings.append(bad.finding)
    return Sample(name, F, mF, count("atoms"), q("temperature", "K"), bool(s.get("condensed", False)), tf,
                  count("detection_floor"), pos)
