"""The build folder of a scan: one folder per shot, OUT/scan.json, resume, verify, atomic replace.

Scan build folder: `OUT/scan.json` (schema `schemas/scan.schema.json`) lists
every shot: index, param values, input hash, build folder, manifest and table
hashes. Re-running a build on the same folder:
- same inputs (the scan manifest's `scan_input_sha256` matches): resume; shots
  already built and intact are kept, the others are built (no --force needed);
- other inputs: refused without `force`; with `force` only the shots whose
  input hash changed are rebuilt, unchanged ones are kept (their manifest then
  still names the source hashes they were built from), shots no longer in the
  scan are removed;
- a folder that is not a scan build: refused without `force`, replaced with it.
Each shot's folder is written by `seqgen.emit.build.write_build` (atomic);
scan.json is replaced atomically too. The whole run (the resume decision, every
shot, scan.json) holds the claim on OUT (seqgen/emit/claim.py), so a second
scan build or resume of the same folder is refused (or with force waits): no two
processes ever write shots into one scan folder.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import tempfile
import time
from dataclasses import replace
from pathlib import Path

from ..version import __version__
from ..caution import CAUTION
from ..emit.build import BuildExists, write_build
from ..emit.writers import compact_writers, file_sha256, select_writers
from ..findings import Finding, summary
from .plan import Scan, ScanPlan, ShotResult, scan_description, scan_input_sha256, shot_head
from .tables import TableStore, clean

SCAN_MANIFEST = "scan.json"
FORMAT_VERSION = 1


def write_shot(out: Path, folder: str, shot, compiled, findings, result: ShotResult, tables=None) -> ShotResult:
    """Write one shot's build folder (atomic, via write_build) and note its hashes. Its tables go compressed
    into the scan's shared OUT/tables/ (seqgen/scan/tables.py); `tables`: writer names (None: the default set)."""
    writers = compact_writers(select_writers(tables))
    path = write_build(out / folder, shot, compiled, findings, force=True, claim=False,  # under the scan's claim
                       writers=writers, store=TableStore(out))
    raw = (path / "manifest.json").read_bytes()
    man = json.loads(raw)
    tables = tuple((dev, tuple(sorted((kind, f["sha256"]) for kind, f in info["files"].items())))
                   for dev, info in sorted(man["devices"].items()))
    return replace(result, folder=folder, manifest_sha256=hashlib.sha256(raw).hexdigest(), tables=tables)


