"""Completion for sequence and rig files: schema keys and action names, rig names, block names, params, math
functions and units that fit the key.

`completions(text, path, line, character)` reads the cursor's place with `context.cursor_at` (any text, broken
or half typed) and offers what the schema and the document's world (its rig, the files it uses) allow there.
A param's value is offered the units of the dimension its uses need (`param_unit`).
"""

from __future__ import annotations

import re
from functools import lru_cache
from pathlib import Path

from .context import (
    BLOCK_FIELDS, NAME_FIELDS, Cursor, RigInfo, cursor_at, deref, description, is_rig_text, names, outline, owner_of,
    properties, read_small, rig_info, rig_path, schema_at, schema_for, strip_comment, used_file, wiring_lines,
)
from .features import Completion

# the names an expression may call or use besides params (seqgen.resolve.expr evaluates them)
FUNCTIONS = (
    ("pi", "constant", "pi = 3.14159..."),
    ("sqrt", "function", "square root (halves the dimension)"),
    ("exp", "function", "exponential of a plain number"),
    ("log", "function", "natural logarithm of a plain number"),
    ("log10", "function", "base-10 logarithm of a plain number"),
    ("sin", "function", "sine of an angle in radians"),
    ("cos", "function", "cosine of an angle in radians"),
    ("tan", "function", "tangent of an angle in radians"),
    ("abs", "function", "absolute value"),
    ("min", "function", "smallest of its arguments (one dimension)"),
    ("max", "function", "largest of its arguments (one dimension)"),
)

# keys whose dimension the schema's words do not give, as the lowerings read them (seqgen.resolve.actions)
KEY_UNITS = {"at": "s", "duration": "s", "over": "s", "tau": "s", "exposure": "s", "width": "s", "ramp_on": "s",
             "detuning": "Hz", "frequency": "Hz", "after": "s", "with": "s", "gradient": "T/m", "power": "W", "temperature": "K"}

_EXAMPLE = re.compile(r"'([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([A-Za-zµμ][^'\d]*)'")
_NUMBER_UNIT = re.compile(r"(?:^|[\s(*/+\-,\[])[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*([A-Za-zµμ_/^0-9]*)$")
_UNIT_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_/^µμ")
_WRITTEN_UNIT = re.compile(r"(?<![\w.])(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*([A-Za-zµμ][A-Za-z0-9µμ/^]*)")


def _fits(label: str, prefix: str) -> bool:
    return label.lower().startswith(prefix.lower())


def rig_names(info: RigInfo | None, what: str) -> dict:
    """Name -> one line about it, for a kind of rig name of NAME_FIELDS."""
    if info is None:
        return {}
    rig = info.rig
    section, _, role = what.partition(":")
    # a line that wires a device is seqgen's to drive (hardware.wiring-line-written): never offered for writing
    wired = wiring_lines(info) if section in ("outputs", "synth-freq", "digital", "synth") else frozenset()
    out = {}
    if section in ("outputs", "synth-freq", "digital", "synth", "channels") and rig is not None:
        for name, o in rig.outputs.items():
            if section == "synth-freq" and not name.endswith(".freq"):
                continue
            if section == "digital" and o.kind != "digital":
                continue
            if section in ("synth", "channels") and name != o.channel:
                continue
            if section == "synth" and o.kind != "synth":
                continue
            out[name] = f"{o.kind} output, {o.phys_unit or o.unit or 'on/off'}"
        for ch, parts in rig.channels.items():
            if section in ("outputs", "synth", "channels") and ch not in out and \
                    (section != "synth" or rig.outputs[parts[0]].kind == "synth"):
                out[ch] = f"{rig.outputs[parts[0]].kind} channel ({', '.join(parts)})"
        return {k: v for k, v in out.items() if k not in wired}
    if section in ("outputs", "synth-freq", "digital", "synth"):
        section = "channels"
    for name in info.names.get(section, {}):
        if (role and info.roles.get(name) != role) or name in wired:
            continue
        out[name] = f"rig {section[:-1] if section.endswith('s') else section}" + \
            (f", role {info.roles[name]}" if name in info.roles else "")
    return out


def _sibling(cur: Cursor, text: str, key: str) -> str | None:
    for k, v in cur.siblings:
        if k == key and v:
            return v.strip().strip("'\"")
    for e in outline(text):
        if e.path == cur.path + (key,) and e.value:
            return e.value.strip("'\"")
    return None


def _dims(unit: str):
    from ..resolve.units import UnitError, dims_of

    try:
        return dims_of(unit)
    except UnitError:
        return None


