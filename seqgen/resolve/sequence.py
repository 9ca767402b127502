"""Sources -> one resolved `Shot`: the resolve stage, stringing its parts together.

`resolve` takes `Sources` already loaded and validated (`seqgen.resolve.sources`)
and reads nothing from disk: it builds the rig, resolves the params with any
overrides (`params`), lowers each block's actions to channel segments relative
to the block start (`actions`), places the blocks through the anchor graph and
fills in ramp start values and pulse ends in time order per output (`place`).
"""

from __future__ import annotations

import difflib
import gc
import math

from ..codes import EMPTY_SEQUENCE, OVERFLOW, UNKNOWN_BLOCK
from ..findings import Finding, make
from ..model import Accept, Block, Limits, PhysAction, Shot
from .actions import lower_block
from .params import read_sample, resolve_params
from .place import anchor_block, anchor_text, collect_blocks, fill_values, place_blocks
from .rig import build_rig
from .sources import Sources

__all__ = ["resolve"]


def resolve(src: Sources, overrides: dict | None = None) -> tuple[Shot | None, list[Finding]]:
    """Resolve validated sources into a shot. `overrides`: param name -> value replacing the param's: a Qty
    (scans), a text with units ('12 ms') or a number in SI units; a bad one is a finding.

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
    params, env = resolve_params(src, overrides, findings)
    if params is None:
        return None, findings
    sample = read_sample(src.main, env, findings)
    limits = Limits(**(src.main.data.get("limits") or {}))
    blocks_raw, seen = collect_blocks(src, findings)
    if not any(b.get("actions") for b, *_ in blocks_raw):
        findings.append(make(EMPTY_SEQUENCE, "the sequence has no actions", src.main.pos(("blocks",)),
                             hint="add a block with at least one action"))
        return None, findings
    lowered = [lower_block(b, d, path, rig, env, findings) for b, d, path in blocks_raw]
    placed = place_blocks(blocks_raw, lowered, env, findings)
    if placed is None or any(f.severity == "error" for f in findings):
        return None, findings
    segments, phys, blocks = [], [], []
    for (b, d, path), low, start in zip(blocks_raw, lowered, placed):
        dur, segs, acts = low
        blocks.append(Block(b["name"], start, start + dur, d.pos(path), anchor_text(b), anchor_block(b)))
        for s in segs:
            segments.append(dict(s, t0=s["t0"] + start, t1=s["t1"] + start))
        for a in acts:
            phys.append(PhysAction(a["kind"], b["name"], a["t0"] + start, a["t1"] + start, a["args"], a["pos"], len(phys)))
    final_segments = fill_values(segments, rig)
    accepts = _accepts(src, seen, findings)
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


def _accepts(src: Sources, seen: dict, findings: list) -> list[Accept]:
    """The main file's `accept:` entries; one naming a block the sequence lacks is reported."""
    accepts = []
    for i, a in enumerate(src.main.data.get("accept") or []):
        pos = src.main.pos(("accept", i))
        if a.get("block") and a["block"] not in seen:
            close = difflib.get_close_matches(a["block"], list(seen), n=1)
            findings.append(make(UNKNOWN_BLOCK, f"acceptance names unknown block '{a['block']}'", pos,
                                 hint=f"did you mean '{close[0]}'?" if close else "name an existing block"))
        accepts.append(Accept(a["code"], a.get("block"), a["reason"], pos))
    return accepts