def remove_path(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    elif path.exists() or path.is_symlink():
        path.unlink()


def prepare_out(out: Path, scan: Scan, folders: list, force: bool) -> tuple[dict, list, bool]:
    """Decide resume / update / replace: ({index: verified previous record}, stale shot folders, had a scan build).

    Raises BuildExists when `out` may not be touched without `force`."""
    if out.exists() and not out.is_dir():
        if not force:
            raise BuildExists(f"{out} exists and is not a folder; use --force to replace it")
        out.unlink()
    old = None
    if out.is_dir():
        try:
            old = json.loads((out / SCAN_MANIFEST).read_text(encoding="utf-8"))
            if old.get("format") != "seqgen-scan":
                old = None
        except (OSError, ValueError):
            old = None
        if old is None:
            if any(out.iterdir()):
                if not force:
                    raise BuildExists(f"{out} exists and is not a scan build; use --force to replace it")
                aside = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
                aside.rmdir()
                os.rename(out, aside)
                shutil.rmtree(aside, ignore_errors=True)
        elif old.get("scan_input_sha256") != scan_input_sha256(scan) and not force:
            raise BuildExists(f"{out} holds a scan of other inputs; use --force to update it (shots whose "
                              "inputs are unchanged are kept)")
    out.mkdir(parents=True, exist_ok=True)
    wanted = set(folders)
    stale = []
    for p in out.iterdir():
        if p.name.startswith(".shot_"):  # leftovers of an interrupted run
            remove_path(p)
        elif p.name.startswith("shot_") and p.name not in wanted:  # shots no longer in the scan: removed
            stale.append(p)  # only once the new run has built something
    known = clean(out)  # stored tables whose bytes no longer match their name go, so their shots are rebuilt
    reuse = {}
    for rec in (old or {}).get("shots", []):
        i = rec.get("index")
        if (not isinstance(i, int) or i >= len(folders) or rec.get("status") not in ("built", "pending")
                or rec.get("build") != folders[i] or not rec.get("input_sha256")):
            continue
        found = _verify(out / folders[i], rec, known)
        if found is not None:
            reuse[i] = {"input_sha256": rec["input_sha256"], "build": rec["build"], "findings": tuple(found),
                        "manifest_sha256": rec["manifest_sha256"],
                        "tables": tuple((d, tuple(sorted(v.items()))) for d, v in sorted(rec["tables"].items()))}
    return reuse, stale, old is not None


def _verify(folder: Path, rec: dict, known: dict | None = None) -> list | None:
    """The shot's findings when its build is intact (manifest and tables match their hashes), else None.
    `known`: {resolved path: sha256} of files checked already (the shared tables)."""
    try:
        raw = (folder / "manifest.json").read_bytes()
        if hashlib.sha256(raw).hexdigest() != rec.get("manifest_sha256"):
            return None
        man = json.loads(raw)
        for info in man["devices"].values():
            for f in info["files"].values():
                path = folder / f["path"]
                sha = (known or {}).get(str(path.resolve()))
                if (sha if sha is not None else file_sha256(path)) != f["sha256"]:
                    return None
        return [_finding_from(d) for d in man.get("findings_list", [])]
    except (OSError, ValueError, KeyError, TypeError):
        return None


def _finding_from(d: dict) -> Finding:
    return Finding(code=d["code"], severity=d["severity"], message=d["message"], file=d.get("file", ""),
                   line=d.get("line", 0), column=d.get("column", 0), block=d.get("block"), time_s=d.get("time_s"),
                   hint=d.get("hint", ""), accepted=d.get("accepted", False), accept_reason=d.get("accept_reason", ""),
                   data=tuple(sorted((d.get("data") or {}).items())))


# ----------------------------------------------------------------------------- the scan manifest


def shot_record(plan: ScanPlan, r: ShotResult) -> dict:
    """One shot of OUT/scan.json (schemas/scan.schema.json)."""
    return {
        **shot_head(plan, r),
        "status": "built" if r.folder else "refused",
        "build": r.folder,
        "manifest_sha256": r.manifest_sha256,
        "tables": {dev: dict(files) for dev, files in r.tables},
        "findings": summary(r.findings),
    }


def listed_tables(records) -> set:
    """The sha256 of every table file the scan.json records of built (or pending) shots list."""
    return {sha for rec in records if rec.get("status") in ("built", "pending")
            for files in (rec.get("tables") or {}).values() for sha in files.values()}


class ManifestWriter:
    """Keeps OUT/scan.json current (atomic replace; at most about once a second while running)."""

    def __init__(self, out: Path, scan: Scan, folders: list, reuse: dict, hold: bool = False):
        self.out, self.scan, self.folders = out, scan, folders
        self.hold = hold  # True: leave the existing scan.json until a shot is built or kept
        plan = scan.plan
        self.records = {}
        for i in range(len(folders)):
            r = ShotResult(i, plan.written_index[i], plan.points[i])
            if i in reuse:  # kept as a candidate: the next run may still reuse it after checking its input hash
                rec = reuse[i]
                r = replace(r, findings=rec["findings"], input_sha256=rec["input_sha256"], folder=rec["build"],
                            manifest_sha256=rec["manifest_sha256"], tables=rec["tables"])
            self.records[i] = {**shot_record(plan, r), "status": "pending"}
        self.last = 0.0
        if not hold:
            self.flush()

    def update(self, r: ShotResult) -> None:
        self.records[r.index] = shot_record(self.scan.plan, r)
        if r.folder:
            self.hold = False
        if not self.hold and time.monotonic() - self.last > 1.0:
            self.flush()

    def flush(self) -> None:
        recs = [self.records[i] for i in range(len(self.folders))]
        counts = {s: sum(r["status"] == s for r in recs) for s in ("built", "refused", "pending")}
        doc = {
            "format": "seqgen-scan",
            "format_version": FORMAT_VERSION,
            "tool": {"name": "seqgen", "version": __version__},
            "sequence": self.scan.file,
            "sources": dict(sorted(self.scan.sources.hashes.items())),
            "scan_input_sha256": scan_input_sha256(self.scan),
            "scan": scan_description(self.scan.plan),
            "summary": {"shots": len(recs), **counts},
            "shots": recs,
            "caution": CAUTION,
        }
        tmp = self.out / f".{SCAN_MANIFEST}.tmp"
        with open(tmp, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(json.dumps(doc, indent=1, sort_keys=True) + "\n")
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, self.out / SCAN_MANIFEST)
        self.last = time.monotonic()
