"""Sequence file(s) + rig -> one resolved `Shot`.

Order of work: load the sequence and every file it `use`s (cycles reported),
validate each against its schema, build the rig, resolve params in dependency
order (networkx), lower each block's actions to channel segments relative to
the block start, place blocks through the anchor graph, then fill in ramp
start values and pulse ends in time order per output.
"""

from __future__ import annotations

import difflib
import gc
import math
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import networkx as nx

from ..findings import Finding, SourcePos, make
from ..load.yamlsrc import Document, LoadError, load_file
from ..model import Accept, Block, Limits, Param, PhysAction, Sample, Segment, Shot
from ..validate.schema import validate_document
from .expr import ExprError, names_in
from .quantities import Bad, Env, quantity, to_qty
from .rig import build_rig
from .units import Qty
from ..codes import (
    ABSOLUTE_PATH, ANCHOR_CYCLE, BAD_ANCHOR, BAD_EXPRESSION, BAD_SAMPLE, BAD_VALUE, DUPLICATE_BLOCK,
    EMPTY_SEQUENCE, FILE_MISSING, FRAGMENT, MISSING_KEY, NON_FINITE, OVERFLOW, PARAM_CYCLE, PARAM_OUT_OF_RANGE,
    RIG_FILE, RIG_OUTSIDE_ROOT, UNKNOWN_BLOCK, UNKNOWN_CHANNEL, UNKNOWN_NAME, USE_CYCLE, USE_OUTSIDE_ROOT,
    VERSION, WRONG_TYPE,
)

SEQUENCE_SCHEMA = "sequence.schema.json"
RIG_SCHEMA = "rig.schema.json"
SUPPORTED_VERSIONS = (1,)


@dataclass
class Sources:
    """Every document a sequence needs, loaded and validated."""

    main: Document
    rig: Document | None
    used: list = field(default_factory=list)  # (Document, use-entry overrides dict, use Document, path) in order
    findings: list = field(default_factory=list)

    @property
    def hashes(self) -> dict:
        out = {self.main.file: self.main.text_sha256}
        for d, *_ in self.used:
            out[d.file] = d.text_sha256
        if self.rig is not None:
            out[self.rig.file] = self.rig.text_sha256
        return out


def _display(path: Path) -> str:
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except (ValueError, RuntimeError, OSError):  # outside the working folder, or a symlink loop
        return str(path)


def load_sources(path: str | Path, text: str | None = None, display: str | None = None, *,
                 allow_outside_root: bool | None = None) -> Sources:
    """Load and validate a sequence, the files it uses, and its rig.

    `allow_outside_root`: let `use:` and `rig:` name files outside the project root (None: the
    SEQGEN_ALLOW_OUTSIDE environment variable decides)."""
    from ..load.yamlsrc import load_text

    p = Path(path)
    try:
        main = load_text(text, display or str(path)) if text is not None else load_file(p, display or _display(p))
    except LoadError as exc:
        raise exc
    src = Sources(main, None)
    if not _check_top(main, src.findings, "seqgen", VERSION):
        return src
    src.findings += validate_document(main, SEQUENCE_SCHEMA)
    _load_uses(main, p.parent, [p.resolve()], src, allow_outside_root)
    rig_text = main.data.get("rig")
    if isinstance(rig_text, str):
        rig_path = (p.parent / rig_text)
        refused = _rig_refused(main, rig_text, rig_path, p, allow_outside_root)
        if refused is not None:  # the use: root policy holds for the rig too
            src.findings.append(refused)
            return src
        src.findings += _absolute_path(main, ("rig",), rig_text, p.parent, p)
        try:
            rig = load_file(rig_path, _display(rig_path))
        except LoadError as exc:
            f = exc.finding
            if f.code == "schema.file-missing":
                f = make(FILE_MISSING, f"rig file '{rig_text}' not found (looked in {os.path.abspath(rig_path.parent)})",
                         main.pos(("rig",)), hint="rig paths are relative to the sequence file's folder")
            src.findings.append(f)
            return src
        if _check_top(rig, src.findings, "seqgen_rig", VERSION):
            src.findings += validate_document(rig, RIG_SCHEMA)
            src.rig = rig
    elif main.data.get("fragment") is True:
        src.findings.append(make(FRAGMENT, "fragment file: checked for syntax and schema; its params, blocks "
                                 "and physics are checked in the sequences that use it", main.pos(("fragment",))))
    elif "rig" not in main.data:
        src.findings.append(make(MISSING_KEY, "the sequence names no rig", main.pos(()),
                                 hint="add 'rig: rigs/<your rig>.yaml', or 'fragment: true' for a file of shared blocks"))
    return src




def _check_top(doc: Document, findings: list, key: str, code: str) -> bool:
    if doc.data is None:
        findings.append(make(EMPTY_SEQUENCE, "the file is empty", doc.pos(()), hint=f"start with '{key}: 1'"))
        return False
    if not isinstance(doc.data, dict):
        findings.append(make(WRONG_TYPE, "the file must be a YAML mapping", doc.pos(()), hint=f"start with '{key}: 1'"))
        return False
    if key not in doc.data:
        if key == "seqgen" and "seqgen_rig" in doc.data:  # a rig file where a sequence file is expected
            findings.append(make(code, "this is a rig file (seqgen_rig:), not a sequence file (seqgen:)",
                                 doc.pos(("seqgen_rig",)), hint="check a sequence file that names it ('rig: PATH'); "
                                 "'seqgen check' of the rig file itself validates it as a rig"))
            return False
        findings.append(make(code, f"missing '{key}:' version key", doc.pos(()), hint=f"add '{key}: 1' as the first line"))
        return False
    if doc.data[key] not in SUPPORTED_VERSIONS:
        findings.append(make(code, f"unsupported format version {key}: {doc.data[key]!r}", doc.pos((key,)),
                             hint=f"this seqgen reads version(s) {', '.join(map(str, SUPPORTED_VERSIONS))}"))
        return False
    return True


