"""Scan expansion: the `scan:` of params (and the top-level `scan:` options) -> an ordered list of shot points.

A param may carry a scan:

    tof:  {value: 14 ms, scan: [10 ms, 12 ms, 16 ms]}                      # a list
    tof:  {value: 14 ms, scan: {values: [10 ms, 12 ms], group: g1}}        # a list in a zipped group
    hold: {value: 5 ms, scan: {from: 1 ms, to: 10 ms, steps: 10}}          # linear range (ends included;
                                                                           # steps: 1 only if from == to)
    rate: {value: 1 kHz, scan: {from: 10 Hz, to: 10 kHz, steps: 7, spacing: log}}
    det:  {value: 0 Hz, scan: {from: -2 kHz, to: 2 kHz, random: 20, seed: 7}}  # random set, reproducible

Params whose scans share a `group` advance in lockstep (zipped; equal lengths
required); separate params or groups combine as a grid (outer product, the
first written varies slowest, as nested loops). The top-level `scan:` mapping
sets `combine: grid | zip` (zip: every scanned param in one lockstep group),
`nest: [outermost, ...]` (grid nesting by param or group name),
`order: written | shuffled` with `seed:` and `max_shots:`.

Random draws and the shuffled order depend only on the seed and are the same on
every machine and version: the k-th random number of a set is the first 8 bytes
of sha256("seqgen-random:<seed>:<k>") read as a big-endian integer divided by
2**64; the shuffled order sorts the shots by sha256("seqgen-order:<seed>:<i>").

Every scan value is checked against the dimension of the param's base value.
A param's `min:` / `max:` bounds are checked per shot, when the shot is resolved
with its scan values (seqgen/resolve/sequence.py), so a shot beyond them fails
with schema.param-out-of-range and the other shots run.
The result is a `ScanPlan` (immutable); `ScanPlan.overrides(i)` is the
`name -> Qty` mapping that `resolve(src, overrides)` takes for shot i.
"""

from __future__ import annotations

import difflib
import hashlib
import itertools
import math
from dataclasses import dataclass

from ..findings import Finding, SourcePos, make
from .quantities import Bad, to_qty
from .units import DIMENSIONLESS, Qty, close_units, describe_kind, display_unit, format_value, kind_units, same_dims, \
    split_quantity, usual_unit
from ..codes import BAD_SCAN, MISSING_UNIT, SCAN_LENGTH_MISMATCH, SCAN_TOO_LARGE, WRONG_DIMENSION

DEFAULT_MAX_SHOTS = 100_000



@dataclass(frozen=True)
class ScanAxis:
    """One scanned param: its values (SI, the base value's dimension), in written order."""

    name: str
    values: tuple  # of Qty
    group: str | None
    kind: str  # "list" | "linear" | "log" | "random"
    pos: SourcePos

    @property
    def unit(self) -> str:
        return display_unit(self.values[0].dims) if self.values else ""

    def describe(self) -> str:
        vals = [format_value(q.value, self.unit) for q in self.values]
        if len(vals) <= 4:
            body = ", ".join(vals)
        else:
            body = f"{vals[0]} .. {vals[-1]}"
        extra = {"linear": "", "list": "", "log": ", log", "random": ", random"}[self.kind]
        return f"{self.name} {body} ({len(vals)} value{'' if len(vals) == 1 else 's'}{extra})"


