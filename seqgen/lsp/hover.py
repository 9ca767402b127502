"""Hover for sequence and rig files: what a block, param, rig name, finding code or key is.

A block shows its resolved start and end (and the physics predictions of the last check, when the caller
passes its `Result`); a param its value as written and in SI units, its bounds and scan, and what uses it; a rig
output its range, calibration, hard limits and latency; a finding code its `seqgen explain` text; a key its schema
description.
Times and values come from seqgen's own resolve stage: the caller's `analysis` when it is of this very text,
else a resolve of the text (params, blocks and times only, a few milliseconds; cached by content).
"""

from __future__ import annotations

import hashlib
import re
from functools import lru_cache
from pathlib import Path

from .context import (
    Place, cursor_at, description, is_rig_text, names, outline, rig_info, schema_at, schema_for, subject,
)
from .features import HoverText, Span


def _fmt(value: float, unit: str) -> str:
    from ..textfmt import fmt_si

    return fmt_si(value, unit) if unit else f"{value:.6g}"


def _sha(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()


def _dep_texts(text: str, path: Path) -> tuple:
    out = []
    for _, file in names(text, path).files:
        try:
            out.append((str(file), file.read_bytes() if file.is_file() else b""))
        except OSError:
            out.append((str(file), b""))
    return tuple(out)


@lru_cache(maxsize=4)
def _resolved(text: str, file: str, deps: tuple) -> tuple:
    """(sources, shot) seqgen reads and resolves from this text (None where it cannot); `deps` (the used and rig
    files' bytes) is only part of the key, so that an edit of the rig resolves again."""
    from ..pipeline import load_sources, resolve
    from ..load.yamlsrc import LoadError

    try:
        src = load_sources(Path(file), text=text, display=file)
    except LoadError:
        return None, None
    shot, _ = resolve(src)
    return src, shot


def _analysed(text: str, path: Path, analysis) -> tuple:
    """(sources, base shot, whether they are the caller's analysis of this very text)."""
    shot = getattr(analysis, "shot", None)
    src = getattr(analysis, "sources", None)
    if shot is not None and src is not None and getattr(src.main, "text_sha256", None) == _sha(text):
        return src, shot, True
    return (*_resolved(text, str(path), _dep_texts(text, path)), False)


def _shot(text: str, path: Path, analysis):
    """(shot, whether it is the caller's analysis of this very text)."""
    _, shot, current = _analysed(text, path, analysis)
    return shot, current


def _block(name: str, text: str, path: Path, analysis) -> str:
    shot, current = _shot(text, path, analysis)
    place = names(text, path).blocks.get(name)
    lines = [f"**block `{name}`**" + (f" ({place.file.name}, line {place.line + 1})" if place else "")]
    b = shot.block(name) if shot is not None else None
    if b is None:
        lines.append("\nnot resolved yet (the sequence does not resolve as it stands)")
        return "\n".join(lines)
    lines.append(f"\n- start: {_fmt(b.start_s, 's')}\n- end: {_fmt(b.end_s, 's')}\n- duration: "
                 f"{_fmt(b.end_s - b.start_s, 's')}\n- placed: {b.anchor}")
    pred_shot = getattr(analysis, "shot", None)
    if pred_shot is not None:
        from ..predict import report_rows

        rows = [r for r in report_rows(pred_shot) if r.block == name]
        if rows:
            lines.append("\n**physics**" + ("" if current else " (from the last check, before this edit)"))
            for r in rows:
                lines.append(f"- {r.kind} at {_fmt(r.time_s, 's')}: " + "; ".join(map(str, r.items)))
    else:
        lines.append("\nphysics predictions: after the next check")
    return "\n".join(lines)


def _users(name: str, text: str, path: Path) -> list:
    """Params and blocks whose written values name the param, in this file and the files it uses."""
    word = re.compile(rf"(?<![\w.]){re.escape(name)}(?![\w])")
    out = []
    texts = [(text, path)]
    for _, file in names(text, path).files:
        if file.suffix in (".yaml", ".yml") and file.is_file() and not is_rig_text(text):
            try:
                texts.append((file.read_text(encoding="utf-8", errors="replace"), file))
            except OSError:
                continue
    for body, file in texts:
        if is_rig_text(body):
            continue
        entries = outline(body)
        block_names = {e.path[1]: e.value for e in entries if len(e.path) == 3 and e.path[0] == "blocks"
                       and e.path[2] == "name" and e.value}
        for e in entries:
            if not e.value or not word.search(e.value) or (e.path[:2] == ("params", name)):
                continue
            if e.path[:1] == ("params",) and len(e.path) >= 2:
                who = f"param `{e.path[1]}`"
            elif e.path[:1] == ("blocks",) and len(e.path) >= 2:
                who = f"block `{block_names.get(e.path[1], e.path[1])}`"
            elif e.path[:1] == ("use",):
                continue  # a use: entry's params: sets the param rather than using it
            else:
                who = f"`{e.path[0]}`"
            who += "" if Path(file) == Path(path) else f" ({Path(file).name})"
            if who not in out:
                out.append(who)
    return out


def _param(name: str, text: str, path: Path, analysis) -> str:
    from ..resolve.units import display_unit

    world = names(text, path)
    written = world.written.get(name, "")
    m = re.search(r"\bvalue\s*:\s*([^,}]+)", written)
    place = world.params.get(name)
    lines = [f"**param `{name}`**" + (f" ({place.file.name}, line {place.line + 1})" if place else ""),
             f"\n- as written: `{(m.group(1) if m else written).strip()}`"]
    for e in outline(text):  # a `use:` entry of this file that gives the used file's param a value
        if e.path[:1] == ("use",) and e.path[2:] in (("params",), ("params", name)) and e.value:
            given = re.search(rf"(?<![\w.]){re.escape(name)}\s*:\s*([^,}}]+)", e.value) if len(e.path) == 3 else None
            value = given.group(1) if given else (e.value if len(e.path) == 4 else None)
            if value:
                lines.append(f"- given by `use:` (line {e.line + 1}): `{value.strip()}`")
    src, shot, _ = _analysed(text, path, analysis)
    p = next((p for p in shot.params if p.name == name), None) if shot is not None else None
    if p is not None:
        unit = display_unit(p.dims)
        if p.text and p.text.strip() != (m.group(1) if m else written).strip():
            lines.append(f"- resolved: {p.text}")
        lines.append(f"- in SI: {p.value:.10g} {unit}".rstrip())
    else:
        lines.append("- not resolved yet")
    lines += _bounds_and_scan(name, src, shot)
    users = _users(name, text, path)
    lines.append("- used by: " + (", ".join(users) if users else "nothing"))
    return "\n".join(lines)


def _bounds_and_scan(name: str, src, shot) -> list:
    """The param's min: / max: as written, and its scan as `seqgen check` describes it (the values, or the
    first and last and how many); a scan that does not expand says so."""
    if src is None:
        return []
    from ..findings import has_errors
    from ..resolve.params import param_entries
    from ..scan.plan import expand, has_scans

    entries, bounds = param_entries(src)
    out = []
    given = bounds.get(name, {})
    if given:
        out.append("- bounds: " + ", ".join(f"{k} `{_written(given[k][0])}`" for k in ("min", "max") if k in given))
    raw = entries.get(name, (None,))[0]
    if not isinstance(raw, dict) or raw.get("scan") is None:
        return out
    plan = None
    if shot is not None and not has_errors(src.findings) and has_scans(src):
        plan, _ = expand(src, shot)
    axis = next((a for a in plan.axes if a.name == name), None) if plan is not None else None
    if axis is None:
        out.append(f"- scan: `{_written(raw['scan'])}` (does not expand as it stands; see `seqgen check`)")
    else:
        out.append(f"- scan: {axis.describe()}" + (f", group `{axis.group}`" if axis.group else "")
                   + f"; written `{_written(raw['scan'])}`")
        if len(plan.axes) > 1:
            out.append(f"- the whole scan: {len(plan)} shots: {plan.describe()}")
    return out


def _written(raw) -> str:
    """A value of the loaded document as it reads in YAML flow style."""
    if isinstance(raw, dict):
        return "{" + ", ".join(f"{k}: {_written(v)}" for k, v in raw.items()) + "}"
    if isinstance(raw, list):
        return "[" + ", ".join(_written(v) for v in raw) + "]"
    return str(raw)


def _written_entry(info, place: Place) -> str:
    """The rig entry's lines as written (the key's line and those indented below it)."""
    lines = info.text.splitlines()
    out = [lines[place.line]] if place.line < len(lines) else []
    indent = place.col
    for ln in lines[place.line + 1:]:
        if ln.strip() and len(ln) - len(ln.lstrip(" ")) <= indent:
            break
        out.append(ln)
    return "\n".join(out[:30]).rstrip()


def _output(o) -> list:
    from ..resolve.units import display_unit

    phys = o.phys_unit
    out = [f"- `{o.name}`: {o.kind} on device `{o.device}`"]
    if o.kind != "digital":
        out.append(f"  - range: {_fmt(o.lo, o.unit)} to {_fmt(o.hi, o.unit)}" + (f", {o.bits} bits" if o.bits else ""))
    cal = o.calibration
    if cal is not None:
        if cal.kind == "linear":
            si = display_unit(cal.dims)
            out.append(f"  - calibration: linear, output = {cal.slope:.6g} {o.unit}/{si} x value + "
                       f"{_fmt(cal.offset, o.unit)} (written in {cal.quantity})")
        else:
            pairs = ", ".join(f"{_fmt(a, phys)} -> {_fmt(b, o.unit)}" for a, b in zip(cal.table_phys, cal.table_out))
            out.append(f"  - calibration table: {pairs}")
    if o.hard_min is not None or o.hard_max is not None:
        lo = _fmt(o.hard_min, phys) if o.hard_min is not None else "-"
        hi = _fmt(o.hard_max, phys) if o.hard_max is not None else "-"
        out.append(f"  - hard limits: min {lo}, max {hi}")
    out.append(f"  - latency: rise {_fmt(o.latency_rise_s, 's')}, fall {_fmt(o.latency_fall_s, 's')}"
               + (f", jitter {_fmt(o.jitter_s, 's')}" if o.jitter_s else ""))
    out.append(f"  - safe value: {_fmt(o.safe, phys)}")
    if o.max_slew is not None:
        out.append(f"  - max slew: {o.max_slew:.6g} {phys or o.unit}/s")
    return out


def _rig(section: str, name: str, text: str, path: Path) -> str | None:
    info = rig_info(text, path)
    if info is None:
        return None
    base = name.split(".")[0] if section == "channels" else name
    place = info.names.get(section, {}).get(base)
    lines = [f"**rig {section[:-1] if section.endswith('s') else section} `{name}`**"
             + (f" ({info.path.name}, line {place.line + 1})" if place else "")]
    rig = info.rig
    if rig is not None and section == "channels":
        parts = (name,) if name in rig.outputs else tuple(rig.channels.get(base, ()))
        for part in parts:
            lines += _output(rig.outputs[part])
    elif rig is not None and section == "beams" and base in rig.beams:
        o = rig.outputs.get(rig.beams[base].power_channel)
        if o is not None:
            lines.append("\npower channel:")
            lines += _output(o)
    if place is not None:
        lines.append("\n```yaml\n" + _written_entry(info, place) + "\n```")
    if rig is None:
        lines.append("\nthe rig does not build as it stands (see `seqgen check` of the rig file)")
    return "\n".join(lines)


def _key(key_path: tuple, text: str) -> str | None:
    root = schema_for(text)
    node = schema_at(root, key_path)
    doc = description(root, node)
    if not doc:
        return None
    return f"**`{key_path[-1]}`**\n\n{doc}"


def hover(text: str, path: Path, line: int, character: int, analysis=None) -> HoverText | None:
    """What the name under the cursor (0-based line and character) is, as markdown; None for nothing."""
    cur = cursor_at(text, line, character)
    if cur is None or not cur.word:
        return None
    path = Path(path)
    what = subject(cur, text, path)
    span = Span(line, cur.word_start, line, cur.word_end)
    kind = what[0]
    if kind == "code":
        from ..codes import explain

        md = f"```\n{explain(what[1])}\n```"
        span = Span(line, cur.token_start, line, cur.token_end)
    elif kind == "block":
        md = _block(what[1], text, path, analysis)
    elif kind == "param":
        md = _param(what[1], text, path, analysis)
    elif kind == "rig":
        md = _rig(what[1], what[2], text, path)
        if "." in what[2]:
            span = Span(line, cur.token_start, line, cur.token_end)
    elif kind == "file":
        md = f"file `{what[1]}`" + ("" if what[1].is_file() else " (not found)")
    elif kind == "key":
        md = _key(what[1], text)
    else:
        md = None
    return HoverText(md, span) if md else None