_ROOT_MARKERS = ("pyproject.toml", ".git", "seqgen.toml")


def project_root(top: Path) -> Path:
    """The nearest ancestor folder of the top-level sequence holding pyproject.toml, .git or seqgen.toml
    (else the sequence's own folder): `use:` may not leave it unless allowed."""
    for folder in top.parents:
        if any((folder / m).exists() for m in _ROOT_MARKERS):
            return folder
    return top.parent


def _outside_allowed(flag: bool | None) -> bool:
    if flag is not None:
        return bool(flag)
    return os.environ.get("SEQGEN_ALLOW_OUTSIDE", "").strip().lower() in ("1", "true", "yes")




def _rig_refused(main: Document, rig_text: str, rig_path: Path, top: Path,
                 allow_outside_root: bool | None) -> Finding | None:
    """The finding that refuses a `rig:` path outside the project root (or that cannot be resolved), else None."""
    if _outside_allowed(allow_outside_root):
        return None
    try:
        resolved, root = rig_path.resolve(), project_root(top.resolve())
    except (RuntimeError, OSError) as exc:  # a symlink loop (RuntimeError before Python 3.13)
        return make(FILE_MISSING, f"rig file '{rig_text}' cannot be read: {exc}", main.pos(("rig",)),
                    hint="the path is a symbolic link loop; fix the link")
    if resolved.is_relative_to(root):
        return None
    shown = _root_text(root)
    return make(RIG_OUTSIDE_ROOT, f"rig file '{rig_text}' is outside the project root {shown}", main.pos(("rig",)),
                hint="keep the rig file in the project (e.g. rigs/ beside the sequences), or allow it with "
                     "--allow-outside-root (or SEQGEN_ALLOW_OUTSIDE=1)")




def _absolute_path(doc: Document, path: tuple, text: str, folder: Path, top: Path) -> list[Finding]:
    """A warning for an absolute `rig:` / `use:` path inside the project, with its relative form.

    Outside the project an absolute path is refused (or explicitly allowed), so it is not repeated here."""
    if not os.path.isabs(text):
        return []
    try:
        if not Path(text).resolve().is_relative_to(project_root(Path(top).resolve())):
            return []
    except (RuntimeError, OSError):
        return []
    try:
        rel = os.path.relpath(text, folder)
    except ValueError:  # another drive (Windows): no relative form
        rel = None
    hint = f"write '{rel}' (relative to {_display(folder) or '.'})" if rel else "write the path relative to this file"
    return [make(ABSOLUTE_PATH, f"'{text}' is an absolute path: it works only where the project sits at this place",
                 doc.pos(path), hint=hint)]


def _root_text(root: Path) -> str:
    """The project root as a message names it: its path, and 'the current folder' when it is that."""
    shown = _display(root)
    text = f"'{root}' (the current folder)" if shown == "." else f"'{shown}'"
    if not any((root / m).exists() for m in _ROOT_MARKERS):
        text += " (the sequence's own folder: no folder above it holds a pyproject.toml, .git or seqgen.toml)"
    return text




def is_rig_document(doc: Document) -> bool:
    """A rig file (`seqgen_rig:` and no `seqgen:` key)."""
    return isinstance(doc.data, dict) and "seqgen_rig" in doc.data and "seqgen" not in doc.data


def check_rig_document(doc: Document) -> list[Finding]:
    """The findings of a rig file checked on its own: version, rig schema, then the rig builder; a note
    that says so (and how many devices and channels it has) when it builds."""
    findings: list[Finding] = []
    if not _check_top(doc, findings, "seqgen_rig", VERSION):
        return findings
    findings += validate_document(doc, RIG_SCHEMA)
    if any(f.severity == "error" for f in findings):
        return findings
    rig, rf = build_rig(doc)
    findings += rf
    if rig is not None and not any(f.severity == "error" for f in rf):
        findings.append(make(RIG_FILE, f"rig file checked on its own: {len(rig.devices)} device(s), "
                             f"{len(rig.channels)} channel(s), {len(rig.beams)} beam(s), {len(rig.coils)} coil(s)",
                             doc.pos(("seqgen_rig",)),
                             hint="check a sequence that names it ('rig: PATH') to preflight it with a timeline"))
    return findings


def _load_uses(doc: Document, folder: Path, chain: list, src: Sources, allow_outside_root: bool | None = None) -> None:
    uses = doc.data.get("use") if isinstance(doc.data, dict) else None
    if not isinstance(uses, list):
        return
    root = project_root(chain[0])
    for i, entry in enumerate(uses):
        if not isinstance(entry, dict) or not isinstance(entry.get("file"), str):
            continue
        target = (folder / entry["file"])
        try:
            resolved = target.resolve()
        except (RuntimeError, OSError) as exc:  # a symlink loop (RuntimeError before Python 3.13)
            src.findings.append(make(FILE_MISSING, f"used file '{entry['file']}' cannot be read: {exc}",
                                     doc.pos(("use", i, "file")), hint="the path is a symbolic link loop; fix the link"))
            continue
        if not resolved.is_relative_to(root) and not _outside_allowed(allow_outside_root):
            shown = _root_text(root)
            src.findings.append(make(USE_OUTSIDE_ROOT, f"used file '{entry['file']}' is outside the project root {shown}",
                                     doc.pos(("use", i, "file")),
                                     hint="move the file into the project, or allow it with --allow-outside-root "
                                          "(or SEQGEN_ALLOW_OUTSIDE=1)"))
            continue
        src.findings += _absolute_path(doc, ("use", i, "file"), entry["file"], folder, chain[0])
        if resolved in chain:
            names = " -> ".join(_display(c) for c in chain + [resolved])
            src.findings.append(make(USE_CYCLE, f"use cycle: {names}", doc.pos(("use", i, "file")),
                                     hint="remove one of the use: entries in the chain"))
            continue
        try:
            used = load_file(target, _display(target))
        except LoadError as exc:
            f = exc.finding
            if f.code == "schema.file-missing":
                f = make(FILE_MISSING, f"used file '{entry['file']}' not found (looked in "
                         f"{os.path.abspath(target.parent)})",
                         doc.pos(("use", i, "file")), hint="use: paths are relative to the folder of the file that "
                                                          "uses them")
            src.findings.append(f)
            continue
        if not _check_top(used, src.findings, "seqgen", VERSION):
            continue
        src.findings += validate_document(used, SEQUENCE_SCHEMA)
        _load_uses(used, target.parent, chain + [resolved], src, allow_outside_root)
        src.used.append((used, entry, doc, ("use", i)))


