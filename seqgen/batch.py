"""Running the shots of a scan: preflight every shot, and build each into its own folder.

    scan = plan_scan("sequences/x.yaml")          # load + validate once, expand the scan
    run_scan(scan)                                 # preflight every shot (process pool)
    run_scan(scan, out="build/x", force=False)     # ... and write build/x/shot_0000/ ... + build/x/scan.json
    summarize(scan)                                # per finding code: the shots and the param ranges where it fires

Shots share work: the sequence, the files it uses and the rig are parsed and
validated once, in this process, and handed to each worker once (not per shot).
Each shot is then resolved with its scan values as overrides and preflighted
through `seqgen.pipeline.preflight_resolved`. Within each worker process the
content-keyed caches of the trap analyses (physics_traps._held) and of the
sampled ramps (compile.tables.RAMP_CACHE) carry over from shot to shot, so
blocks whose inputs the scan does not change are computed once per worker.

Execution: a local process pool over the machine's cores by default
(concurrent.futures), or a dask.distributed cluster (`cluster="tcp://host:8786"`,
optional extra `seqgen[cluster]`; builds are then written by this process, so
workers need no shared disk). A shot that raises, or whose worker process
dies, yields a `schema.shot-failed` finding for that shot; the scan goes on.

Scan build folder: `OUT/scan.json` (schema `schemas/scan.schema.json`) lists
every shot: index, param values, input hash, build folder, manifest and table
hashes. Each shot's input hash is the sha256 of its resolved shot (every
block, segment, param, position and the rig, but not the hashes of the source
files) and the tool version: two shots with the same input hash give the same
tables and findings. Re-running a build on the same folder:
- same inputs (the scan manifest's `scan_input_sha256` matches): resume; shots
  already built and intact are kept, the others are built (no --force needed);
- other inputs: refused without `force`; with `force` only the shots whose
  input hash changed are rebuilt, unchanged ones are kept (their manifest then
  still names the source hashes they were built from), shots no longer in the
  scan are removed;
- a folder that is not a scan build: refused without `force`, replaced with it.
"""

from __future__ import annotations

import hashlib
import json
import multiprocessing
import os
import shutil
import sys
import tempfile
import threading
import time
from collections.abc import Mapping
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass, field, fields, is_dataclass, replace
from pathlib import Path

import numpy as np

from . import __version__
from .caution import CAUTION
from .findings import SEVERITIES, Finding, SourcePos, has_errors, make, sort_findings, summary
from .load.yamlsrc import LoadError
from .model import Rig, Shot
from .resolve.scan import ScanPlan, expand, has_scans
from .resolve.sequence import Sources, load_sources, resolve
from .resolve.units import Qty, format_qty, format_value
from .codes import SHOT_FAILED

SCAN_MANIFEST = "scan.json"
FORMAT_VERSION = 1



class BuildExists(Exception):
    pass


class ClusterUnavailable(Exception):
    pass


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


# ----------------------------------------------------------------------------- planning


def plan_scan(path: str | Path) -> Scan:
    """Load and validate once, resolve the base values, expand the scan.

    `plan` is None when the sequence has no scans (or cannot be loaded, or its
    base values do not resolve): run the ordinary `preflight` then, which
    reports exactly what it always did. Expansion mistakes are in `findings`.
    """
    try:
        src = load_sources(path)
    except LoadError as exc:
        return Scan(str(path), None, None, [exc.finding])
    if has_errors(src.findings) or not has_scans(src):
        return Scan(src.main.file, src, None)
    base, _ = resolve(src)
    if base is None:
        return Scan(src.main.file, src, None)
    plan, pf = expand(src, base)
    return Scan(src.main.file, src, plan, sort_findings(list(src.findings) + pf) if pf else [])


# ----------------------------------------------------------------------------- one shot


@dataclass(frozen=True)
class _Task:
    index: int
    written_index: int
    names: tuple
    values: tuple  # of Qty
    folder: str
    out_dir: str | None  # where a worker writes the build; None: return tables instead (or no build)
    build: bool
    reuse_key: str | None = None
    crash: str | None = None  # tests only: "raise" or "exit"


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


