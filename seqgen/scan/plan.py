"""Planning a scan: the `scan:` of params -> an ordered list of shot points; the shot tasks and their hashes.

    scan = plan_scan("sequences/x.yaml")   # load + validate once, resolve the base values, expand the scan

A param may carry a scan:

    tof:  {value: 14 ms, scan: [10 ms, 12 ms, 16 ms]}                      # a list
    tof:  {value: 14 ms, scan: {values: [10 ms, 12 ms], group: g1}}        # a list in a lockstep group
    hold: {value: 5 ms, scan: {from: 1 ms, to: 10 ms, steps: 10}}          # linear range (ends included;
                                                                           # steps: 1 only if from == to)
    rate: {value: 1 kHz, scan: {from: 10 Hz, to: 10 kHz, steps: 7, spacing: log}}
    det:  {value: 0 Hz, scan: {from: -2 kHz, to: 2 kHz, random: 20, seed: 7}}  # random set, reproducible

Params whose scans share a `group` advance in lockstep (equal lengths
required); separate params or groups combine as a grid (outer product, the
first written varies slowest, as nested loops). The top-level `scan:` mapping
sets `combine: grid | lockstep` (lockstep: every scanned param in one group),
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

Each shot's input hash (`shot_key`) is the sha256 of its resolved shot (every
block, segment, param, position and the rig, but not the hashes of the source
files) and the tool version: two shots with the same input hash give the same
tables and findings. `scan_input_sha256` hashes what defines a whole scan build.
"""

from __future__ import annotations

import difflib
import hashlib
import itertools
import math
from collections.abc import Mapping
from dataclasses import dataclass, field, fields, is_dataclass, replace
from pathlib import Path

import numpy as np

from ..version import __version__
from ..codes import BAD_SCAN, MISSING_UNIT, SCAN_LENGTH_MISMATCH, SCAN_TOO_LARGE, WRONG_DIMENSION
from ..findings import Finding, SourcePos, has_errors, make, sort_findings
from ..load.yamlsrc import LoadError
from ..model import Rig, Shot
from ..resolve.params import param_entries
from ..resolve.quantities import Bad, to_qty
from ..resolve.sequence import resolve
from ..resolve.sources import Sources, load_sources
from ..resolve.units import DIMENSIONLESS, Qty, close_units, describe_kind, display_unit, format_qty, \
    kind_units, same_dims, split_quantity, usual_unit
from ..textfmt import fmt_si

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
        vals = [fmt_si(q.value, self.unit) for q in self.values]
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
    combine: str  # "grid" | "lockstep"
    nest: tuple  # group keys, outermost first (a key is a group name or a lone param's name)
    order: str  # "written" | "shuffled"
    seed: int | None

    def __post_init__(self):
        if self.combine == "zip":  # the former name of lockstep, in scan.json of builds written before the rename
            object.__setattr__(self, "combine", "lockstep")

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


def has_scans(src) -> bool:
    return any(isinstance(raw, dict) and raw.get("scan") is not None for raw, _, _ in param_entries(src)[0].values())


def expand(src, base_shot) -> tuple[ScanPlan | None, list[Finding]]:
    """The scan plan of validated sources, or (None, []) when no param scans.

    `base_shot` is the shot resolved with the base values: it gives each
    param's dimension and the values other params' scan bounds may refer to.
    """
    findings: list[Finding] = []
    entries, _ = param_entries(src)
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
        key = "*" if combine == "lockstep" else (a.group or a.name)
        groups.setdefault(key, []).append(a)
    for key, members in groups.items():
        n0 = len(members[0].values)
        for a in members[1:]:
            if len(a.values) != n0:
                what = "every scanned param (combine: lockstep)" if key == "*" else f"group '{key}'"
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


# ----------------------------------------------------------------------------- a planned scan


@dataclass(frozen=True)
class ShotResult:
    index: int  # position in run order (the shot_NNNN folder)
    written_index: int  # position in written (unshuffled) order
    values: tuple  # of Qty, in plan.names order
    findings: tuple = ()
    input_sha256: str | None = None  # None when the shot did not resolve
    folder: str | None = None  # build folder name when built
    manifest_sha256: str | None = None
    tables: tuple = ()  # ((device, ((kind, sha256), ...)), ...)
    reused: bool = False

    @property
    def ok(self) -> bool:
        return self.input_sha256 is not None and not has_errors(self.findings)


@dataclass
class Scan:
    """A planned (and, after run_scan, executed) scan of one sequence file."""

    file: str
    sources: Sources | None
    plan: ScanPlan | None
    findings: list = field(default_factory=list)  # scan-level: load, validate, expansion
    shots: list = field(default_factory=list)  # ShotResult by index, after run_scan
    out: Path | None = None
    stats: dict = field(default_factory=dict)  # built / reused / failed counts, seconds

    @property
    def ok(self) -> bool:
        return self.plan is not None and not has_errors(self.findings) and all(s.ok for s in self.shots)

    @property
    def is_scan(self) -> bool:
        """True when the file scans params (planned, or with expansion findings to report)."""
        return self.plan is not None or bool(self.findings and self.sources is not None and has_scans(self.sources))