# ----------------------------------------------------------------------------- resolve


def resolve(src: Sources, overrides: dict | None = None) -> tuple[Shot | None, list[Finding]]:
    """Resolve validated sources into a shot. `overrides`: param name -> Qty (scans).

    The cyclic garbage collector is paused meanwhile, as while loading: the segments
    and blocks made here survive, so collections would keep walking the whole loaded
    document (about 40 % of the resolve time of a 10 000-block file). Any reference
    cycle left behind is collected once the collector runs again."""
    paused = gc.isenabled()
    gc.disable()
    try:
        return _resolve(src, overrides)
    finally:
        if paused:
            gc.enable()


def _resolve(src: Sources, overrides: dict | None) -> tuple[Shot | None, list[Finding]]:
    findings: list[Finding] = []
    if src.rig is None or any(f.severity == "error" for f in src.findings):
        return None, findings
    rig, rf = build_rig(src.rig)
    findings += rf
    if rig is None or any(f.severity == "error" for f in rf):
        return None, findings
    docs = [d for d, *_ in src.used] + [src.main]
    # params: used files first, their use-entry overrides, then the main file; later wins
    entries: dict[str, tuple] = {}
    bounds: dict[str, dict] = {}  # name -> {"min"/"max": (raw, Document, path)}; a later min:/max: replaces
    for d, entry, parent, upath in src.used:
        for name, raw in (d.data.get("params") or {}).items():
            entries[name] = (raw, d, ("params", name))
            _note_bounds(bounds, name, raw, d, ("params", name))
        for name, raw in (entry.get("params") or {}).items():
            entries[name] = (raw, parent, upath + ("params", name))
    for name, raw in (src.main.data.get("params") or {}).items():
        entries[name] = (raw, src.main, ("params", name))
        _note_bounds(bounds, name, raw, src.main, ("params", name))
    params, env = _resolve_params(entries, overrides or {}, findings, bounds)
    if params is None:
        return None, findings
    sample = _sample(src.main, env, findings)
    limits = Limits(**(src.main.data.get("limits") or {}))
    blocks_raw = []
    seen: dict[str, SourcePos] = {}
    for d in docs:
        wanted = None
        for ud, entry, *_ in src.used:
            if ud is d and entry.get("blocks"):
                wanted = set(entry["blocks"])
        for i, b in enumerate(d.data.get("blocks") or []):
            if wanted is not None and b["name"] not in wanted:
                continue
            if b["name"] in seen:
                findings.append(make(DUPLICATE_BLOCK, f"block '{b['name']}' is defined twice (first at {seen[b['name']]})",
                                     d.pos(("blocks", i, "name")), hint="rename one of them"))
                continue
            seen[b["name"]] = d.pos(("blocks", i, "name"))
            blocks_raw.append((b, d, ("blocks", i)))
    if not any(b.get("actions") for b, *_ in blocks_raw):
        findings.append(make(EMPTY_SEQUENCE, "the sequence has no actions", src.main.pos(("blocks",)),
                             hint="add a block with at least one action"))
        return None, findings
    lowered = []
    for b, d, path in blocks_raw:
        lowered.append(_lower_block(b, d, path, rig, env, findings))
    placed = _place_blocks(blocks_raw, lowered, env, findings)
    if placed is None or any(f.severity == "error" for f in findings):
        return None, findings
    segments, phys, blocks = [], [], []
    for (b, d, path), low, start in zip(blocks_raw, lowered, placed):
        dur, segs, acts = low
        blocks.append(Block(b["name"], start, start + dur, d.pos(path), _anchor_text(b), _anchor_block(b)))
        for s in segs:
            segments.append(dict(s, t0=s["t0"] + start, t1=s["t1"] + start))
        for a in acts:
            phys.append(PhysAction(a["kind"], b["name"], a["t0"] + start, a["t1"] + start, a["args"], a["pos"], len(phys)))
    final_segments = _fill_values(segments, rig)
    accepts = []
    for i, a in enumerate(src.main.data.get("accept") or []):
        pos = src.main.pos(("accept", i))
        if a.get("block") and a["block"] not in seen:
            close = difflib.get_close_matches(a["block"], list(seen), n=1)
            findings.append(make(UNKNOWN_BLOCK, f"acceptance names unknown block '{a['block']}'", pos,
                                 hint=f"did you mean '{close[0]}'?" if close else "name an existing block"))
        accepts.append(Accept(a["code"], a.get("block"), a["reason"], pos))
    blocks.sort(key=lambda b: (b.start_s, b.name))
    duration = max([b.end_s for b in blocks] + [s.t1 for s in final_segments] + [0.0])
    countable = min((2.0 ** 52 / d.timebase_hz for d in rig.devices.values()), default=math.inf)
    if duration >= countable:  # ticks would no longer be exact integers in a float64
        last = max(blocks, key=lambda b: b.end_s)
        findings.append(make(OVERFLOW, f"the sequence lasts {duration:.4g} s, longer than its devices can count "
                             f"in ticks ({countable:.3g} s)", last.pos, block=last.name,
                             hint="check the block times and durations for a typo in the exponent"))
        return None, findings
    end = src.main.data.get("end") or {}
    shot = Shot(src.main.file, rig, sample, tuple(params), tuple(blocks), tuple(final_segments), tuple(phys),
                tuple(accepts), src.hashes, limits, tuple(end.get("leave_on") or ()), duration)
    return shot, findings


