"""Blocks on the timing graph: which blocks a sequence has, where each starts, and the values each
output holds in time order.

A block starts `at:` a time, `after:` or `with:` another block (plus an offset),
or right after the previous block in the file; the anchors form a graph
(`order.py`) whose topological order gives every start, and whose cycles are
reported.
"""

from __future__ import annotations

import difflib
import re


from ..codes import ANCHOR_CYCLE, BAD_ANCHOR, DUPLICATE_BLOCK, UNKNOWN_BLOCK
from ..findings import SourcePos, make
from ..model import Segment
from .order import DepGraph
from .quantities import Bad, quantity
from .sources import Sources


def collect_blocks(src: Sources, findings: list) -> tuple[list, dict]:
    """(blocks, seen): (block mapping, Document, path) of every block in order (used files first, only the
    blocks a `use:` entry asks for), and name -> position of its definition. A second definition is reported."""
    blocks_raw = []
    seen: dict[str, SourcePos] = {}
    for d in [d for d, *_ in src.used] + [src.main]:
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
    return blocks_raw, seen


_ANCHOR = re.compile(r"^\s*([A-Za-z_][A-Za-z0-9_]*)\s*(?:([+-])\s*(.+?))?\s*$")


def anchor_text(b) -> str:
    for k in ("at", "after", "with"):
        if k in b:
            return f"{k} {b[k]}"
    return "after previous"


def anchor_block(b) -> str | None:
    for k in ("after", "with"):
        if k in b and isinstance(b[k], str):
            m = _ANCHOR.match(b[k])
            if m:
                return m.group(1)
    return None


def place_blocks(blocks_raw, lowered, env, findings):
    """Start time of every block, through the anchor graph; None on failure."""
    names = [b["name"] for b, *_ in blocks_raw]
    index = {n: i for i, n in enumerate(names)}
    graph = DepGraph()
    for n in names:
        graph.add_node(n)
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
    order = graph.order()
    if order is None:
        cycle = graph.find_cycle()
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


def fill_values(segments: list[dict], rig) -> list[Segment]:
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
