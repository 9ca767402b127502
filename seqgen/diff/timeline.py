"""Resolved level: params, settings, blocks (added, removed, renamed), timing shifts
with their cause along the anchor chain, and changed writes and actions per block.

Everything is compared on resolved values (SI floats), never on text, so that
whitespace, comments, key order and equivalent units ("1 ms" / "1000 us") make
no difference.
"""

from __future__ import annotations

import difflib
import re
from dataclasses import dataclass, field, fields

from . import fmt
from .model import Change, Version

_IDENT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_ANCHOR = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:([+-])\s*(.+?))?\s*$")
# values under these keys name rig things or blocks, not params
_NAME_KEYS = {"name", "after", "with", "channel", "beam", "beams", "coil", "coils", "drive", "setup", "shape",
              "envelope", "expect", "file"}
RENAME_MIN_SIMILARITY = 0.6
CHAIN_MAX = 12  # names listed in a shift's anchor chain before '...' and its end
RENAME_MAX_PAIRS = 40_000  # above this many (removed x added) pairs, only identical blocks count as renamed

# display units of physics-action arguments (SI floats in PhysAction.args)
_ARG_UNITS = {"duration": "s", "exposure": "s", "gradient": "T/m", "power": "W", "probe_power": "W", "to": "W",
              "start": "W", "frequency": "Hz", "mod_frequency": "Hz", "detuning": "Hz", "expect_velocity": "m/s",
              "position": "m", "target_distance": "m"}


@dataclass
class BlockView:
    name: str
    start: float
    end: float
    kind: str  # at | after | with | previous
    ref: str | None
    offset: float
    anchor: str  # as written, e.g. "after kick + 3 ms"
    line: int
    file: str
    uses: set = field(default_factory=set)  # param names the block's actions use (transitively)
    anchor_uses: set = field(default_factory=set)  # param names in its anchor (transitively)
    writes: dict = field(default_factory=dict)  # output -> list of write records (relative to start)
    actions: list = field(default_factory=list)  # physics actions (kind, args)

    @property
    def duration(self) -> float:
        return self.end - self.start

    def structure(self) -> list:
        """What the block does, without its numbers: outputs, write kinds, action kinds."""
        sig = [("anchor", self.kind)]
        for out, recs in sorted(self.writes.items()):
            sig += [(out, r["kind"], r["action"]) for r in recs]
        sig += [("action", k) + tuple(sorted(args)) for k, args in self.actions]
        return sig

    def signature(self) -> list:
        sig = [("anchor", self.kind), ("duration", round(self.duration, 9))]
        for out, recs in sorted(self.writes.items()):
            sig += [(out,) + tuple(_rounded(r[k]) for k in ("kind", "action", "start", "duration", "to", "shape"))
                    for r in recs]
        sig += [("action", k) + tuple(sorted((a, _rounded(v)) for a, v in args.items())) for k, args in self.actions]
        return sig


def _rounded(v):
    if isinstance(v, float):
        return float(f"{v:.9g}")
    if isinstance(v, (tuple, list)):
        return tuple(_rounded(x) for x in v)
    return v


def _idents(text, params) -> set:
    if not isinstance(text, str):
        return set()
    return {w for w in _IDENT.findall(text) if w in params}


def _closure(names: set, deps: dict) -> set:
    out, todo = set(), list(names)
    while todo:
        n = todo.pop()
        if n in out:
            continue
        out.add(n)
        todo.extend(deps.get(n, ()))
    return out


def _leaves(node, key=None):
    if isinstance(node, dict):
        for k, v in node.items():
            if k not in _NAME_KEYS:
                yield from _leaves(v, k)
    elif isinstance(node, list):
        for v in node:
            yield from _leaves(v, key)
    elif isinstance(node, str):
        yield node


def _raw_blocks(sources) -> dict:
    """Block name -> raw mapping as written (first definition wins, as in resolve)."""
    out = {}
    if sources is None:
        return out
    docs = [d for d, *_ in sources.used] + [sources.main]
    for d in docs:
        for b in (d.data.get("blocks") if isinstance(d.data, dict) else None) or []:
            if isinstance(b, dict) and isinstance(b.get("name"), str):
                out.setdefault(b["name"], b)
    return out