def _note_bounds(bounds: dict, name: str, raw, doc: Document, path: tuple) -> None:
    if isinstance(raw, dict):
        for key in ("min", "max"):
            if key in raw:
                bounds.setdefault(name, {})[key] = (raw[key], doc, path + (key,))


def _resolve_params(entries: dict, overrides: dict, findings: list, bounds: dict | None = None):
    graph = nx.DiGraph()
    texts = {}
    bounds = {n: dict(b) for n, b in (bounds or {}).items() if n in entries}
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
        if isinstance(value, str) and name not in overrides:
            try:
                deps = names_in(value)
            except ExprError as exc:
                findings.append(make(BAD_EXPRESSION, str(exc), d.pos(path), hint=exc.hint))
                continue
            for dep in deps:
                if dep in entries:
                    graph.add_edge(dep, name)
    try:
        order = list(nx.topological_sort(graph))
    except nx.NetworkXUnfeasible:
        cycle = nx.find_cycle(graph)
        members = [u for u, _ in cycle]
        _, d, path = texts[members[0]]
        findings.append(make(PARAM_CYCLE, "params depend on each other in a cycle: " + " -> ".join(members + [members[0]]),
                             d.pos(path), hint="give one of them a plain value"))
        return None, None
    env = Env(defs=texts)  # name -> Qty; knows each param's definition, for findings about its value
    params = []
    ok = True
    for name in order:
        value, d, path = texts[name]
        if name in overrides:
            q = overrides[name]
        else:
            try:
                q = to_qty(value, d, path, env)
            except Bad as bad:
                findings.append(bad.finding)
                ok = False
                continue
        env[name] = q
        params.append(Param(name, q.value, q.dims, str(value), d.pos(path)))
        if name in bounds and bounds[name]:
            bad = _out_of_bounds(name, q, value, bounds[name], entries[name], name in overrides, env)
            if bad:
                findings.extend(bad)
                ok = False
    return (params, env) if ok else (None, None)


def _plain_quantity(text: str) -> bool:
    """'14 ms', '0.3' (a number with a unit, no param), as opposed to an expression or a param name."""
    from .units import UnitError, parse_simple

    try:
        return parse_simple(text.strip()) is not None
    except UnitError:
        return False


BOUND_RTOL = 1e-12  # a value within this relative distance of a bound meets it (unit conversions round)


def _out_of_bounds(name: str, q: Qty, written, spec: dict, entry: tuple, scanned: bool, env) -> list[Finding]:
    """The findings of param `name` (value `q`) against its `min:` / `max:`: a bound that is no quantity of
    the param's dimension, `min:` above `max:`, or the value outside them (at the param's line)."""
    from .quantities import _dimension_words
    from .units import DIMENSIONLESS, display_unit, format_qty, same_dims

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
            else:
                out.append(_dimension_words(braw, b, q.dims, display_unit(q.dims), f"{key}: of param '{name}'",
                                            bdoc.pos(bpath)))
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
        computed = isinstance(written, str) and not scanned and not _plain_quantity(written)
        if scanned:
            what = f"scan value {shown(v)} of '{name}'"
            hint = (f"keep every scan value of '{name}' {least} {shown(b)} (this shot is refused, the others run), "
                    f"or change {key}: if such values are meant")
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


def _sample(doc: Document, env, findings) -> Sample | None:
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

    tf = None
    if s.get("trap_frequencies"):
        try:
            tf = tuple(quantity(v, "Hz", doc, ("sample", "trap_frequencies", i), env, positive=True)
                       for i, v in enumerate(s["trap_frequencies"]))
        except Bad as bad:
            findings.append(bad.finding)
    return Sample(name, F, mF, s.get("atoms"), q("temperature", "K"), bool(s.get("condensed", False)), tf,
                  s.get("detection_floor"), pos)


_ANCHOR = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:([+-])\s*(.+?))?\s*$")


def _anchor_text(b) -> str:
    for k in ("at", "after", "with"):
        if k in b:
            return f"{k} {b[k]}"
    return "after previous"


def _anchor_block(b) -> str | None:
    for k in ("after", "with"):
        if k in b and isinstance(b[k], str):
            m = _ANCHOR.match(b[k])
            if m:
                return m.group(1)
    return None