@dataclass(frozen=True)
class ScanPlan:
    """The shots of a scan in the order they run. points[i][k] is the value of names[k] in shot i."""

    axes: tuple  # of ScanAxis, written order
    names: tuple  # param names, written order
    points: tuple  # of tuples of Qty
    written_index: tuple  # for each shot, its index in written (unshuffled) order
    combine: str  # "grid" | "zip"
    nest: tuple  # group keys, outermost first (a key is a group name or a lone param's name)
    order: str  # "written" | "shuffled"
    seed: int | None

    def __len__(self) -> int:
        return len(self.points)

    def overrides(self, i: int) -> dict:
        return dict(zip(self.names, self.points[i]))

    def axis(self, name: str) -> ScanAxis:
        return next(a for a in self.axes if a.name == name)

    def describe(self) -> str:
        axes = "; ".join(a.describe() for a in self.axes)
        how = "lockstep" if len(self.nest) == 1 and len(self.axes) > 1 else self.combine
        order = f"shuffled (seed {self.seed})" if self.order == "shuffled" else "written order"
        return f"{axes}; {how}, {order}"

    def fingerprint(self) -> str:
        """sha256 of everything that defines the plan (names, exact values, order)."""
        h = hashlib.sha256()
        h.update(repr((self.names, self.combine, self.nest, self.order, self.seed)).encode())
        for pt in self.points:
            for q in pt:
                h.update(float(q.value).hex().encode())
                h.update(repr(q.dims).encode())
        return h.hexdigest()


def uniform_draws(seed: int, n: int, salt: str = "random") -> list[float]:
    """n numbers in [0, 1) from the seed (sha256-based; identical on every platform)."""
    out = []
    for k in range(n):
        d = hashlib.sha256(f"seqgen-{salt}:{seed}:{k}".encode()).digest()
        out.append(int.from_bytes(d[:8], "big") / 2.0 ** 64)
    return out


def shuffled_order(seed: int, n: int) -> list[int]:
    """A permutation of range(n) that depends only on the seed."""
    return sorted(range(n), key=lambda i: hashlib.sha256(f"seqgen-order:{seed}:{i}".encode()).digest())


def param_entries(src) -> dict:
    """name -> (raw, Document, path) of the param definition that wins (same rule as resolve:
    used files first, then their use-entry params, then the main file; later wins)."""
    entries: dict = {}
    for d, entry, parent, upath in src.used:
        for name, raw in ((d.data or {}).get("params") or {}).items():
            entries[name] = (raw, d, ("params", name))
        for name, raw in (entry.get("params") or {}).items():
            entries[name] = (raw, parent, upath + ("params", name))
    for name, raw in ((src.main.data or {}).get("params") or {}).items():
        entries[name] = (raw, src.main, ("params", name))
    return entries


def has_scans(src) -> bool:
    return any(isinstance(raw, dict) and raw.get("scan") is not None for raw, _, _ in param_entries(src).values())