def expected_unit(cur: Cursor, text: str, path: Path, node, root) -> str | None:
    """A unit of the dimension expected at the cursor's value: from the output a channel key names, from the
    schema (an x-unit, or the example in the description), or as the lowerings read the key."""
    owner, field = owner_of(cur.full_path, is_rig_text(text))
    info = rig_info(text, path) if not is_rig_text(text) else None
    rig = info.rig if info is not None else None
    if rig is not None:
        out = None
        if owner in ("set", "ramp", "pulse", "sweep") and field in ("value", "from", "to", "back_to"):
            ch = _sibling(cur, text, "channel")
            ch = rig.channels.get(ch, (ch,))[0] if ch in rig.channels else ch
            out = rig.outputs.get(ch) if ch else None
        elif owner == "trap_ramp" and field in ("from", "to"):
            beam = rig.beams.get(_sibling(cur, text, "beam") or "")
            out = rig.outputs.get(beam.power_channel) if beam is not None else None
        elif owner == "image" and field == "probe_power":
            setup = rig.imaging.get(_sibling(cur, text, "setup") or "")
            beam = rig.beams.get(setup.probe_beam or "") if setup is not None else None
            out = rig.outputs.get(beam.power_channel) if beam is not None else None
        if out is not None:
            return out.phys_unit or None
    if owner == "currents":
        return "A"
    if isinstance(node, dict):
        for n in (node, deref(root, node)):
            if isinstance(n.get("x-unit"), str):
                return n["x-unit"]
        m = _EXAMPLE.search(description(root, node))
        if m and _dims(m.group(2).strip()) is not None:
            return m.group(2).strip()
    return KEY_UNITS.get(field) if isinstance(field, str) else None


# ----------------------------------------------------------------------------- the dimension a param needs
# A param's value gets the units its uses need: where an expression is the param (times plain numbers) or one
# term of a sum, the param has that key's dimension; a param that only feeds another param takes that one's.

_NUM = r"(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_SCALED = re.compile(rf"^(?:{_NUM}\s*\*\s*)*\(?\s*([A-Za-z_][A-Za-z0-9_]*)\s*\)?(?:\s*[*/]\s*{_NUM})*$")
_TERM_UNIT = re.compile(rf"^{_NUM}\s*([A-Za-zµμ][A-Za-z0-9µμ/^]*)$")


def _terms(expr: str) -> list:
    """The terms of a sum at its top level ('release + tof' -> ['release', 'tof']); the sign of a number's
    exponent ('1e-3') splits nothing."""
    out, depth, start = [], 0, 0
    for i, ch in enumerate(expr):
        if ch in "([":
            depth += 1
        elif ch in ")]":
            depth -= 1
        elif ch in "+-" and depth == 0 and not (i >= 2 and expr[i - 1] in "eE" and expr[i - 2].isdigit()):
            out.append(expr[start:i])
            start = i + 1
    out.append(expr[start:])
    return [t.strip() for t in out if t.strip()]


def _walk(node, path: tuple, out: list, budget: list) -> None:
    """The scalars of a composed YAML node (no constructors: any tag reads as its text). `budget` counts the
    nodes left to visit: aliases may make the graph a cycle, or a tree of billions of nodes."""
    import yaml

    budget[0] -= 1
    if budget[0] < 0 or len(path) > 64:
        return
    if isinstance(node, yaml.MappingNode):
        pairs = tuple((str(k.value), str(v.value)) for k, v in node.value if isinstance(k, yaml.ScalarNode)
                      and isinstance(v, yaml.ScalarNode))
        for k, v in node.value:
            if not isinstance(k, yaml.ScalarNode):
                continue
            if isinstance(v, yaml.ScalarNode):
                out.append((path, str(k.value), str(v.value), pairs))
            else:
                _walk(v, path + (str(k.value),), out, budget)
    elif isinstance(node, yaml.SequenceNode):
        for i, v in enumerate(node.value):
            if isinstance(v, yaml.ScalarNode):
                out.append((path, i, str(v.value), ()))
            else:
                _walk(v, path + (i,), out, budget)


@lru_cache(maxsize=32)
def _sites(text: str) -> tuple:
    """Every scalar value of the document: (its mapping's path, its key or index, the text, the (key, value)
    pairs of its flow mapping); a flow collection written on one line is read with PyYAML's composer, one that
    is not whole is skipped."""
    import yaml

    out: list = []
    for e in outline(text):
        if not e.value or not e.path:
            continue
        if e.value[:1] in "{[":
            try:
                node = yaml.compose(e.value, Loader=yaml.SafeLoader) if len(e.value) < 4000 else None
            except (yaml.YAMLError, RecursionError):
                continue
            _walk(node, e.path, out, [2000])
        else:
            out.append((e.path[:-1], e.path[-1], e.value.strip("'\""), ()))
    return tuple(out)