def _place_blocks(blocks_raw, lowered, env, findings):
    """Start time of every block, through the anchor graph; None on failure."""
    names = [b["name"] for b, *_ in blocks_raw]
    index = {n: i for i, n in enumerate(names)}
    graph = nx.DiGraph()
    graph.add_nodes_from(names)
    anchors = []
    for i, (b, d, path) in enumerate(blocks_raw):
        if "at" in b:
            try:
                t = quantity(b["at"], "s", d, path + ("at",), env, what=f"block '{b['name']}' at")
            except Bad as bad:
                findings.append(bad.finding)
                return None
            anchors.append(("at", None, t))
            continue
        kind = "after" if "after" in b else ("with" if "with" in b else None)
        if kind is None:
            # no anchor: right after the previous block in the file
            if i == 0:
                anchors.append(("at", None, 0.0))
            else:
                anchors.append(("after", names[i - 1], 0.0))
                graph.add_edge(names[i - 1], b["name"])
            continue
        m = _ANCHOR.match(b[kind])
        if not m:
            findings.append(make(BAD_ANCHOR, f"cannot read anchor '{kind}: {b[kind]}'", d.pos(path + (kind,)),
                                 hint=f"write '{kind}: BLOCK' or '{kind}: BLOCK + 5 ms'"))
            return None
        target, sign, off_text = m.groups()
        if target not in index:
            close = difflib.get_close_matches(target, names, n=1)
            findings.append(make(UNKNOWN_BLOCK, f"block '{b['name']}' is anchored {kind} unknown block '{target}'",
                                 d.pos(path + (kind,)), hint=f"did you mean '{close[0]}'?" if close else "name an existing block"))
            return None
        off = 0.0
        if off_text:
            try:
                off = quantity(off_text, "s", d, path + (kind,), env, what="anchor offset")
            except Bad as bad:
                findings.append(bad.finding)
                return None
            off = -off if sign == "-" else off
        anchors.append((kind, target, off))
        graph.add_edge(target, b["name"])
    try:
        order = list(nx.topological_sort(graph))
    except nx.NetworkXUnfeasible:
        cycle = [u for u, _ in nx.find_cycle(graph)]
        b, d, path = blocks_raw[index[cycle[0]]]
        findings.append(make(ANCHOR_CYCLE, "blocks are anchored on each other in a cycle: " + " -> ".join(cycle + [cycle[0]]),
                             d.pos(path), hint="anchor one of them with 'at:' or on a block outside the cycle"))
        return None
    start: dict[str, float] = {}
    for n in order:
        i = index[n]
        kind, target, off = anchors[i]
        if kind == "at":
            start[n] = off
        elif kind == "after":
            start[n] = start[target] + lowered[index[target]][0] + off
        else:
            start[n] = start[target] + off
    return [start[n] for n in names]


# ----------------------------------------------------------------------------- actions

def _close(name, options):
    close = difflib.get_close_matches(name, list(options), n=1)
    return f"did you mean '{close[0]}'?" if close else ("known: " + ", ".join(sorted(options)) if options else "")


class _Ctx:
    def __init__(self, rig, env, doc, block, findings):
        self.rig, self.env, self.doc, self.block, self.findings = rig, env, doc, block, findings
        self.segments: list[dict] = []
        self.phys: list[dict] = []

    def q(self, spec, key, path, unit, **kw):
        return quantity(spec[key], unit, self.doc, path + (key,), self.env, **kw)

    def output_for(self, channel, path, dims_hint=None):
        rig = self.rig
        if channel in rig.outputs:
            return rig.outputs[channel]
        if channel in rig.channels:
            parts = rig.channels[channel]
            if dims_hint is not None:
                for p in parts:
                    if rig.outputs[p].phys_dims == dims_hint:
                        return rig.outputs[p]
            return rig.outputs[parts[0]]
        raise Bad(make(UNKNOWN_CHANNEL, f"unknown channel '{channel}'", self.doc.pos(path),
                       block=self.block, hint=_close(channel, list(rig.channels) + list(rig.outputs))))

    def value(self, out, raw, path, what):
        """A channel value in the output's physical unit (digital: 0/1)."""
        if out.kind == "digital":
            if isinstance(raw, bool):
                return 1.0 if raw else 0.0
            q = to_qty(raw, self.doc, path, self.env)
            return q.value
        return quantity(raw, out.phys_unit, self.doc, path, self.env, what=what)

    def seg(self, out, kind, t0, t1, v0, v1, action, path, **kw):
        self.segments.append(dict(output=out.name, kind=kind, t0=t0, t1=t1, v0=v0, v1=v1, block=self.block,
                                  action=action, pos=self.doc.pos(path), **kw))

    def pulse(self, out, t0, dur, value, back_to, action, path):
        self.seg(out, "set", t0, t0, None, value, action, path)
        self.seg(out, "set", t0 + dur, t0 + dur, None, back_to, action + ":end", path)

    def ramp(self, out, spec, t0, path, action, v_from, v_to, dur):
        tau = self.q(spec, "tau", path, "s") if "tau" in spec else None
        if spec.get("shape") == "exponential" and not tau:
            raise Bad(make(MISSING_KEY, "an exponential ramp needs 'tau:'", self.doc.pos(path), block=self.block,
                           hint="add 'tau: <time constant>'"))
        tol = None
        if "tolerance" in spec:
            tol = quantity(spec["tolerance"], out.unit, self.doc, path + ("tolerance",), self.env, positive=True)
            if tol < 1e-9 * (out.hi - out.lo):  # finer than any DAC resolves: the sampler could never meet it
                raise Bad(make(BAD_VALUE, f"tolerance {tol:.3g} {out.unit} is below a billionth of the output "
                               f"range of '{out.name}'", self.doc.pos(path + ("tolerance",)), block=self.block,
                               hint="give at least half an LSB of the channel"))
        if spec.get("shape") == "table":
            _check_shape_table(self, spec.get("table"), path + ("table",))
        self.seg(out, "ramp", t0, t0 + dur, v_from, v_to, action, path, shape=spec.get("shape", "linear"), tau_s=tau,
                 table=tuple(map(tuple, spec["table"])) if spec.get("table") else None, tolerance=tol)


def _check_shape_table(ctx, table, path):
    """A ramp's shape table: [progress s, fraction f] pairs, finite, s from 0 to 1 strictly increasing."""
    if not table:
        raise Bad(make(MISSING_KEY, "a table-shaped ramp needs 'table:'", ctx.doc.pos(path), block=ctx.block,
                       hint="add 'table: [[0, 0], [0.5, 0.8], [1, 1]]' (progress, fraction)"))
    s = [row[0] for row in table]
    if not all(isinstance(x, (int, float)) and not isinstance(x, bool) and math.isfinite(x) for row in table for x in row):
        raise Bad(make(NON_FINITE, "shape table entries must be finite numbers", ctx.doc.pos(path), block=ctx.block,
                       hint="replace .nan / .inf entries with numbers"))
    if s[0] != 0 or s[-1] != 1 or any(b <= a for a, b in zip(s, s[1:])):
        raise Bad(make(BAD_VALUE, "shape table progress must run from 0 to 1, strictly increasing",
                       ctx.doc.pos(path), block=ctx.block, hint="first column: 0, ..., 1 in increasing order"))