def expand(src, base_shot) -> tuple[ScanPlan | None, list[Finding]]:
    """The scan plan of validated sources, or (None, []) when no param scans.

    `base_shot` is the shot resolved with the base values: it gives each
    param's dimension and the values other params' scan bounds may refer to.
    """
    findings: list[Finding] = []
    entries = param_entries(src)
    scanned = [(n, e) for n, e in entries.items() if isinstance(e[0], dict) and e[0].get("scan") is not None]
    if not scanned:
        return None, findings
    base = {p.name: p for p in base_shot.params}
    names_scanned = {n for n, _ in scanned}
    env = {n: Qty(p.value, p.dims) for n, p in base.items() if n not in names_scanned}
    opts = (src.main.data or {}).get("scan") or {}
    opts_pos = src.main.pos(("scan",))
    limit = int(opts.get("max_shots", DEFAULT_MAX_SHOTS))
    axes = []
    for name, (raw, doc, path) in scanned:
        p = base.get(name)
        dims = p.dims if p is not None else DIMENSIONLESS
        try:
            axes.append(_axis(name, raw["scan"], doc, path + ("scan",), dims, env, limit))
        except Bad as bad:
            findings.append(bad.finding)
    if findings:
        return None, findings
    combine = opts.get("combine", "grid")
    groups: dict[str, list[ScanAxis]] = {}
    for a in axes:
        key = "*" if combine == "zip" else (a.group or a.name)
        groups.setdefault(key, []).append(a)
    for key, members in groups.items():
        n0 = len(members[0].values)
        for a in members[1:]:
            if len(a.values) != n0:
                what = "every scanned param (combine: zip)" if key == "*" else f"group '{key}'"
                findings.append(make(SCAN_LENGTH_MISMATCH, f"'{a.name}' has {len(a.values)} scan values but "
                                     f"'{members[0].name}' has {n0}; {what} must advance in lockstep", a.pos,
                                     hint="give every member the same number of values, or use separate groups "
                                          "for a grid"))
    nest = list(groups)
    wanted = opts.get("nest") or []
    if wanted:
        alias = {}
        for key, members in groups.items():
            alias[key] = key
            for a in members:
                alias[a.name] = key
        front = []
        for i, w in enumerate(wanted):
            if w not in alias:
                close = difflib.get_close_matches(w, list(alias), n=1)
                findings.append(make(BAD_SCAN, f"scan nest names '{w}', which is no scanned param or group",
                                     src.main.pos(("scan", "nest", i)),
                                     hint=f"did you mean '{close[0]}'?" if close else "name scanned params or groups"))
            elif alias[w] not in front:
                front.append(alias[w])
        nest = front + [k for k in nest if k not in front]
    if findings:
        return None, findings
    total = math.prod(len(groups[k][0].values) for k in nest)
    if total > limit:
        sizes = " x ".join(str(len(groups[k][0].values)) for k in nest)
        return None, [make(SCAN_TOO_LARGE, f"the scan expands to {total} shots ({sizes}), more than max_shots {limit}",
                           opts_pos if opts else axes[0].pos, hint="check the step counts, or raise scan: {max_shots: ...}")]
    order_of = {a.name: i for i, a in enumerate(axes)}
    names = tuple(a.name for a in axes)
    written = []
    for combo in itertools.product(*(range(len(groups[k][0].values)) for k in nest)):
        pick = {}
        for key, j in zip(nest, combo):
            for a in groups[key]:
                pick[a.name] = a.values[j]
        written.append(tuple(pick[n] for n in sorted(pick, key=order_of.get)))
    order = opts.get("order", "written")
    seed = opts.get("seed")
    if order == "shuffled":
        if seed is None:
            return None, [make(BAD_SCAN, "scan order 'shuffled' needs a seed", opts_pos,
                               hint="add seed: <integer> to the top-level scan: so the order can be reproduced")]
        idx = shuffled_order(int(seed), len(written))
    else:
        idx = list(range(len(written)))
    plan = ScanPlan(tuple(axes), names, tuple(written[i] for i in idx), tuple(idx), combine, tuple(nest), order,
                    int(seed) if seed is not None else None)
    return plan, findings


