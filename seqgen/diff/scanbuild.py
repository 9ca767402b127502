"""Two scan build folders (scan.json + shot_NNNN/): the scans and their shots.

The scan descriptions are compared as between two sequence files (`scan.py`:
scanned params, values, combination, nesting, order, seed). Shots are matched by
their param values, never by index, so a reordered or extended scan still
matches its shots: shots only in one scan, shots whose resolved input
(`input_sha256`, level "resolved") or build (`manifest_sha256`, level "output")
differ, and shots whose status (built / refused / pending) or finding counts
changed. Per-shot details come from diffing two shot folders.
"""

from __future__ import annotations

from pathlib import Path

from ..textfmt import fmt_si
from . import scan
from .inputs import DiffInputError, first_shot_folder
from .model import LEVELS, Change, DiffReport, Version

KEY_DIGITS = 12  # param values equal to this many significant digits name the same shot


def refuse_mixed(old: Version, new: Version) -> None:
    """A scan build against anything else cannot be compared: one line, the diff exits 2."""
    sb, other = (old, new) if old.kind == "scan-build" else (new, old)
    what = "the build of one shot" if other.kind == "build" else "a sequence file"
    raise DiffInputError(f"{sb.label} is the build of a scan (scan.json, one folder per shot) but {other.label} is "
                         f"{what}: diff two scan builds, one shot's build folder (e.g. "
                         f"{first_shot_folder(sb.scan_build['folder'])}) against it, or the two sequence files")


def shot_label(names, rec) -> str:
    """'tof=5 ms, kick_time=2 ms': a shot named by its param values (written order of the scanned params)."""
    return ", ".join(f"{n}={fmt_si(rec['params'][n][0], rec['params'][n][1])}" for n in names)


def _key(rec) -> tuple:
    return tuple(sorted((n, u, float(f"{v:.{KEY_DIGITS}g}")) for n, (v, u) in rec["params"].items()))


def _counts(rec) -> str:
    f = rec["findings"]
    text = f"{f['error']} error(s), {f['warning']} warning(s), {f['note']} note(s)"
    return text + (f", {f['accepted']} accepted" if f["accepted"] else "")


def _side(rec) -> dict:
    return {"index": rec["index"], "build": rec["build"], "status": rec["status"], "input_sha256": rec["input_sha256"],
            "manifest_sha256": rec["manifest_sha256"], "findings": dict(rec["findings"])}


def _params(rec) -> dict:
    return {n: {"value": v, "unit": u} for n, (v, u) in rec["params"].items()}


def _where(rec) -> str:
    return f"shot {rec['index']}" + (f" ({rec['build']})" if rec["build"] else "")


def match_shots(old_shots: list, new_shots: list) -> tuple[list, list, list]:
    """(matched (old, new) pairs, old records without a match, new records without a match), by param values;
    equal values repeated in one scan pair up in run order."""
    pool: dict = {}
    for rec in old_shots:
        pool.setdefault(_key(rec), []).append(rec)
    pairs, added = [], []
    for rec in new_shots:
        same = pool.get(_key(rec))
        if same:
            pairs.append((same.pop(0), rec))
        else:
            added.append(rec)
    matched = {id(a) for a, _ in pairs}
    removed = [r for r in old_shots if id(r) not in matched]
    return pairs, removed, added