def _docs(text: str, path: Path) -> list:
    """(text, path) of the document and of the files it uses (not its rig)."""
    out = [(text, path)]
    if is_rig_text(text):
        return out
    rig = rig_path(text, path)
    for _, file in names(text, path).files:
        body = read_small(file) if file != rig and file.suffix in (".yaml", ".yml") else None
        if body is not None and not is_rig_text(body):
            out.append((body, file))
    return out


def param_unit(name: str, text: str, path: Path, root, seen: frozenset = frozenset()) -> str | None:
    """A unit of the dimension the param's uses need (in this document and the files it uses), else None."""
    if name in seen or len(seen) > 8:
        return None
    seen = seen | {name}
    for body, file in _docs(text, path):
        for mpath, key, value, pairs in _sites(body):
            full = mpath + (key,)
            if full[:1] == ("use",) or full[:2] == ("params", name):
                continue
            terms = _terms(value)
            if not any((m := _SCALED.match(t)) and m.group(1) == name for t in terms):
                continue
            unit = next((m.group(1) for t in terms if (m := _TERM_UNIT.match(t)) and _dims(m.group(1))), None)
            if unit is None and full[:1] == ("params",) and len(full) >= 2 and isinstance(full[1], str):
                unit = param_unit(full[1], text, path, root, seen) or written_unit(full[1], body)
            elif unit is None:
                site = Cursor(line=-1, path=mpath, key=key, item=False, value=value, word="", word_start=0,
                              word_end=0, token="", token_start=0, token_end=0, siblings=pairs)
                unit = expected_unit(site, body, file, schema_at(root, full), root)
            if unit is not None and _dims(unit) is not None:
                return unit
    return None


def written_unit(name: str, text: str, cur: Cursor | None = None) -> str | None:
    """The first unit written in the param's own entry of `text` (its value, bounds, scan), the unit being typed
    at the cursor left out."""
    lines = text.splitlines()
    for e in outline(text):
        if e.path[:2] != ("params", name) or e.line >= len(lines):
            continue
        value = e.value or ""
        if cur is not None and e.line == cur.line:
            line = strip_comment(lines[e.line])
            if not line[cur.character:cur.character + 1] or line[cur.character] not in _UNIT_CHARS:
                line = line[:cur.token_start] + line[cur.character:]  # what is typed is no unit yet
            value = line[e.col:]
        for m in _WRITTEN_UNIT.finditer(value):
            if _dims(m.group(1)) is not None:
                return m.group(1)
    return None


def _param_of(full: tuple, text: str, path: Path) -> tuple | None:
    """(param name, the text and path that define it) of a value under `params:` or a `use:` entry's params."""
    if len(full) >= 2 and full[0] == "params" and isinstance(full[1], str):
        return full[1], text, path
    if len(full) == 4 and full[0] == "use" and full[2] == "params" and isinstance(full[3], str) \
            and isinstance(full[1], int):
        file = used_file(text, path, full[1])
        body = read_small(file) if file is not None else None
        return (full[3], body, file) if body is not None and not is_rig_text(body) else None
    return None


def _written_units(text: str) -> list:
    out = []
    for e in outline(text):
        for m in _WRITTEN_UNIT.finditer(e.value or ""):
            out.append(m.group(1))
    return list(dict.fromkeys(out))


def unit_completions(text: str, unit: str | None, typed: str) -> list:
    """Units of the dimension of `unit` (every unit written in the document when None): seqgen's usual units of
    that kind and those the document writes, each checked by pint to have that dimension."""
    from ..resolve.units import kind_units, same_dims

    written = [u for u in _written_units(text) if _dims(u) is not None]
    if unit is not None:
        want = _dims(unit)
        if want is None:
            return []
        pool = [unit, *kind_units(want), *written]
        groups = [want]
    else:
        pool, groups = list(written), []
        for u in written:
            d = _dims(u)
            if d is not None and not any(same_dims(d, g) for g in groups):
                groups.append(d)
                pool += kind_units(d)
    out = []
    for u in dict.fromkeys(pool):
        d = _dims(u)
        if d is None or not any(same_dims(d, g) for g in groups) or not _fits(u, typed):
            continue
        from ..resolve.units import describe_kind

        out.append(Completion(u, "unit", detail=describe_kind(d)))
    return out


def _expression(text: str, path: Path, typed: str) -> list:
    world = names(text, path)
    out = [Completion(n, "param", detail=f"param = {world.written.get(n, '')}".strip(),
                      documentation=f"defined in {world.params[n].file.name}, line {world.params[n].line + 1}")
           for n in world.params if _fits(n, typed)]
    out += [Completion(n, "function", detail=kind, documentation=doc,
                       insert_text=f"{n}(" if kind == "function" else None)
            for n, kind, doc in FUNCTIONS if _fits(n, typed)]
    return out