def _lower_block(b, doc, path, rig, env, findings):
    """(duration, segments relative to block start, physics actions) for one block."""
    ctx = _Ctx(rig, env, doc, b["name"], findings)
    cursor = 0.0
    end = 0.0
    for i, item in enumerate(b.get("actions") or []):
        (kind, spec), = item.items()
        apath = path + ("actions", i, kind)
        try:
            start = ctx.q(spec, "at", apath, "s", nonnegative=True) if "at" in spec else cursor
            stop = _LOWER[kind](ctx, spec, start, apath)
        except Bad as bad:
            f = bad.finding
            if f.block is None:
                from dataclasses import replace
                f = replace(f, block=b["name"])
            findings.append(f)
            continue
        cursor = stop
        end = max(end, stop)
    return end, ctx.segments, ctx.phys


def _do_set(ctx, spec, t0, path):
    out = ctx.output_for(spec["channel"], path + ("channel",), _dims_of_raw(ctx, spec.get("value"), path))
    ctx.seg(out, "set", t0, t0, None, ctx.value(out, spec["value"], path + ("value",), "value"), "set", path)
    return t0


def _dims_of_raw(ctx, raw, path):
    try:
        return to_qty(raw, ctx.doc, path, ctx.env).dims if raw is not None else None
    except Bad:
        return None


def _do_ramp(ctx, spec, t0, path, action="ramp"):
    out = ctx.output_for(spec["channel"], path + ("channel",), _dims_of_raw(ctx, spec.get("to"), path))
    dur = ctx.q(spec, "over", path, "s", positive=True)
    v_to = ctx.value(out, spec["to"], path + ("to",), "to")
    v_from = ctx.value(out, spec["from"], path + ("from",), "from") if "from" in spec else None
    ctx.ramp(out, spec, t0, path, action, v_from, v_to, dur)
    return t0 + dur


def _do_sweep(ctx, spec, t0, path):
    ch = spec["channel"]
    if ch in ctx.rig.channels and f"{ch}.freq" in ctx.rig.outputs:
        spec = dict(spec, channel=f"{ch}.freq")
    return _do_ramp(ctx, spec, t0, path, "sweep")


def _do_pulse(ctx, spec, t0, path):
    out = ctx.output_for(spec["channel"], path + ("channel",), _dims_of_raw(ctx, spec.get("value"), path))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    if "value" in spec:
        value = ctx.value(out, spec["value"], path + ("value",), "value")
    elif out.kind == "digital":
        value = 1.0
    else:
        raise Bad(make(MISSING_KEY, "an analog pulse needs 'value:'", ctx.doc.pos(path), block=ctx.block,
                       hint="add 'value: <level during the pulse>'"))
    back = ctx.value(out, spec["back_to"], path + ("back_to",), "back_to") if "back_to" in spec else None
    ctx.pulse(out, t0, dur, value, back, "pulse", path)
    return t0 + dur


def _do_hold(ctx, spec, t0, path):
    return t0 + ctx.q(spec, "duration", path, "s", positive=True)


def _do_trigger(ctx, spec, t0, path):
    out = ctx.output_for(spec["channel"], path + ("channel",))
    width = ctx.q(spec, "width", path, "s", positive=True) if "width" in spec else max(out.min_pulse_s, 10e-6)
    ctx.pulse(out, t0, width, 1.0, None, "trigger", path)
    return t0


def _named(ctx, table, kind, name, path):
    if name not in table:
        raise Bad(make(UNKNOWN_NAME, f"unknown {kind} '{name}'", ctx.doc.pos(path), block=ctx.block,
                       hint=_close(name, table)))
    return table[name]


def _phys(ctx, kind, t0, t1, path, **args):
    ctx.phys.append(dict(kind=kind, t0=t0, t1=t1, args=args, pos=ctx.doc.pos(path)))


def _do_trap_ramp(ctx, spec, t0, path):
    beam = _named(ctx, ctx.rig.beams, "beam", spec["beam"], path + ("beam",))
    out = ctx.output_for(beam.power_channel, path + ("beam",))
    dur = ctx.q(spec, "over", path, "s", positive=True)
    v_to = ctx.q(spec, "to", path, out.phys_unit or "W", nonnegative=True)
    v_from = ctx.q(spec, "from", path, out.phys_unit or "W", nonnegative=True) if "from" in spec else None
    ctx.ramp(out, spec, t0, path, "trap_ramp", v_from, v_to, dur)
    _phys(ctx, "trap_ramp", t0, t0 + dur, path, beam=beam.name, output=out.name, to=v_to, start=v_from,
          shape=spec.get("shape", "linear"))
    return t0 + dur


def _do_release(ctx, spec, t0, path):
    beams = spec.get("beams") or []
    coils = spec.get("coils") or []
    if not beams and not coils:
        beams = [n for n, b in ctx.rig.beams.items() if b.role == "trap"]
    for i, name in enumerate(beams):
        beam = _named(ctx, ctx.rig.beams, "beam", name, path + ("beams", i))
        ctx.seg(ctx.output_for(beam.power_channel, path), "set", t0, t0, None, 0.0, "release", path)
    for i, name in enumerate(coils):
        coil = _named(ctx, ctx.rig.coils, "coil", name, path + ("coils", i))
        ctx.seg(ctx.output_for(coil.current_channel, path), "set", t0, t0, None, 0.0, "release", path)
    _phys(ctx, "release", t0, t0, path, beams=tuple(beams), coils=tuple(coils))
    return t0


