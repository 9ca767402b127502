"""Reports of a diff: text for people (grouped by level, most consequential first)
and the JSON shape documented by schemas/diff.schema.json."""

from __future__ import annotations

import json
import math

from ..caution import CAUTION
from . import fmt
from .model import LEVEL_TITLES, LEVELS, DiffReport

FORMAT_VERSION = 1
MAX_WINDOWS_TEXT = 3
MAX_SHOTS_TEXT = 10  # shot entries of two scan builds listed per kind in the text report (--json: all)


def summary(rep: DiffReport) -> dict:
    out = {lv: len(rep.by_level(lv)) for lv in LEVELS}
    out["total"] = len(rep.changes)
    out["unchanged_findings"] = len(rep.unchanged_findings)
    out["changed_findings"] = len(rep.changed_findings)
    return out


def _changed_finding(c) -> dict:
    d = c.data
    side = lambda s: {k: s[k] for k in ("message", "hint", "severity", "accepted")}  # noqa: E731
    return {"code": d["code"], "block": d["block"], "file": d["file"], "line": d["line"], "old": side(d["old"]),
            "new": side(d["new"])}


def to_dict(rep: DiffReport) -> dict:
    return {
        "format": "seqgen-diff",
        "format_version": FORMAT_VERSION,
        "old": rep.old.describe(),
        "new": rep.new.describe(),
        "identical": rep.identical,
        "summary": summary(rep),
        "changes": [c.to_dict() for c in rep.changes],
        "unchanged_findings": [{"code": f.code, "severity": f.severity, "block": f.block, "message": f.message,
                                "accepted": f.accepted} for f in rep.unchanged_findings],
        "changed_findings": [_changed_finding(c) for c in rep.changed_findings],
        "notes": list(rep.notes),
        "caution": CAUTION,
    }


def to_json(rep: DiffReport) -> str:
    return json.dumps(_finite(to_dict(rep)), indent=2, sort_keys=True, allow_nan=False, default=_default)


def _finite(obj):
    """JSON has no NaN or infinity: such numbers become null."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    return obj


def _default(o):
    try:
        return float(o)
    except (TypeError, ValueError):
        return str(o)


_MARK = {"finding-introduced": "+", "finding-resolved": "-", "finding-changed": "~"}


GROUP_MIN = 3  # upstream shifts with one cause are listed on one line from this many blocks on


def _upstream_groups(items) -> dict:
    """id(first change) -> its group, for upstream block shifts sharing shift, causes and params."""
    groups: dict = {}
    for c in items:
        if c.kind == "block-shifted" and c.data.get("cause") == "upstream":
            key = (round(c.data["shift_s"], 12), tuple(c.data["caused_by"]), tuple(c.data["params"]))
            groups.setdefault(key, []).append(c)
    out = {}
    for group in groups.values():
        if len(group) >= GROUP_MIN:
            out[id(group[0])] = group
    return out


def _group_line(group) -> str:
    first = group[0]
    cause = first.message.split("; upstream: ", 1)[1].split(" (via ", 1)[0]
    starts = ", ".join(f"{c.subject} {fmt.t(c.data['start_old_s'])} -> {fmt.t(c.data['start_new_s'])}" for c in group)
    return f"  * {len(group)} blocks start {fmt.dt(first.data['shift_s'])}, upstream: {cause}: {starts}"


def to_text(rep: DiffReport) -> str:
    s = summary(rep)
    head = f"seqgen diff {rep.old.label} -> {rep.new.label}: "
    unresolved = [v.label for v in (rep.old, rep.new) if v.kind not in ("build", "scan-build") and v.shot is None]
    if rep.identical and unresolved:
        lines = [head + "no differences in findings (" + " and ".join(unresolved) + " did not resolve)"]
    elif rep.identical:
        lines = [head + "no differences"
                 + (f" ({s['unchanged_findings']} finding(s) unchanged)" if s["unchanged_findings"] else "")]
    else:
        parts = ", ".join(f"{lv} {s[lv]}" for lv in LEVELS if s[lv])
        lines = [head + f"{s['total']} difference(s) ({parts})"]
    for lv in LEVELS:
        items = rep.by_level(lv)
        if not items and not (lv == "preflight" and rep.unchanged_findings and not rep.identical):
            continue
        lines.append("")
        lines.append(LEVEL_TITLES[lv])
        grouped = _upstream_groups(items)
        done = set()
        shots: dict = {}  # kind -> scan-shot-* entries seen
        changed = [c for c in items if c.kind == "finding-changed"]  # a group of their own, after the others
        for c in [c for c in items if c.kind != "finding-changed"]:
            if id(c) in done:
                continue
            if c.kind.startswith("scan-shot-"):
                shots[c.kind] = shots.get(c.kind, 0) + 1
                if shots[c.kind] > MAX_SHOTS_TEXT:
                    continue
            group = grouped.get(id(c))
            if group:
                done.update(id(x) for x in group)
                lines.append(_group_line(group))
                continue
            mark = _MARK.get(c.kind, "*")
            lines.append(f"  {mark} {c.message}")
            if c.kind == "output-differs":
                for w in c.data["windows"][:MAX_WINDOWS_TEXT]:
                    extra = ""
                    if "max_deviation_physical" in w:
                        extra = f", {fmt.q(w['max_deviation_physical'], c.data.get('physical_unit', ''))}"
                    lines.append(f"      {fmt.t(w['start_s'])} .. {fmt.t(w['end_s'])}: max "
                                 f"{fmt.q(w['max_deviation'], c.data['unit'])}{extra}")
                more = c.data["window_count"] - min(MAX_WINDOWS_TEXT, len(c.data["windows"]))
                if more > 0:
                    lines.append(f"      ... and {more} more window(s) (--json lists them)")
        for kind, n in sorted(shots.items()):
            if n > MAX_SHOTS_TEXT:
                lines.append(f"  ... and {n - MAX_SHOTS_TEXT} more {kind} shot(s) (--json lists them)")
        if changed:
            lines.append(f"  ~ {len(changed)} finding(s) changed (old -> new):")
            lines += [f"    ~ {c.message}" for c in changed]
        if lv == "preflight" and rep.unchanged_findings:
            lines.append(f"  = {len(rep.unchanged_findings)} finding(s) unchanged")
    for n in rep.notes:
        lines.append(f"note: {n}")
    return "\n".join(lines) + "\n"