def _label(shot, overrides: dict):
    """The scanned params' text becomes the shot's value ('10 ms'), not the base value's text."""
    params = tuple(replace(p, text=format_qty(overrides[p.name])) if p.name in overrides else p for p in shot.params)
    return replace(shot, params=params)


def _values_text(names, values) -> str:
    return ", ".join(f"{n} = {format_qty(q)}" for n, q in zip(names, values))


def _failed(src, task: _Task, why: str) -> ShotResult:
    f = make(SHOT_FAILED, f"shot {task.index} ({_values_text(task.names, task.values)}) failed: {why}",
             src.main.pos(()) if src is not None else None,
             hint="report this with the file; the other shots' results stand")
    return ShotResult(task.index, task.written_index, task.values, (f,))


def run_task(src: Sources, task: _Task):
    """Resolve, preflight and (optionally) build one shot. Never raises.

    Returns (ShotResult, payload): payload is (shot, compiled, findings) when
    the build is to be written by the caller (cluster path), else None.
    """
    from .pipeline import preflight_resolved

    try:
        if task.crash == "raise":
            raise RuntimeError("simulated failure (test)")
        if task.crash == "exit":
            os._exit(3)
        overrides = dict(zip(task.names, task.values))
        shot, rf = resolve(src, overrides)
        key = shot_key(_label(shot, overrides)) if shot is not None else None
        base = ShotResult(task.index, task.written_index, task.values, (), key)
        if key is not None and task.reuse_key == key:
            return replace(base, reused=True), None
        res = preflight_resolved(src, shot, rf)
        result = replace(base, findings=tuple(res.findings), input_sha256=key if res.shot is not None else None)
        if not task.build or not result.ok or res.compiled is None:
            return result, None
        shot = _label(res.shot, overrides)
        if task.out_dir is None:
            return result, (shot, res.compiled, list(res.findings))
        return write_shot(Path(task.out_dir), task.folder, shot, res.compiled, list(res.findings), result), None
    except Exception as exc:  # a failing shot never kills the scan
        return _failed(src, task, f"{type(exc).__name__}: {exc}"), None


def write_shot(out: Path, folder: str, shot, compiled, findings, result: ShotResult) -> ShotResult:
    """Write one shot's build folder (atomic, via write_build) and note its hashes."""
    from .emit.build import write_build

    path = write_build(out / folder, shot, compiled, findings, force=True)
    raw = (path / "manifest.json").read_bytes()
    man = json.loads(raw)
    tables = tuple((dev, tuple(sorted((kind, f["sha256"]) for kind, f in info["files"].items())))
                   for dev, info in sorted(man["devices"].items()))
    return replace(result, folder=folder, manifest_sha256=hashlib.sha256(raw).hexdigest(), tables=tables)


# ----------------------------------------------------------------------------- workers

_WORKER_SOURCES: Sources | None = None


def _init_worker(src: Sources) -> None:
    global _WORKER_SOURCES
    _WORKER_SOURCES = src


def _run_chunk(tasks):
    return [run_task(_WORKER_SOURCES, t) for t in tasks]


def _dask_run(src, task):
    return run_task(src, task)


def _mp_context():
    methods = multiprocessing.get_all_start_methods()
    if "fork" in methods and threading.active_count() == 1:
        return multiprocessing.get_context("fork")  # cheapest: workers inherit the imported modules
    if "forkserver" in methods:  # forking a process that runs threads is unsafe
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(["seqgen.pipeline", "seqgen.batch"])
        return ctx
    return multiprocessing.get_context("spawn")


def default_jobs() -> int:
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # pragma: no cover - not on Linux
        return max(1, os.cpu_count() or 1)


def _execute_local(src, tasks, jobs, on_result) -> None:
    if jobs <= 1 or len(tasks) <= 1:
        for t in tasks:
            on_result(*run_task(src, t))
        return
    pending = list(tasks)
    while pending:
        done_any, broken = _pool_pass(src, pending, jobs, on_result)
        if not broken:
            return
        if not done_any:  # isolate the first task: if it alone breaks a pool, it is the culprit
            first, rest = broken[0], broken[1:]
            _, again = _pool_pass(src, [first], 1, on_result)
            if again:
                on_result(_failed(src, first, "its worker process died (out of memory or a crash in a library)"),
                          None)
            pending = rest
        else:
            pending = broken