def param_deps(version: Version) -> dict:
    names = set(version.params)
    return {n: _idents(text, names) - {n} for n, (_, _, text) in version.params.items()}


def block_views(version: Version, param_names: set) -> dict:
    shot = version.shot
    deps = param_deps(version)
    raw = _raw_blocks(version.sources)
    blocks = {b.name: b for b in shot.blocks}
    by_file_line: dict = {}  # block name -> the block before it in its file
    ordered = sorted(shot.blocks, key=lambda b: (b.pos.file, b.pos.line))
    for x, y in zip(ordered, ordered[1:]):
        if x.pos.file == y.pos.file:
            by_file_line[y.name] = x
    views = {}
    for b in shot.blocks:
        kind, rest = (b.anchor.split(" ", 1) + [""])[:2]
        ref = b.anchor_block
        if b.anchor == "after previous":
            kind, ref = "previous", _previous(b, by_file_line, blocks)
        if kind in ("after", "previous") and ref in blocks:
            offset = b.start_s - blocks[ref].end_s
        elif kind == "with" and ref in blocks:
            offset = b.start_s - blocks[ref].start_s
        else:
            kind, ref, offset = ("at" if kind != "previous" else "previous"), None, b.start_s
        anchor_text = rest
        if kind in ("after", "with"):
            m = _ANCHOR.match(rest)
            anchor_text = (m.group(3) or "") if m else rest
        rb = raw.get(b.name, {})
        uses = set()
        for leaf in _leaves(rb.get("actions") or []):
            uses |= _idents(leaf, param_names)
        views[b.name] = BlockView(b.name, b.start_s, b.end_s, kind, ref, offset, b.anchor, b.pos.line, b.pos.file,
                                  _closure(uses, deps), _closure(_idents(anchor_text, param_names), deps))
    for s in shot.segments:
        v = views.get(s.block)
        if v is None:
            continue
        v.writes.setdefault(s.output, []).append({
            "kind": s.kind, "action": s.action, "start": s.t0 - v.start, "duration": s.t1 - s.t0,
            "from": s.v0, "to": s.v1, "shape": s.shape if s.kind == "ramp" else None, "tau": s.tau_s,
            "table": s.table, "line": s.pos.line})
    for out_recs in (v.writes for v in views.values()):
        for recs in out_recs.values():
            recs.sort(key=lambda r: (r["start"], 0 if r["action"].endswith(":end") else 1))
    for a in sorted(shot.phys, key=lambda a: a.index):
        v = views.get(a.block)
        if v is not None:
            v.actions.append((a.kind, {k: val for k, val in a.args.items() if k != "output"}))
    return views


def _previous(b, by_file_line, blocks):
    """The block a block without an anchor follows (the one before it in its file, else one ending at its start)."""
    before = by_file_line.get(b.name)
    tol = 1e-12 + 1e-12 * abs(b.start_s)
    if before is not None and abs(before.end_s - b.start_s) <= tol:
        return before.name
    ending = [x for x in blocks.values() if x.name != b.name and abs(x.end_s - b.start_s) <= tol]
    return ending[-1].name if ending else (before.name if before is not None else None)


# ----------------------------------------------------------------------------- params and settings