def plan_scan(path: str | Path, sources: Sources | None = None) -> Scan:
    """Load and validate once (or take the loaded `sources`), resolve the base values, expand the scan.

    `plan` is None when the sequence has no scans (or cannot be loaded, or its
    base values do not resolve): run the ordinary `preflight` then, which
    reports exactly what it always did. Expansion mistakes are in `findings`.
    """
    if sources is None:
        try:
            sources = load_sources(path)
        except LoadError as exc:
            return Scan(str(path), None, None, [exc.finding])
    src = sources
    if has_errors(src.findings) or not has_scans(src):
        return Scan(src.main.file, src, None)
    base, _ = resolve(src)
    if base is None:
        return Scan(src.main.file, src, None)
    plan, pf = expand(src, base)
    return Scan(src.main.file, src, plan, sort_findings(list(src.findings) + pf) if pf else [])


@dataclass(frozen=True)
class ShotTask:
    """One shot to run: what a worker needs besides the shared sources."""

    index: int
    written_index: int
    names: tuple
    values: tuple  # of Qty
    folder: str
    out_dir: str | None  # where a worker writes the build; None: return tables instead (or no build)
    build: bool
    reuse_key: str | None = None
    crash: str | None = None  # tests only: "raise" or "exit"
    tables: tuple | None = None  # table writer names (seqgen.emit.writers.select_writers); None: the default set


def values_text(names, values) -> str:
    return ", ".join(f"{n} = {format_qty(q)}" for n, q in zip(names, values))


def label_shot(shot, overrides: dict):
    """The scanned params' text becomes the shot's value ('10 ms'), not the base value's text."""
    params = tuple(replace(p, text=format_qty(overrides[p.name])) if p.name in overrides else p for p in shot.params)
    return replace(shot, params=params)


# ----------------------------------------------------------------------------- input hashes

_PATH_HOLDERS = (SourcePos, Shot, Rig)  # their `file` is where the text sits, not what it says


def shot_key(shot) -> str:
    """sha256 of a resolved shot (without its source-file hashes) and the tool version.

    Positions enter by line and column, not by file path: the same sequence checked from another folder
    (a colleague's clone, a moved build) is the same shot."""
    h = hashlib.sha256(f"seqgen {__version__}\n".encode())
    _feed(h, shot, skip=("sources",))
    return h.hexdigest()


def _feed(h, obj, skip=()) -> None:
    if obj is None:
        h.update(b"N")
    elif isinstance(obj, bool):
        h.update(b"T" if obj else b"F")
    elif isinstance(obj, int):
        h.update(b"i%d;" % obj)
    elif isinstance(obj, float):
        h.update(b"f" + obj.hex().encode() + b";")
    elif isinstance(obj, str):
        b = obj.encode()
        h.update(b"s%d:" % len(b) + b)
    elif is_dataclass(obj) and not isinstance(obj, type):
        h.update(b"D" + type(obj).__name__.encode() + b"{")
        for f in fields(obj):
            if f.name in skip or (f.name == "file" and isinstance(obj, _PATH_HOLDERS)):
                continue
            h.update(f.name.encode() + b"=")
            _feed(h, getattr(obj, f.name))
        h.update(b"}")
    elif isinstance(obj, Mapping):
        h.update(b"M%d{" % len(obj))
        for k in sorted(obj, key=repr):
            _feed(h, k)
            _feed(h, obj[k])
        h.update(b"}")
    elif isinstance(obj, (tuple, list)):
        h.update(b"L%d(" % len(obj))
        for x in obj:
            _feed(h, x)
        h.update(b")")
    elif isinstance(obj, np.ndarray):
        h.update(b"A" + str(obj.dtype).encode() + repr(obj.shape).encode())
        h.update(np.ascontiguousarray(obj).tobytes())
    elif isinstance(obj, np.generic):
        _feed(h, obj.item())
    elif isinstance(obj, (set, frozenset)):
        _feed(h, sorted(obj, key=repr))
    else:
        h.update(b"R" + repr(obj).encode())


def scan_input_sha256(scan: Scan) -> str:
    """sha256 of what defines a scan build: tool version, main file name, source hashes, plan."""
    h = hashlib.sha256(f"seqgen {__version__}\n{scan.sources.main.file}\n".encode())
    for sha in sorted(scan.sources.hashes.values()):
        h.update(sha.encode())
    h.update(scan.plan.fingerprint().encode())
    return h.hexdigest()


# ----------------------------------------------------------------------------- the plan as JSON


def qty_json(q: Qty) -> dict:
    return {"value": q.value, "unit": display_unit(q.dims)}


def shot_head(plan: ScanPlan, r: ShotResult) -> dict:
    """What names a shot in both the scan manifest and the --json report."""
    return {
        "index": r.index,
        "written_index": r.written_index,
        "params": {n: qty_json(q) for n, q in zip(plan.names, r.values)},
        "input_sha256": r.input_sha256,
    }


def scan_description(plan: ScanPlan) -> dict:
    return {
        "params": [{"name": a.name, "unit": display_unit(a.values[0].dims), "group": a.group, "kind": a.kind,
                    "values": [q.value for q in a.values]} for a in plan.axes],
        "combine": plan.combine,
        "nest": list(plan.nest),
        "order": plan.order,
        "seed": plan.seed,
        "shots": len(plan),
    }