def _axis(name, spec, doc, path, dims, env, limit) -> ScanAxis:
    pos = doc.pos(path)
    if isinstance(spec, list):
        spec, vpath = {"values": spec}, path
    else:
        vpath = path + ("values",)
    group = spec.get("group")
    if "values" in spec:
        extra = [k for k in ("from", "to", "steps", "random", "seed", "spacing") if k in spec]
        if extra:
            raise Bad(make(BAD_SCAN, f"scan of '{name}' gives values and also {', '.join(extra)}", pos,
                           hint="give either a list of values or a range, not both"))
        vals = spec["values"]
        if not vals:
            raise Bad(make(BAD_SCAN, f"scan of '{name}' has no values", pos, hint="list at least one value"))
        qs = tuple(_value(name, v, doc, vpath + (i,), dims, env) for i, v in enumerate(vals))
        return ScanAxis(name, qs, group, "list", pos)
    if "from" not in spec or "to" not in spec:
        missing = "from" if "from" not in spec else "to"
        raise Bad(make(BAD_SCAN, f"scan of '{name}' needs '{missing}'", pos,
                       hint="a scan is a list, {values: [...]}, {from, to, steps} or {from, to, random, seed}"))
    lo = _value(name, spec["from"], doc, path + ("from",), dims, env)
    hi = _value(name, spec["to"], doc, path + ("to",), dims, env)
    spacing = spec.get("spacing", "linear")
    if spacing == "log" and not (lo.value != 0 and hi.value != 0 and (lo.value > 0) == (hi.value > 0)):
        raise Bad(make(BAD_SCAN, f"log scan of '{name}' from {lo} to {hi} must not reach or cross zero",
                       doc.pos(path + ("spacing",)), hint="use spacing: linear, or ends of the same sign"))
    count = spec.get("steps", spec.get("random"))
    if isinstance(count, int) and count > limit:
        raise Bad(make(SCAN_TOO_LARGE, f"scan of '{name}' asks for {count} values, more than max_shots {limit}", pos,
                       hint="check the step count, or raise scan: {max_shots: ...}"))
    if "steps" in spec:
        if "random" in spec or "seed" in spec:
            raise Bad(make(BAD_SCAN, f"scan of '{name}' gives both steps and random/seed", pos,
                           hint="steps: for an evenly spaced range, random: + seed: for a random set"))
        n = int(spec["steps"])
        if n == 1 and not (same_dims(lo.dims, hi.dims) and lo.value == hi.value):
            raise Bad(make(BAD_SCAN, f"scan of '{name}' has steps: 1, which gives only its from: value {lo}, so "
                           f"to: {hi} would be ignored", doc.pos(path + ("steps",)),
                           hint=f"give steps: 2 or more for a range from {lo} to {hi} (ends included), or scan one "
                                f"value as a list: scan: [{_shown(spec['from'])}]"))
        fr = [0.0] if n == 1 else [k / (n - 1) for k in range(n)]
        kind = spacing
    elif "random" in spec:
        if "seed" not in spec:
            raise Bad(make(BAD_SCAN, f"random scan of '{name}' needs a seed", pos,
                           hint="add seed: <integer>, so the same values come back every time"))
        n = int(spec["random"])
        fr = uniform_draws(int(spec["seed"]), n)
        kind = "random"
    else:
        raise Bad(make(BAD_SCAN, f"scan range of '{name}' needs 'steps' (or 'random' and 'seed')", pos,
                       hint="add steps: <number of values, ends included>"))
    qs = []
    for f in fr:
        if spacing == "log":
            v = lo.value * (hi.value / lo.value) ** f
        else:
            v = lo.value + (hi.value - lo.value) * f
        qs.append(Qty(v, lo.dims))
    if "steps" in spec and n > 1:
        qs[-1] = hi  # the end is exact, not the result of rounding
    return ScanAxis(name, tuple(qs), group, kind, pos)


def _shown(raw) -> str:
    return raw.strip() if isinstance(raw, str) else repr(raw)


def _value(name, raw, doc, path, dims, env) -> Qty:
    q = to_qty(raw, doc, path, env)
    if not same_dims(q.dims, dims):
        pos = doc.pos(path)
        text = _shown(raw)
        kind = describe_kind(dims)
        usual = usual_unit(dims)
        split = split_quantity(text) if isinstance(raw, str) else (text, None)
        if same_dims(q.dims, DIMENSIONLESS) and q.value != 0:
            example = f"'{split[0]} {usual}'" if split and split[1] is None else f"{kind} ({usual})"
            raise Bad(make(MISSING_UNIT, f"scan value {text} of '{name}' has no unit; '{name}' is {kind}", pos,
                           hint=f"write {example}"))
        if not (same_dims(q.dims, DIMENSIONLESS) and q.value == 0):
            close = close_units(split[1], dims) if split and split[1] else []
            hint = (f"write '{split[0]} {close[0]}'" if close else
                    f"give every scan value of '{name}' as {kind} ({', '.join(kind_units(dims)) or display_unit(dims)})")
            raise Bad(make(WRONG_DIMENSION, f"scan value {text} of '{name}' is {describe_kind(q.dims)}, but "
                           f"'{name}' is {kind}" + (f"; did you mean {' or '.join(close)}?" if close else ""),
                           pos, hint=hint))
        q = Qty(q.value, dims)
    return q