def param_changes(old: Version, new: Version) -> tuple[list, set]:
    """Param entries and the set of names whose value changed (or that appeared / went away)."""
    changes, changed = [], set()
    deps_new, deps_old = param_deps(new), param_deps(old)
    for name in sorted(set(old.params) | set(new.params)):
        a, b = old.params.get(name), new.params.get(name)
        if a is None:
            changed.add(name)
            changes.append(Change("resolved", "param-added", name, f"param {name} added: {b[2]} ({fmt.q(b[0], b[1])})",
                                  None, b[2], 55, {"new": {"value": b[0], "unit": b[1], "text": b[2]}}))
        elif b is None:
            changed.add(name)
            changes.append(Change("resolved", "param-removed", name, f"param {name} removed (was {a[2]})",
                                  a[2], None, 55, {"old": {"value": a[0], "unit": a[1], "text": a[2]}}))
        elif not (fmt.close(a[0], b[0], abs_tol=1e-300) and a[1] == b[1]):
            changed.add(name)
    for name in sorted(changed & set(old.params) & set(new.params)):
        a, b = old.params[name], new.params[name]
        via = sorted((deps_new.get(name, set()) | deps_old.get(name, set())) & changed)
        written = f"{a[2]} -> {b[2]}" if a[2] != b[2] else f"{a[2]} (unchanged text)"
        va_s, vb_s = fmt.pair(a[0], b[0], a[1] if a[1] == b[1] else "")
        if a[1] != b[1]:
            va_s, vb_s = fmt.q(a[0], a[1]), fmt.q(b[0], b[1])
        values = f"{va_s} -> {vb_s}"
        simple = all(_is_plain_quantity(x[2]) for x in (a, b))
        msg = f"param {name}: {written}" + ("" if simple or values == written else f" = {values}")
        if via:
            msg += f" (via {', '.join(via)})"
        data = {"old": {"value": a[0], "unit": a[1], "text": a[2]}, "new": {"value": b[0], "unit": b[1], "text": b[2]},
                "via": via, "edited": a[2] != b[2]}
        changes.append(Change("resolved", "param-changed", name, msg, fmt.q(a[0], a[1]), fmt.q(b[0], b[1]),
                              60 if a[2] != b[2] else 52, data))
    return changes, changed


def bound_changes(old: Version, new: Version, changed_params: set = frozenset()) -> list:
    """`min:` / `max:` of params in both versions: a bound added, removed, or with another value (compared on
    values: `1 ms` and `1000 us` are the same bound). Only between two sequence versions (a build folder records
    no bounds)."""
    if old.shot is None or new.shot is None:
        return []
    out = []
    for name in sorted(set(old.params) & set(new.params)):
        ba, bb = old.bounds.get(name, {}), new.bounds.get(name, {})
        unit = new.params[name][1]
        parts, data = [], {"old": {}, "new": {}, "unit": unit}
        for key in ("min", "max"):
            a, b = ba.get(key), bb.get(key)
            data["old"][key] = None if a is None else {"text": a[0], "value": a[1]}
            data["new"][key] = None if b is None else {"text": b[0], "value": b[1]}
            if a is None and b is None:
                continue
            if a is None:
                parts.append(f"{key}: {_bound_text(b, unit)} added")
            elif b is None:
                parts.append(f"{key}: {_bound_text(a, unit)} removed")
            elif a[1] is None or b[1] is None:
                if a[0] != b[0]:
                    parts.append(f"{key}: {a[0]} -> {b[0]}")
            elif not fmt.close(a[1], b[1], abs_tol=1e-300):
                if a[0] == b[0]:
                    via = sorted(_idents(a[0], set(new.params)) & changed_params)
                    va, vb = fmt.pair(a[1], b[1], unit)
                    parts.append(f"{key}: {a[0]} = {va} -> {vb}" + (f" (via {', '.join(via)})" if via else ""))
                else:
                    parts.append(f"{key}: {_bound_text(a, unit)} -> {_bound_text(b, unit)}")
        if parts:
            shown = lambda bd: ", ".join(f"{k}: {_bound_text(bd[k], unit)}" for k in ("min", "max") if k in bd) or "none"  # noqa: E731
            out.append(Change("resolved", "param-bounds", name, f"param {name} bounds: " + "; ".join(parts),
                              shown(ba), shown(bb), 50, data))
    return out


def _bound_text(bound, unit: str) -> str:
    """'1 ms', or '2 * tof = 10 ms' for a bound computed from other params."""
    text, value = bound
    if value is None or _is_plain_quantity(text):
        return text
    return f"{text} = {fmt.q(value, unit)}"