def shot_changes(old: Version, new: Version) -> tuple[list, list]:
    """(changes, matched pairs) between the shots of two scan builds."""
    a, b = old.scan_build["shots"], new.scan_build["shots"]
    names_old, names_new = old.scan.names, new.scan.names
    pairs, removed, added = match_shots(a, b)
    out: list[Change] = []
    for rec in removed:
        subj = shot_label(names_old, rec)
        out.append(Change("resolved", "scan-shot-removed", subj, f"shot {subj} only in the old scan "
                          f"(was {_where(rec)}, {rec['status']})", rec["status"], None, 0.7,
                          {"params": _params(rec), "old": _side(rec), "new": None}))
    for rec in added:
        subj = shot_label(names_new, rec)
        out.append(Change("resolved", "scan-shot-added", subj, f"shot {subj} only in the new scan "
                          f"({_where(rec)}, {rec['status']})", None, rec["status"], 0.7,
                          {"params": _params(rec), "old": None, "new": _side(rec)}))
    for x, y in pairs:
        subj = shot_label(names_new, y)
        moved = f"old {_where(x)} -> new {_where(y)}"
        what = []
        if x["input_sha256"] != y["input_sha256"]:
            what.append("resolved input differs (input_sha256)" if x["input_sha256"] and y["input_sha256"]
                        else "resolved in one scan only")
        if x["status"] != y["status"]:
            what.append(f"{x['status']} -> {y['status']}")
        if x["findings"] != y["findings"]:
            what.append(f"findings {_counts(x)} -> {_counts(y)}")
        data = {"params": _params(y), "old": _side(x), "new": _side(y),
                "input_changed": x["input_sha256"] != y["input_sha256"], "status_changed": x["status"] != y["status"],
                "findings_changed": x["findings"] != y["findings"]}
        if what:
            weight = 0.9 if x["status"] != y["status"] else 0.8
            out.append(Change("resolved", "scan-shot-changed", subj, f"shot {subj} ({moved}): " + "; ".join(what),
                              f"{x['status']}, {_counts(x)}", f"{y['status']}, {_counts(y)}", weight, data))
        if x["manifest_sha256"] and y["manifest_sha256"] and x["manifest_sha256"] != y["manifest_sha256"]:
            devices = sorted(d for d in set(x["tables"]) | set(y["tables"]) if x["tables"].get(d) != y["tables"].get(d))
            tables = f", tables of {', '.join(devices)}" if devices else "; every table hash the same"
            out.append(Change("output", "scan-shot-output", subj, f"shot {subj} ({moved}): build differs "
                              f"(manifest_sha256){tables}", x["manifest_sha256"][:12], y["manifest_sha256"][:12], 0.8,
                              {"params": _params(y), "old": _side(x), "new": _side(y), "devices": devices}))
    return out, pairs


def diff_scan_builds(old: Version, new: Version) -> DiffReport:
    rep = DiffReport(old, new)
    changes = scan.scan_changes(old.scan, new.scan)
    shots, pairs = shot_changes(old, new)
    changes += shots
    order = {lv: i for i, lv in enumerate(LEVELS)}
    rep.changes = sorted(changes, key=lambda c: (order[c.level], -round(c.weight, 6)))  # stable: run order kept
    rep.notes.append("two scan builds are compared through their scan.json: the scans, and the shots matched by "
                     "their param values (not by index)")
    if set(old.scan.names) != set(new.scan.names):
        rep.notes.append(f"the scans vary different params ({', '.join(old.scan.names)} -> "
                         f"{', '.join(new.scan.names)}): no shot of one matches a shot of the other")
    if old.scan_build.get("tool") != new.scan_build.get("tool"):
        rep.notes.append(f"built by seqgen {old.scan_build.get('tool')} and {new.scan_build.get('tool')}: the input "
                         "hashes include the tool version, so every shot's input differs")
    built = [(x, y) for x, y in pairs if x["build"] and y["build"]]
    changed = {c.data["old"]["index"] for c in shots if c.kind in ("scan-shot-changed", "scan-shot-output")}
    example = next(((x, y) for x, y in built if x["index"] in changed), built[0] if built else None)
    if example is not None:
        x, y = example
        rep.notes.append("per-shot details (tables, params, findings) come from diffing two shot folders, e.g. "
                         f"seqgen diff {Path(old.label) / x['build']} {Path(new.label) / y['build']}")
    else:
        rep.notes.append("per-shot details (tables, params, findings) come from diffing two shot folders: "
                         "seqgen diff OLD/shot_NNNN NEW/shot_NNNN")
    return rep


__all__ = ["diff_scan_builds", "match_shots", "refuse_mixed", "shot_changes", "shot_label"]
