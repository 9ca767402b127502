"""Put the levels together: `diff_versions(old, new) -> DiffReport`."""

from __future__ import annotations

from pathlib import Path

from . import outputs, preflight, rig, scan, scanbuild, timeline
from .inputs import load_version
from .model import LEVELS, Change, DiffReport, Version


def diff_paths(old: str, new: str) -> DiffReport:
    """Diff two inputs given as on the command line (file, REV:PATH or build folder)."""
    return diff_versions(load_version(old), load_version(new))


def diff_versions(old: Version, new: Version) -> DiffReport:
    if "scan-build" in (old.kind, new.kind):
        if old.kind != new.kind:
            scanbuild.refuse_mixed(old, new)
        return scanbuild.diff_scan_builds(old, new)
    rep = DiffReport(old, new)
    changes: list[Change] = []
    renames: dict = {}
    both_shots = old.shot is not None and new.shot is not None
    # resolved level (params need a resolved shot or a build manifest on both sides)
    changed_params: set = set()
    if all(v.shot is not None or v.kind == "build" for v in (old, new)):
        pchanges, changed_params = timeline.param_changes(old, new)
        changes += pchanges
        changes += timeline.bound_changes(old, new, changed_params)
    if both_shots:
        changes += scan.scan_changes(old.scan, new.scan, old.scan_invalid, new.scan_invalid)
        if old.scan is not None or new.scan is not None:
            rep.notes.append("a scanned sequence is compared at its base values (`value:` of each scanned param); "
                             "the scans themselves under 'scan-*'")
        changes += timeline.setting_changes(old.shot, new.shot)
        bchanges, renames = timeline.block_changes(old, new, changed_params)
        changes += bchanges
        changes += rig.rig_changes(old.shot, new.shot)
    else:
        if old.manifest is not None or new.manifest is not None:
            changes += rig.manifest_rig_changes(old.manifest, new.manifest)
        for v in (old, new):
            if v.kind != "build" and v.shot is None:
                rep.notes.append(f"{v.label} did not resolve (see its findings): only findings are compared")
        if old.kind == "build" or new.kind == "build":
            rep.notes.append("a build folder carries tables, params and findings only: blocks, writes and rig details "
                             "are compared between sequence files")
    # output level
    if old.tables and new.tables:
        changes += outputs.output_changes(old, new)
    elif (old.tables or new.tables) or (old.shot is not None or new.shot is not None):
        rep.notes.append("output level skipped: one version has no compiled tables")
    # preflight level
    fa, fb = old.findings, new.findings
    unresolved = [v for v in (old, new) if v.kind != "build" and v.shot is None]
    if len(unresolved) == 1:  # the checks ran on one side only: compare what both sides could report
        fa, fb = (preflight.before_checks(fa), fb) if unresolved[0] is new else (fa, preflight.before_checks(fb))
        rep.notes.append(f"the preflight checks did not run on {unresolved[0].label}: findings of checks on the "
                         "other version are not compared")
    names = tuple(Path(v.sources.main.file).name if v.sources is not None else None for v in (old, new))
    fchanges, unchanged = preflight.finding_changes(fa, fb, renames, names)
    changes += fchanges
    rep.unchanged_findings = unchanged
    order = {lv: i for i, lv in enumerate(LEVELS)}
    rep.changes = sorted(changes, key=lambda c: (order[c.level], -round(c.weight, 6), _when(c), c.subject, c.kind))
    return rep


def _when(c: Change) -> float:
    for key in ("start_new_s", "start_old_s", "at_s", "start_s", "time_s"):
        v = c.data.get(key)
        if isinstance(v, (int, float)):
            return float(v)
    return 0.0


__all__ = ["diff_paths", "diff_versions"]