def _is_quantity(node) -> bool:
    if not isinstance(node, dict):
        return False
    ref = str(node.get("$ref", ""))
    return ref.endswith(("/quantity", "/dimensioned")) or node.get("type") == ["string", "number", "object"]


def _keys(cur: Cursor, text: str, path: Path, root) -> list:
    mapping = cur.full_path if cur.item else cur.path
    node = schema_at(root, mapping)
    if node is None:
        return []
    present = {e.path[-1] for e in outline(text) if e.path[:-1] == mapping and e.kind == "key" and e.line != cur.line}
    present |= {k for k, _ in cur.siblings}
    present.discard(cur.word)  # the key being typed
    typed = cur.value_prefix
    if mapping[-2:] == ("magnetic_hold", "currents"):  # coil name -> its current
        what = NAME_FIELDS[("magnetic_hold", "currents")]
        return [Completion(n, "rig-name", detail=d, insert_text=f"{n}: ") for n, d in
                rig_names(rig_info(text, path), what).items() if _fits(n, typed) and n not in present]
    if mapping[:1] == ("use",) and len(mapping) == 3 and mapping[2] == "params":
        return []
    action = len(mapping) >= 2 and mapping[-2] == "actions" and isinstance(mapping[-1], int)
    out = []
    for key, sub in properties(root, node).items():
        if key in present or not _fits(key, typed):
            continue
        out.append(Completion(key, "action" if action else "key", detail="action" if action else "",
                              documentation=description(root, sub), insert_text=f"{key}: "))
    return out


def _values(cur: Cursor, text: str, path: Path, root) -> list:
    full = cur.full_path
    node = schema_at(root, full)
    rig_file = is_rig_text(text)
    owner, field = owner_of(full, rig_file)
    typed = cur.value_prefix
    section = full[0] if full else ""
    what = NAME_FIELDS.get((owner, field))
    if what:
        return [Completion(n, "rig-name", detail=d) for n, d in rig_names(rig_info(text, path), what).items()
                if _fits(n, typed)]
    if (section, field) in BLOCK_FIELDS and not rig_file:
        if field in ("after", "with") and re.search(r"[-+*/]", cur.value):  # the offset after the block name
            return _quantity(cur, text, path, node, root)
        own = None
        if section == "blocks" and len(full) > 1:
            own = next((e.value for e in outline(text) if e.path == full[:2] + ("name",)), None)
        world = names(text, path)
        return [Completion(n, "block", detail=f"block in {p.file.name}, line {p.line + 1}")
                for n, p in world.blocks.items() if n != own and _fits(n, typed)]
    if section == "accept" and field == "code":
        from ..codes import ALL, summary_line

        typed = cur.value.strip().strip("'\"")
        return [Completion(s, "value", detail=ALL[s].severity, documentation=summary_line(s))
                for s in sorted(ALL) if _fits(s, typed)]
    sub = deref(root, node) if isinstance(node, dict) else {}
    if isinstance(sub.get("enum"), list):
        return [Completion(str(v), "value") for v in sub["enum"] if _fits(str(v), typed)]
    if sub.get("type") == "boolean":
        return [Completion(v, "value") for v in ("true", "false") if _fits(v, typed)]
    if _is_quantity(node) or (section == "params" and len(full) in (2, 3)):
        return _quantity(cur, text, path, node, root)
    return []


def _quantity(cur: Cursor, text: str, path: Path, node, root) -> list:
    m = _NUMBER_UNIT.search(" " + cur.value)
    if m:  # after a number: its unit
        param = _param_of(cur.full_path, text, path) if not is_rig_text(text) else None
        if param is not None:  # a param's: what its uses need, else what its entry writes (else every unit)
            name, body, file = param
            unit = param_unit(name, body, file, root) or \
                written_unit(name, body, cur if body is text else None)
        else:
            unit = expected_unit(cur, text, path, node, root)
        return unit_completions(text, unit, m.group(1))
    return _expression(text, path, cur.value_prefix)


def completions(text: str, path: Path, line: int, character: int) -> tuple[Completion, ...]:
    """What may be written at the cursor (0-based line and character); () when nothing fits."""
    cur = cursor_at(text, line, character)
    if cur is None:
        return ()
    root = schema_for(text)
    path = Path(path)
    if cur.key is None:
        found = _keys(cur, text, path, root)
    elif cur.item and not cur.value:  # "- ": a mapping item's first key, or a scalar item
        item = deref(root, schema_at(root, cur.full_path))
        found = _keys(cur, text, path, root) if properties(root, item) else _values(cur, text, path, root)
    elif cur.item and isinstance(cur.key, int) and properties(root, deref(root, schema_at(root, cur.full_path))) \
            and ":" not in cur.value:
        found = _keys(cur, text, path, root)
    else:
        found = _values(cur, text, path, root)
    return tuple(dict.fromkeys(found))