def _is_plain_quantity(text) -> bool:
    from ..resolve.units import UnitError, parse_simple

    try:
        return parse_simple(str(text)) is not None
    except UnitError:
        return False


def _plain(obj) -> dict:
    if obj is None:
        return {}
    return {f.name: getattr(obj, f.name) for f in fields(obj) if f.name != "pos"}


def setting_changes(old, new) -> list:
    """Sample, limits, acceptances and outputs left on at the end."""
    out = []
    for subject, a, b in (("sample", _plain(old.sample), _plain(new.sample)),
                          ("limits", _plain(old.limits), _plain(new.limits))):
        for key in sorted(set(a) | set(b)):
            if not fmt.close(a.get(key), b.get(key)):
                out.append(Change("resolved", "setting-changed", f"{subject}.{key}",
                                  f"{subject} {key}: {fmt.q(a.get(key))} -> {fmt.q(b.get(key))}",
                                  fmt.q(a.get(key)), fmt.q(b.get(key)), 45, {"old": _json(a.get(key)), "new": _json(b.get(key))}))
    acc_a = {(x.code, x.block): x.reason for x in old.accepts}
    acc_b = {(x.code, x.block): x.reason for x in new.accepts}
    for key in sorted(set(acc_a) | set(acc_b), key=lambda k: (k[0], k[1] or "")):
        if acc_a.get(key) != acc_b.get(key):
            subj = f"accept {key[0]}" + (f" [{key[1]}]" if key[1] else "")
            what = "added" if key not in acc_a else ("removed" if key not in acc_b else "reason changed")
            out.append(Change("resolved", "setting-changed", subj, f"acceptance {key[0]}"
                              + (f" [{key[1]}]" if key[1] else "") + f" {what}", acc_a.get(key), acc_b.get(key), 40,
                              {"code": key[0], "block": key[1]}))
    if set(old.leave_on) != set(new.leave_on):
        out.append(Change("resolved", "setting-changed", "end.leave_on",
                          f"outputs left on at the end: {sorted(old.leave_on)} -> {sorted(new.leave_on)}",
                          ", ".join(sorted(old.leave_on)), ", ".join(sorted(new.leave_on)), 45))
    return out


def _json(v):
    if isinstance(v, tuple):
        return [_json(x) for x in v]
    return v


# ----------------------------------------------------------------------------- blocks


def match_blocks(va: dict, vb: dict) -> tuple[dict, dict]:
    """(old name -> new name for every matched block, renames only)."""
    pairs = {n: n for n in va if n in vb}
    lone_a = [n for n in va if n not in vb]
    lone_b = [n for n in vb if n not in va]
    renames = {}
    if lone_a and lone_b and len(lone_a) * len(lone_b) > RENAME_MAX_PAIRS:
        # too many to score pairwise: pair blocks that do exactly the same thing, in file order
        by_sig: dict = {}
        for b in lone_b:
            by_sig.setdefault(tuple(vb[b].signature()), []).append(b)
        for a in lone_a:
            cands = by_sig.get(tuple(va[a].signature()))
            if cands:
                renames[a] = cands.pop(0)
    elif lone_a and lone_b:
        scored = []
        for a in lone_a:
            sa, ta = va[a].signature(), va[a].structure()
            for b in lone_b:
                # half for doing the same kind of thing, half for doing it with the same numbers
                r = 0.5 * (difflib.SequenceMatcher(None, ta, vb[b].structure(), autojunk=False).ratio()
                           + difflib.SequenceMatcher(None, sa, vb[b].signature(), autojunk=False).ratio())
                if r >= RENAME_MIN_SIMILARITY:
                    scored.append((-r, abs(va[a].line - vb[b].line), a, b))
        used_a, used_b = set(), set()
        for negr, _, a, b in sorted(scored):
            if a in used_a or b in used_b:
                continue
            used_a.add(a)
            used_b.add(b)
            renames[a] = b
    pairs.update(renames)
    return pairs, renames