def _coil_current(ctx, coil, gradient, path):
    if not coil.gradient_per_amp:
        raise Bad(make(UNKNOWN_NAME, f"coil '{coil.name}' has no gradient_per_amp in the rig", ctx.doc.pos(path),
                       block=ctx.block, hint="add 'gradient_per_amp: <G/cm per A>' to the coil"))
    return gradient / coil.gradient_per_amp


def _do_push(ctx, spec, t0, path):
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    args = dict(duration=dur)
    if "coil" in spec:
        coil = _named(ctx, ctx.rig.coils, "coil", spec["coil"], path + ("coil",))
        if "gradient" not in spec:
            raise Bad(make(MISSING_KEY, "a magnetic push needs 'gradient:'", ctx.doc.pos(path), block=ctx.block))
        grad = ctx.q(spec, "gradient", path, "T/m")
        out = ctx.output_for(coil.current_channel, path + ("coil",))
        ctx.pulse(out, t0, dur, _coil_current(ctx, coil, grad, path + ("gradient",)), 0.0, "push", path)
        args.update(coil=coil.name, gradient=grad)
    elif "beam" in spec:
        beam = _named(ctx, ctx.rig.beams, "beam", spec["beam"], path + ("beam",))
        if "power" not in spec:
            raise Bad(make(MISSING_KEY, "an optical push needs 'power:'", ctx.doc.pos(path), block=ctx.block,
                           hint="add 'power: <beam power>'"))
        power = ctx.q(spec, "power", path, "W", positive=True)
        out = ctx.output_for(beam.power_channel, path + ("beam",))
        ctx.pulse(out, t0, dur, power, 0.0, "push", path)
        args.update(beam=beam.name, power=power)
    else:
        raise Bad(make(MISSING_KEY, "a push needs 'coil:' (magnetic) or 'beam:' (optical)", ctx.doc.pos(path),
                       block=ctx.block))
    if "expect_velocity" in spec:
        args["expect_velocity"] = ctx.q(spec, "expect_velocity", path, "m/s")
    if "tolerance" in spec:
        args["tolerance"] = ctx.q(spec, "tolerance", path, "")
    if "target_distance" in spec:
        args["target_distance"] = ctx.q(spec, "target_distance", path, "m", positive=True)
    _phys(ctx, "push", t0, t0 + dur, path, **args)
    return t0 + dur