def _pool_pass(src, tasks, jobs, on_result):
    """Run tasks in one process pool; returns (anything finished?, tasks lost to a broken pool)."""
    jobs = min(jobs, len(tasks))
    size = max(1, min(8, len(tasks) // (jobs * 16)))
    chunks = [tasks[i:i + size] for i in range(0, len(tasks), size)]
    broken, done_any = [], False
    with ProcessPoolExecutor(max_workers=jobs, mp_context=_mp_context(), initializer=_init_worker,
                             initargs=(src,)) as ex:
        futs = {ex.submit(_run_chunk, c): c for c in chunks}
        while futs:
            finished, _ = wait(list(futs), return_when=FIRST_COMPLETED)
            for fut in finished:
                chunk = futs.pop(fut)
                try:
                    results = fut.result()
                except BrokenProcessPool:
                    broken.extend(chunk)
                    continue
                except Exception as exc:  # pickling trouble and the like: fail these shots only
                    for t in chunk:
                        on_result(_failed(src, t, f"{type(exc).__name__}: {exc}"), None)
                    continue
                done_any = True
                for r in results:
                    on_result(*r)
    broken.sort(key=lambda t: t.index)
    return done_any, broken


def _execute_dask(src, tasks, address, on_result) -> None:
    try:
        from distributed import Client, as_completed
    except ImportError as exc:
        raise ClusterUnavailable("--cluster needs dask.distributed: pip install 'seqgen[cluster]'") from exc
    try:
        client = Client(address, timeout="10s", set_as_default=False)
    except (OSError, TimeoutError, ValueError) as exc:
        raise ClusterUnavailable(f"cannot reach the cluster at {address}: {exc}") from exc
    try:
        fsrc = client.scatter(src, broadcast=True, hash=False)
        futs = {client.submit(_dask_run, fsrc, replace(t, out_dir=None), pure=False): t for t in tasks}
        for fut in as_completed(list(futs), loop=client.loop):
            t = futs[fut]
            try:
                result, payload = fut.result()
            except Exception as exc:  # a lost worker, a task that could not run
                result, payload = _failed(src, t, f"{type(exc).__name__}: {exc}"), None
            on_result(result, payload)
    finally:
        client.close()


# ----------------------------------------------------------------------------- running a scan


def run_scan(scan: Scan, *, out: str | Path | None = None, force: bool = False, jobs: int | None = None,
             cluster: str | None = None, progress: bool = False, _crash: dict | None = None) -> Scan:
    """Preflight every shot of a planned scan; with `out`, build each good shot.

    Raises BuildExists (out exists and may not be touched), ClusterUnavailable.
    `_crash` (tests only): {shot index: "raise" | "exit"}.
    """
    if scan.plan is None or has_errors(scan.findings):
        return scan
    src, plan = scan.sources, scan.plan
    t_start = time.perf_counter()
    jobs = default_jobs() if jobs is None else max(1, int(jobs))
    width = max(4, len(str(len(plan) - 1)))
    folders = [f"shot_{i:0{width}d}" for i in range(len(plan))]
    reuse: dict = {}
    manifest_writer = None
    stale: list = []  # old shot folders to remove once this run has built something
    if out is not None:
        out = Path(out)
        reuse, stale, had_build = _prepare_out(out, scan, folders, force)
        # over an existing build, scan.json is rewritten only once a shot is built or kept: a run whose every
        # shot is refused leaves the previous build as it was (as a single file's refused build does)
        manifest_writer = _ManifestWriter(out, scan, folders, reuse, hold=had_build)
    crash = _crash or {}
    tasks = [_Task(i, plan.written_index[i], plan.names, plan.points[i], folders[i],
                   str(out) if out is not None else None, out is not None,
                   reuse[i]["input_sha256"] if i in reuse else None, crash.get(i))
             for i in range(len(plan))]
    results: dict = {}
    bar = _progress_bar(len(tasks), progress)

    def on_result(result: ShotResult, payload) -> None:
        if result.reused:
            rec = reuse[result.index]
            result = replace(result, findings=tuple(rec["findings"]), folder=rec["build"],
                             manifest_sha256=rec["manifest_sha256"], tables=rec["tables"])
        elif payload is not None:
            try:
                result = write_shot(out, folders[result.index], *payload, result)
            except OSError as exc:
                result = replace(result, findings=result.findings + (make(
                    SHOT_FAILED, f"shot {result.index}: cannot write its build: {exc.strerror or exc}",
                    src.main.pos(()), hint="check the disk space and permissions of the output folder"),))
        if out is not None and result.folder is None:
            stale.append(out / folders[result.index])  # an old build of this index no longer matches
        results[result.index] = result
        if manifest_writer is not None:
            manifest_writer.update(result)
        bar.update(1)

    try:
        if cluster:
            _execute_dask(src, tasks, cluster, on_result)
        else:
            _execute_local(src, tasks, jobs, on_result)
    finally:
        bar.close()
        if manifest_writer is not None and not manifest_writer.hold:
            manifest_writer.flush()
            for p in stale:
                _remove(p)
    scan.shots = [results[i] for i in range(len(plan))]
    scan.out = out
    scan.stats = {"shots": len(plan), "reused": sum(r.reused for r in scan.shots),
                  "built": sum(1 for r in scan.shots if r.folder and not r.reused),
                  "failed": sum(not r.ok for r in scan.shots), "jobs": 0 if cluster else jobs,
                  "seconds": time.perf_counter() - t_start,
                  "kept_previous": bool(manifest_writer is not None and manifest_writer.hold)}
    return scan


class _Bar:
    def update(self, n):
        pass

    def close(self):
        pass


def _progress_bar(total: int, enabled: bool):
    if not enabled:
        return _Bar()
    try:
        import tqdm
    except ImportError:
        return _Bar()
    tqdm.tqdm.monitor_interval = 0  # no monitor thread: worker processes are forked after this
    return tqdm.tqdm(total=total, unit="shot", file=sys.stderr, leave=False, dynamic_ncols=True)


def _remove(path: Path) -> None:
    if path.is_dir() and not path.is_symlink():
        shutil.rmtree(path, ignore_errors=True)
    elif path.exists() or path.is_symlink():
        path.unlink()


def scan_input_sha256(scan: Scan) -> str:
    """sha256 of what defines a scan build: tool version, main file name, source hashes, plan."""
    h = hashlib.sha256(f"seqgen {__version__}\n{scan.sources.main.file}\n".encode())
    for sha in sorted(scan.sources.hashes.values()):
        h.update(sha.encode())
    h.update(scan.plan.fingerprint().encode())
    return h.hexdigest()


def _prepare_out(out: Path, scan: Scan, folders: list, force: bool) -> tuple[dict, list, bool]:
    """Decide resume / update / replace; returns {index: verified previous record}."""
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
            _remove(p)
        elif p.name.startswith("shot_") and p.name not in wanted:  # shots no longer in the scan: removed
            stale.append(p)  # only once the new run has built something
    reuse = {}
    for rec in (old or {}).get("shots", []):
        i = rec.get("index")
        if (not isinstance(i, int) or i >= len(folders) or rec.get("status") not in ("built", "pending")
                or rec.get("build") != folders[i] or not rec.get("input_sha256")):
            continue
        found = _verify(out / folders[i], rec)
        if found is not None:
            reuse[i] = {"input_sha256": rec["input_sha256"], "build": rec["build"], "findings": tuple(found),
                        "manifest_sha256": rec["manifest_sha256"],
                        "tables": tuple((d, tuple(sorted(v.items()))) for d, v in sorted(rec["tables"].items()))}
    return reuse, stale, old is not None


def _verify(folder: Path, rec: dict) -> list | None:
    """The shot's findings when its build is intact (manifest and tables match their hashes), else None."""
    from .emit.build import file_sha256

    try:
        raw = (folder / "manifest.json").read_bytes()
        if hashlib.sha256(raw).hexdigest() != rec.get("manifest_sha256"):
            return None
        man = json.loads(raw)
        for info in man["devices"].values():
            for f in info["files"].values():
                if file_sha256(folder / f["path"]) != f["sha256"]:
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


def _qty_json(q: Qty) -> dict:
    from .resolve.units import display_unit

    return {"value": q.value, "unit": display_unit(q.dims)}


def _shot_head(plan: ScanPlan, r: ShotResult) -> dict:
    """What names a shot in both the scan manifest and the --json report."""
    return {
        "index": r.index,
        "written_index": r.written_index,
        "params": {n: _qty_json(q) for n, q in zip(plan.names, r.values)},
        "input_sha256": r.input_sha256,
    }


def shot_record(plan: ScanPlan, r: ShotResult) -> dict:
    """One shot of OUT/scan.json (schemas/scan.schema.json)."""
    return {
        **_shot_head(plan, r),
        "status": "built" if r.folder else "refused",
        "build": r.folder,
        "manifest_sha256": r.manifest_sha256,
        "tables": {dev: dict(files) for dev, files in r.tables},
        "findings": summary(r.findings),
    }


def scan_description(plan: ScanPlan) -> dict:
    from .resolve.units import display_unit

    return {
        "params": [{"name": a.name, "unit": display_unit(a.values[0].dims), "group": a.group, "kind": a.kind,
                    "values": [q.value for q in a.values]} for a in plan.axes],
        "combine": plan.combine,
        "nest": list(plan.nest),
        "order": plan.order,
        "seed": plan.seed,
        "shots": len(plan),
    }


class _ManifestWriter:
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


# ----------------------------------------------------------------------------- summary


@dataclass(frozen=True)
class CodeSummary:
    code: str
    severity: str
    shots: tuple  # indices of the shots where it fires
    accepted: int  # how many of those findings are accepted
    where: str  # "for hold <= 3 ms; quiet from 4 ms", "in every shot", ...
    first: Finding


def summarize(scan: Scan) -> list[CodeSummary]:
    """For each finding code: the shots where it fires and the param ranges that bound them."""
    plan, shots = scan.plan, scan.shots
    by_code: dict = {}
    for r in shots:
        for f in r.findings:
            by_code.setdefault(f.code, {}).setdefault(r.index, []).append(f)
    out = []
    rank = {s: i for i, s in enumerate(SEVERITIES)}
    for code, hits in by_code.items():
        idx = tuple(sorted(hits))
        fs = [f for i in idx for f in hits[i]]
        sev = min((f.severity for f in fs), key=lambda s: rank.get(s, 9))
        out.append(CodeSummary(code, sev, idx, sum(f.accepted for f in fs), describe_where(plan, shots, set(idx)),
                               hits[idx[0]][0]))
    out.sort(key=lambda c: (rank.get(c.severity, 9), c.code))
    return out


def describe_where(plan: ScanPlan, shots: list, firing: set) -> str:
    n = len(shots)
    if len(firing) == n:
        return "in every shot"
    axes = []
    for k, name in enumerate(plan.names):
        vals = sorted({r.values[k].value for r in shots})
        by_val: dict = {}
        for r in shots:
            by_val.setdefault(r.values[k].value, set()).add(r.index in firing)
        explains = all(len(s) == 1 for s in by_val.values())
        fire_vals = {v for v, s in by_val.items() if True in s}
        axes.append((name, plan.axis(name).values[0].dims, vals, fire_vals, explains))
    single = [a for a in axes if a[4]]
    if single:
        parts = [_runs_text(name, dims, vals, fv, quiet=len(single) == 1) for name, dims, vals, fv, _ in single]
        return "for " + " and ".join(parts)
    # a box: the firing shots are exactly those whose every value lies in its projection
    in_box = {r.index for r in shots
              if all(r.values[k].value in a[3] for k, a in enumerate(axes))}
    if in_box == firing:
        parts = [_runs_text(name, dims, vals, fv, quiet=False) for name, dims, vals, fv, _ in axes if fv != set(vals)]
        return "for " + " and ".join(parts)
    listed = sorted(firing)
    more = f", ... ({len(listed) - 8} more)" if len(listed) > 8 else ""
    return "in shots " + ", ".join(map(str, listed[:8])) + more + " (no single param range; see --json)"


def _runs_text(name: str, dims, vals: list, fire: set, quiet: bool) -> str:
    def fmt(v):
        return format_qty(Qty(v, dims))

    runs, cur = [], []
    for v in vals:
        if v in fire:
            cur.append(v)
        elif cur:
            runs.append(cur)
            cur = []
    if cur:
        runs.append(cur)
    if len(runs) == 1:
        r = runs[0]
        lo_i, hi_i = vals.index(r[0]), vals.index(r[-1])
        if lo_i == 0 and hi_i == len(vals) - 1:
            return f"every {name}"
        if lo_i == 0:
            return f"{name} <= {fmt(r[-1])}" + (f"; quiet from {fmt(vals[hi_i + 1])}" if quiet else "")
        if hi_i == len(vals) - 1:
            return f"{name} >= {fmt(r[0])}" + (f"; quiet up to {fmt(vals[lo_i - 1])}" if quiet else "")
    texts = [f"{name} = {fmt(r[0])}" if len(r) == 1 else f"{fmt(r[0])} <= {name} <= {fmt(r[-1])}" for r in runs]
    return "(" + " or ".join(texts) + ")" if len(texts) > 1 else texts[0]


def shot_json(plan: ScanPlan, r: ShotResult) -> dict:
    """One shot of the `seqgen check --json` report of a scan."""
    return {
        **_shot_head(plan, r),
        "ok": r.ok,
        "build": r.folder,
        "reused": r.reused,
        "summary": summary(r.findings),
        "findings": [f.to_dict() for f in r.findings],
    }


def scan_json(scan: Scan) -> dict:
    """The whole scan as JSON-ready data (per-shot results, per-code summary)."""
    doc = {"file": scan.file, "findings": [f.to_dict() for f in scan.findings]}
    if scan.plan is None:
        return doc
    doc["scan"] = scan_description(scan.plan)
    doc["summary"] = {"shots": len(scan.shots), "pass": sum(r.ok for r in scan.shots),
                      "fail": sum(not r.ok for r in scan.shots)}
    doc["codes"] = {c.code: {"severity": c.severity, "shots": list(c.shots), "accepted": c.accepted, "where": c.where}
                    for c in summarize(scan)}
    doc["shots"] = [shot_json(scan.plan, r) for r in scan.shots]
    if scan.out is not None:
        doc["build"] = str(scan.out)
        doc["stats"] = {k: v for k, v in scan.stats.items() if k != "seconds"}
    return doc


def totals(scan: Scan) -> dict:
    """Finding counts over every shot (and the scan-level findings)."""
    fs = list(scan.findings) + [f for r in scan.shots for f in r.findings]
    return summary(fs)


def fmt_duration(seconds: float) -> str:
    return format_value(seconds, "s")


def report_text(scan: Scan, *, built: bool = False) -> str:
    """Compact text summary of a run scan: one entry per finding code with the param ranges where it fires."""
    from .findings import format_text

    n = len(scan.plan)
    lines = [f"{scan.file}: scan of {n} shot{'s' if n != 1 else ''}: {scan.plan.describe()}"]
    for c in summarize(scan):
        acc = f", {c.accepted} accepted" if c.accepted else ""
        count = (f"in all {len(scan.shots)} shots" if len(c.shots) == len(scan.shots)
                 else f"{len(c.shots)} of {len(scan.shots)} shots, {c.where}")
        lines.append(f"  {c.code} ({c.severity}{acc}): {count}")
        r = scan.shots[c.shots[0]]
        lines.append(f"    first in shot {r.index} ({_values_text(scan.plan.names, r.values)}):")
        lines.extend("      " + ln for ln in format_text(c.first).splitlines())
    good = sum(r.ok for r in scan.shots)
    t = totals(scan)
    if built and scan.out is not None:
        st = scan.stats
        if st.get("kept_previous"):
            lines.append(f"no shot could be built (every shot has errors): {scan.out}/ is left as it was")
        else:
            lines.append(f"built {st['built'] + st['reused']} of {len(scan.shots)} shots into {scan.out}/ "
                         f"({st['built']} written, {st['reused']} kept unchanged); scan manifest "
                         f"{scan.out / SCAN_MANIFEST}")
        if st["failed"]:
            lines.append(f"  {st['failed']} shot(s) not built: fix their errors (or accept them with a reason)")
    lines.append(f"{scan.file}: {good} of {len(scan.shots)} shots pass; over all shots {t['error']} error(s), "
                 f"{t['warning']} warning(s), {t['note']} note(s)" + (f", {t['accepted']} accepted" if t["accepted"] else ""))
    return "\n".join(lines)