def block_changes(old: Version, new: Version, changed_params: set) -> tuple[list, dict]:
    names = set(old.params) | set(new.params)
    va, vb = block_views(old, names), block_views(new, names)
    pairs, renames = match_blocks(va, vb)
    back = {b: a for a, b in pairs.items()}
    out = []
    for a, b in sorted(renames.items()):
        out.append(Change("resolved", "block-renamed", b, f"block {a} renamed to {b}", a, b, 58,
                          {"old_name": a, "new_name": b}))
    for a in sorted(set(va) - set(pairs), key=lambda n: va[n].start):
        x = va[a]
        out.append(Change("resolved", "block-removed", a, f"block {a} removed (was {fmt.t(x.start)} .. {fmt.t(x.end)})",
                          f"{fmt.t(x.start)} .. {fmt.t(x.end)}", None, 80, {"start_s": x.start, "end_s": x.end}))
    for b in sorted(set(vb) - set(back), key=lambda n: vb[n].start):
        x = vb[b]
        out.append(Change("resolved", "block-added", b, f"block {b} added at {fmt.t(x.start)} .. {fmt.t(x.end)} ({x.anchor})",
                          None, f"{fmt.t(x.start)} .. {fmt.t(x.end)}", 80, {"start_s": x.start, "end_s": x.end}))
    out += _timing(va, vb, pairs, back, changed_params)
    for a, b in pairs.items():
        out += _writes(va[a], vb[b], new.shot.rig.outputs, old.shot.rig.outputs)
        out += _actions(va[a], vb[b])
    return out, renames


def _anchor_same(xa: BlockView, xb: BlockView, pairs: dict) -> bool:
    if xa.kind != xb.kind:
        return False
    if xa.kind in ("after", "with", "previous") and pairs.get(xa.ref) != xb.ref:
        return False
    return fmt.close_t(xa.offset, xb.offset)