def _do_barrier(ctx, spec, t0, path):
    beam = _named(ctx, ctx.rig.beams, "beam", spec["beam"], path + ("beam",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    power = ctx.q(spec, "power", path, "W", positive=True)
    out = ctx.output_for(beam.power_channel, path + ("beam",))
    ctx.pulse(out, t0, dur, power, 0.0, "barrier", path)
    args = dict(beam=beam.name, power=power, duration=dur, expect=spec.get("expect", "any"))
    if "position" in spec:
        args["position"] = ctx.q(spec, "position", path, "m")
    mod = spec.get("modulation")
    if mod:
        mpath = path + ("modulation",)
        if "frequency" in mod:
            args["mod_frequency"] = ctx.q(mod, "frequency", mpath, "Hz", positive=True)
        if "depth" in mod:
            args["mod_depth"] = ctx.q(mod, "depth", mpath, "")
        if mod.get("channel"):
            mch = mod["channel"]
            fout = ctx.output_for(f"{mch}.freq" if f"{mch}.freq" in ctx.rig.outputs else mch, mpath + ("channel",))
            args["mod_channel"] = fout.name
            if "mod_frequency" in args and fout.phys_unit == "Hz":
                ctx.seg(fout, "set", t0, t0, None, args["mod_frequency"], "barrier", mpath)
            amp = f"{mch}.amp"
            if amp in ctx.rig.outputs:
                ctx.pulse(ctx.rig.outputs[amp], t0, dur, args.get("mod_depth", 1.0), 0.0, "barrier", mpath)
        if mod.get("transition"):
            args["transition"] = tuple((t["F"], t["mF"]) for t in mod["transition"])
    _phys(ctx, "barrier", t0, t0 + dur, path, **args)
    return t0 + dur


def _do_clock_pulse(ctx, spec, t0, path):
    drive = _named(ctx, ctx.rig.drives, "drive", spec["drive"], path + ("drive",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    amp = ctx.q(spec, "amplitude", path, "") if "amplitude" in spec else 1.0
    ch = drive.channel
    amp_out = ctx.rig.outputs.get(f"{ch}.amp") or ctx.output_for(ch, path + ("drive",))
    envelope = spec.get("envelope", "square")
    args = dict(drive=drive.name, duration=dur, amplitude=amp, envelope=envelope)
    if "angle" in spec:
        args["angle"] = ctx.q(spec, "angle", path, "")
    if "frequency" in spec:
        args["frequency"] = ctx.q(spec, "frequency", path, "Hz", positive=True)
        fout = ctx.rig.outputs.get(f"{ch}.freq")
        if fout is not None:
            ctx.seg(fout, "set", t0, t0, None, args["frequency"], "clock_pulse", path + ("frequency",))
    if "detuning" in spec:
        args["detuning"] = ctx.q(spec, "detuning", path, "Hz")
    if spec.get("transition"):
        args["transition"] = tuple((t["F"], t["mF"]) for t in spec["transition"])
    if envelope == "square":
        ctx.pulse(amp_out, t0, dur, amp, 0.0, "clock_pulse", path)
    else:
        ctx.seg(amp_out, "ramp", t0, t0 + dur, 0.0, amp, "clock_pulse", path, shape=envelope)
        ctx.seg(amp_out, "set", t0 + dur, t0 + dur, None, 0.0, "clock_pulse:end", path)
    _phys(ctx, "clock_pulse", t0, t0 + dur, path, **args)
    return t0 + dur


def _do_separate(ctx, spec, t0, path):
    coil = _named(ctx, ctx.rig.coils, "coil", spec["coil"], path + ("coil",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    grad = ctx.q(spec, "gradient", path, "T/m")
    out = ctx.output_for(coil.current_channel, path + ("coil",))
    ctx.pulse(out, t0, dur, _coil_current(ctx, coil, grad, path + ("gradient",)), 0.0, "separate", path)
    _phys(ctx, "separate", t0, t0 + dur, path, coil=coil.name, gradient=grad, duration=dur)
    return t0 + dur


def _do_image(ctx, spec, t0, path):
    setup = _named(ctx, ctx.rig.imaging, "imaging setup", spec["setup"], path + ("setup",))
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    args = dict(setup=setup.name, duration=dur)
    if setup.probe_beam:
        beam = ctx.rig.beams[setup.probe_beam]
        out = ctx.output_for(beam.power_channel, path)
        power = ctx.q(spec, "probe_power", path, out.phys_unit or "W", positive=True) if "probe_power" in spec else (
            1.0 if out.kind == "digital" else None)
        if power is None:
            raise Bad(make(MISSING_KEY, "imaging needs 'probe_power:' for an analog probe channel", ctx.doc.pos(path),
                           block=ctx.block))
        ctx.pulse(out, t0, dur, power, 0.0, "image", path)
        args["probe_power"] = power
    exposure = ctx.q(spec, "exposure", path, "s", positive=True) if "exposure" in spec else dur
    args["exposure"] = exposure
    if setup.camera_channel:
        cam = ctx.output_for(setup.camera_channel, path)
        ctx.pulse(cam, t0, exposure, 1.0, 0.0, "image", path)
    if "detuning" in spec:
        args["detuning"] = ctx.q(spec, "detuning", path, "Hz")
    _phys(ctx, "image", t0, t0 + max(dur, exposure), path, **args)
    return t0 + max(dur, exposure)


def _do_magnetic_hold(ctx, spec, t0, path):
    """Hold the sample in a magnetic trap: each coil of `currents` goes to its current (at once, or ramped
    over `ramp_on`) and stays there for `duration`; the coils stay on afterwards (turn them off with
    `release: {coils: [...]}`). The physics checks read the trap from every coil's current at the hold start."""
    dur = ctx.q(spec, "duration", path, "s", positive=True)
    ramp_on = ctx.q(spec, "ramp_on", path, "s", positive=True) if "ramp_on" in spec else 0.0
    cpath = path + ("currents",)
    currents = []
    if ramp_on and "tolerance" in spec:  # each coil's ramp checks it in its own output unit: report it here
        for name in spec["currents"]:
            coil = ctx.rig.coils.get(str(name))
            out = ctx.rig.outputs.get(coil.current_channel) if coil is not None else None
            if out is not None:
                quantity(spec["tolerance"], out.unit, ctx.doc, path + ("tolerance",), ctx.env, positive=True,
                         what=f"tolerance of the ramp_on ramp of '{out.name}'")
    for name, raw in spec["currents"].items():
        name = str(name)
        coil = _named(ctx, ctx.rig.coils, "coil", name, cpath + (name,))
        out = ctx.output_for(coil.current_channel, cpath + (name,))
        amps = quantity(raw, "A", ctx.doc, cpath + (name,), ctx.env, what=f"current of coil '{name}'")
        if ramp_on:
            ramp = {"shape": spec.get("shape", "linear")}
            if "tolerance" in spec:  # of the ramp_on ramp, in the output unit, as a ramp's tolerance:
                ramp["tolerance"] = spec["tolerance"]
            ctx.ramp(out, ramp, t0, cpath + (name,), "magnetic_hold", None, amps, ramp_on)
        else:
            ctx.seg(out, "set", t0, t0, None, amps, "magnetic_hold", cpath + (name,))
        currents.append((coil.name, amps))
    args = dict(currents=tuple(currents), duration=dur, ramp_on=ramp_on)
    st = spec.get("state")
    if st:
        if abs(st["mF"]) > st["F"]:
            raise Bad(make(BAD_SAMPLE, f"state F={st['F']}, mF={st['mF']} is impossible (|mF| > F)",
                           ctx.doc.pos(path + ("state",)), block=ctx.block, hint="mF runs from -F to F"))
        args["state"] = (int(st["F"]), int(st["mF"]))
    _phys(ctx, "magnetic_hold", t0, t0 + ramp_on + dur, path, **args)
    return t0 + ramp_on + dur


_LOWER = {"set": _do_set, "ramp": _do_ramp, "sweep": _do_sweep, "pulse": _do_pulse, "hold": _do_hold,
          "trigger": _do_trigger, "trap_ramp": _do_trap_ramp, "release": _do_release, "push": _do_push,
          "barrier": _do_barrier, "clock_pulse": _do_clock_pulse, "separate": _do_separate, "image": _do_image,
          "magnetic_hold": _do_magnetic_hold}
ACTION_KINDS = tuple(_LOWER)


def _fill_values(segments: list[dict], rig) -> list[Segment]:
    """Fill ramp start values and pulse ends from what the output held before."""
    by_out: dict[str, list] = {}
    for i, s in enumerate(segments):
        by_out.setdefault(s["output"], []).append((s["t0"], 0 if s["kind"] == "set" and s["action"].endswith(":end") else 1, i, s))
    out_segments = []
    for name in sorted(by_out):
        current = rig.outputs[name].safe
        before_pulse = current
        for _, _, _, s in sorted(by_out[name], key=lambda x: (x[0], x[1], x[2])):
            s = dict(s)
            if s["kind"] == "ramp":
                if s["v0"] is None:
                    s["v0"] = current
            elif s["action"].endswith(":end"):
                if s["v1"] is None:
                    s["v1"] = before_pulse
            else:
                before_pulse = current
            current = s["v1"]
            out_segments.append(Segment(**s))
    return out_segments