def _timing(va, vb, pairs, back, changed_params) -> list:
    """Start shifts (with the cause: this block's own anchor, or upstream) and duration changes."""
    memo: dict = {}

    def dur_changed(b):
        a = back.get(b)
        return a is not None and not fmt.close_t(va[a].duration, vb[b].duration)

    def start_moved(b):
        a = back.get(b)
        return a is not None and not fmt.close_t(va[a].start, vb[b].start)

    def own(b):
        """(causes found at b itself, the block b's start depends on or None)."""
        xa, xb = va[back[b]], vb[b]
        anchor_cause = [(b, "anchor", sorted(xb.anchor_uses & changed_params))]
        if not _anchor_same(xa, xb, pairs) or xb.ref is None or xb.ref not in back:
            return anchor_cause, None
        ref = xb.ref
        causes = []
        if xb.kind in ("after", "previous") and dur_changed(ref):
            causes.append((ref, "duration", sorted(vb[ref].uses & changed_params)))
        if start_moved(ref):
            return causes, ref
        return (causes or anchor_cause), None

    def roots(b):
        """Causes of block b's start moving, (block, reason, params), and the chain from b to the first cause
        (at most CHAIN_MAX names: the first ones, '...', the last). Iterative: anchor chains can be thousands
        of blocks long."""
        path = []
        node = b
        while node not in memo:
            if node in path:  # cannot happen for a resolved shot (anchor cycles are refused); be safe
                memo[node] = ([(node, "anchor", [])], None, [node])
                break
            path.append(node)
            causes, up = own(node)
            if up is None:
                memo[node] = (causes, None, [node] + ([causes[0][0]] if causes and causes[0][0] != node else []))
                path.pop()
                break
            node = up
        for n in reversed(path):
            causes, up = own(n)
            up_causes, _, up_end = memo[up]
            memo[n] = (up_causes + [c for c in causes if c not in up_causes], up, up_end)
        causes, _, end = memo[b]
        chain, n = [], b
        while n is not None and len(chain) < CHAIN_MAX:
            chain.append(n)
            n = memo[n][1]
        if n is not None:  # long chain: skip to its end
            if end[0] not in chain:
                chain.append("...")
            chain += [x for x in end if x not in chain]
        else:
            chain += [x for x in end if x not in chain]
        return causes, chain

    out = []
    for b in sorted(back, key=lambda n: (vb[n].start, n)):
        a = back[b]
        xa, xb = va[a], vb[b]
        if start_moved(b):
            causes, chain = roots(b)
            direct = any(c[0] == b for c in causes)
            params = sorted({p for c in causes for p in c[2]})
            by = []
            for blk, why, ps in causes:
                if blk == b:
                    by.append(f"its anchor ({xa.anchor} -> {xb.anchor})" if xa.anchor != xb.anchor
                              else f"its anchor offset ({fmt.t(xa.offset)} -> {fmt.t(xb.offset)})")
                elif why == "duration":
                    by.append(f"{blk} (duration {fmt.t(va[back[blk]].duration)} -> {fmt.t(vb[blk].duration)})")
                else:
                    by.append(f"{blk} (anchor)")
                if ps:
                    by[-1] += " [param " + ", ".join(ps) + "]"
            shift = xb.start - xa.start
            msg = (f"block {b} starts {fmt.dt(shift)}: {fmt.t(xa.start)} -> {fmt.t(xb.start)}, ends "
                   f"{fmt.t(xa.end)} -> {fmt.t(xb.end)}; ")
            msg += ("edited: " if direct else "upstream: ") + "; ".join(by)
            if not direct and len(chain) > 1:
                msg += " (via " + " <- ".join(chain) + ")"
            out.append(Change("resolved", "block-shifted", b, msg, fmt.t(xa.start), fmt.t(xb.start),
                              (50 if direct else 30) + min(10.0, abs(shift) * 1e3),
                              {"start_old_s": xa.start, "start_new_s": xb.start, "end_old_s": xa.end, "end_new_s": xb.end,
                               "shift_s": shift, "cause": "edited" if direct else "upstream",
                               "caused_by": sorted({c[0] for c in causes}), "params": params, "chain": chain}))
        if dur_changed(b):
            params = sorted(xb.uses & changed_params)
            msg = (f"block {b} lasts {fmt.t(xa.duration)} -> {fmt.t(xb.duration)} ({fmt.dt(xb.duration - xa.duration)}), "
                   f"ends {fmt.t(xa.end)} -> {fmt.t(xb.end)}") + (f" [param {', '.join(params)}]" if params else "")
            out.append(Change("resolved", "block-duration", b, msg, fmt.t(xa.duration), fmt.t(xb.duration), 48,
                              {"duration_old_s": xa.duration, "duration_new_s": xb.duration, "end_old_s": xa.end,
                               "end_new_s": xb.end, "params": params}))
    return out


_WRITE_FIELDS = (("action", None), ("start", "s"), ("duration", "s"), ("from", "phys"), ("to", "phys"),
                 ("shape", None), ("tau", "s"), ("table", None))


def _writes(xa: BlockView, xb: BlockView, outs_new, outs_old) -> list:
    out = []
    block = xb.name
    for output in sorted(set(xa.writes) | set(xb.writes)):
        ra, rb = xa.writes.get(output, []), xb.writes.get(output, [])
        o = outs_new.get(output) or outs_old.get(output)
        unit = o.phys_unit if o is not None else ""
        key = lambda r: (r["kind"], r["action"])  # noqa: E731
        sm = difflib.SequenceMatcher(None, [key(r) for r in ra], [key(r) for r in rb], autojunk=False)
        for tag, i1, i2, j1, j2 in sm.get_opcodes():
            pa, pb = ra[i1:i2], rb[j1:j2]
            for r1, r2 in zip(pa, pb):
                diffs = {}
                for name, u in _WRITE_FIELDS:
                    v1, v2 = r1[name], r2[name]
                    same = fmt.close_t(v1, v2) if u == "s" and v1 is not None and v2 is not None else fmt.close(v1, v2, abs_tol=1e-15)
                    if not same:
                        diffs[name] = (v1, v2, unit if u == "phys" else u)
                if diffs:
                    text = "; ".join(f"{n} {' -> '.join(_fv2(v1, v2, u))}" for n, (v1, v2, u) in diffs.items())
                    out.append(Change("resolved", "write-changed", f"{block}/{output}",
                                      f"{block}: {r2['action']} on {output}: {text}",
                                      None, None, 40, {"block": block, "output": output, "action": r2["action"],
                                                       "fields": {n: [_json(v1), _json(v2)] for n, (v1, v2, _) in diffs.items()}}))
            for r in pa[len(pb):]:
                out.append(Change("resolved", "write-removed", f"{block}/{output}",
                                  f"{block}: {r['action']} on {output} removed ({_describe(r, unit)})", _describe(r, unit), None,
                                  42, {"block": block, "output": output, "action": r["action"]}))
            for r in pb[len(pa):]:
                out.append(Change("resolved", "write-added", f"{block}/{output}",
                                  f"{block}: {r['action']} on {output} added ({_describe(r, unit)})", None, _describe(r, unit),
                                  42, {"block": block, "output": output, "action": r["action"]}))
    return out


def _fv2(v1, v2, unit):
    if unit == "s" and isinstance(v1, float) and isinstance(v2, float):
        return fmt.t(v1), fmt.t(v2)
    return fmt.pair(v1, v2, unit or "")


def _fv(v, unit):
    if unit == "s" and isinstance(v, float):
        return fmt.t(v)
    return fmt.q(v, unit or "")


def _describe(r, unit) -> str:
    at = f"at +{fmt.t(r['start'])}"
    if r["kind"] == "ramp":
        return f"{at}: ramp {fmt.q(r['from'], unit)} -> {fmt.q(r['to'], unit)} over {fmt.t(r['duration'])} ({r['shape']})"
    return f"{at}: set {fmt.q(r['to'], unit)}"


def _actions(xa: BlockView, xb: BlockView) -> list:
    out = []
    block = xb.name
    ka, kb = [_action_id(k, a) for k, a in xa.actions], [_action_id(k, a) for k, a in xb.actions]
    sm = difflib.SequenceMatcher(None, ka, kb, autojunk=False)
    for tag, i1, i2, j1, j2 in sm.get_opcodes():
        pa, pb = xa.actions[i1:i2], xb.actions[j1:j2]
        for (k1, a1), (k2, a2), n2 in zip(pa, pb, kb[j1:j2]):
            diffs = {n: (a1.get(n), a2.get(n)) for n in sorted(set(a1) | set(a2)) if not fmt.close(a1.get(n), a2.get(n), abs_tol=1e-15)}
            if k1 != k2:
                diffs = {"kind": (k1, k2), **diffs}
            if diffs:
                text = "; ".join(f"{n} {' -> '.join(fmt.pair(v1, v2, _ARG_UNITS.get(n, '')))}"
                                 for n, (v1, v2) in diffs.items())
                out.append(Change("resolved", "action-changed", f"{block}/{n2}", f"{block}: {n2}: {text}", None, None, 44,
                                  {"block": block, "action": k2,
                                   "fields": {n: [_json(v1), _json(v2)] for n, (v1, v2) in diffs.items()}}))
        for (k, _), n in zip(pa[len(pb):], ka[i1 + len(pb):i2]):
            out.append(Change("resolved", "action-removed", f"{block}/{n}", f"{block}: {n} removed", n, None, 46,
                              {"block": block, "action": k}))
        for (k, _), n in zip(pb[len(pa):], kb[j1 + len(pa):j2]):
            out.append(Change("resolved", "action-added", f"{block}/{n}", f"{block}: {n} added", None, n, 46,
                              {"block": block, "action": k}))
    return out


def _action_id(kind: str, args: dict) -> str:
    """'trap_ramp cross_a': the action kind and the rig thing it drives (to tell two actions of a block apart)."""
    for key in ("beam", "coil", "drive", "setup"):
        if isinstance(args.get(key), str):
            return f"{kind} {args[key]}"
    return kind
