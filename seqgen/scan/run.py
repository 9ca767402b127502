"""Running the shots of a planned scan: preflight every shot, and build each into its own folder.

    scan = plan_scan("sequences/x.yaml")          # seqgen/scan/plan.py
    run_scan(scan)                                 # preflight every shot (process pool)
    run_scan(scan, out="build/x", force=False)     # ... and write build/x/shot_0000/ ... + build/x/scan.json

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
The build folder (resume, verify, scan.json) is seqgen/scan/store.py's.
"""

from __future__ import annotations

import multiprocessing
import os
import sys
import threading
import time
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import replace
from pathlib import Path

from ..codes import SHOT_FAILED
from ..emit.claim import claimed
from ..emit.writers import select_writers
from ..findings import has_errors, make
from ..pipeline import preflight_resolved
from ..resolve.sequence import resolve
from ..resolve.sources import Sources
from .plan import Scan, ShotResult, ShotTask, label_shot, shot_key, values_text
from .store import ManifestWriter, listed_tables, prepare_out, remove_path, write_shot
from .tables import collect


class ClusterUnavailable(Exception):
    pass


# ----------------------------------------------------------------------------- one shot


def _failed(src, task: ShotTask, why: str) -> ShotResult:
    f = make(SHOT_FAILED, f"shot {task.index} ({values_text(task.names, task.values)}) failed: {why}",
             src.main.pos(()) if src is not None else None,
             hint="report this with the file; the other shots' results stand")
    return ShotResult(task.index, task.written_index, task.values, (f,))


def run_task(src: Sources, task: ShotTask):
    """Resolve, preflight and (optionally) build one shot. Never raises.

    Returns (ShotResult, payload): payload is (shot, compiled, findings) when
    the build is to be written by the caller (cluster path), else None.
    """
    try:
        if task.crash == "raise":
            raise RuntimeError("simulated failure (test)")
        if task.crash == "exit":
            os._exit(3)
        overrides = dict(zip(task.names, task.values))
        shot, rf = resolve(src, overrides)
        key = shot_key(label_shot(shot, overrides)) if shot is not None else None
        base = ShotResult(task.index, task.written_index, task.values, (), key)
        if key is not None and task.reuse_key == key:
            return replace(base, reused=True), None
        res = preflight_resolved(src, shot, rf)
        result = replace(base, findings=tuple(res.findings), input_sha256=key if res.shot is not None else None)
        if not task.build or not result.ok or res.compiled is None:
            return result, None
        shot = label_shot(res.shot, overrides)
        if task.out_dir is None:
            return result, (shot, res.compiled, list(res.findings))
        return write_shot(Path(task.out_dir), task.folder, shot, res.compiled, list(res.findings), result,
                          task.tables), None
    except Exception as exc:  # a failing shot never kills the scan
        return _failed(src, task, f"{type(exc).__name__}: {exc}"), None


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
        ctx.set_forkserver_preload(["seqgen.pipeline", "seqgen.scan.run"])
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
             cluster: str | None = None, progress: bool = False, tables=None, _crash: dict | None = None) -> Scan:
    """Preflight every shot of a planned scan; with `out`, build each good shot.

    `tables`: the table writers by name ("npz,csv,hdf5" or a tuple of names; None: the default set); an unknown
    name raises WriterError (seqgen.emit.writers) before anything is run.

    Raises BuildExists (seqgen.emit.build: out exists and may not be touched), OutputBusy (another process
    builds into `out`; with `force` it is waited for, bounded), ClusterUnavailable.
    `_crash` (tests only): {shot index: "raise" | "exit"}.
    """
    if scan.plan is None or has_errors(scan.findings):
        return scan
    if tables is not None:
        tables = tuple(w.name for w in select_writers(tables))  # refused here, before any shot runs
    if out is None:
        return _run(scan, None, force, jobs, cluster, progress, _crash, tables)
    out = Path(out)
    out.parent.mkdir(parents=True, exist_ok=True)
    with claimed(out, wait=force):  # the whole run: resume decision, every shot, the shared tables, scan.json
        return _run(scan, out, force, jobs, cluster, progress, _crash, tables)


def _run(scan: Scan, out: Path | None, force: bool, jobs, cluster, progress, _crash, tables=None) -> Scan:
    src, plan = scan.sources, scan.plan
    t_start = time.perf_counter()
    jobs = default_jobs() if jobs is None else max(1, int(jobs))
    width = max(4, len(str(len(plan) - 1)))
    folders = [f"shot_{i:0{width}d}" for i in range(len(plan))]
    reuse: dict = {}
    manifest_writer = None
    stale: list = []  # old shot folders to remove once this run has built something
    if out is not None:
        reuse, stale, had_build = prepare_out(out, scan, folders, force)
        # over an existing build, scan.json is rewritten only once a shot is built or kept: a run whose every
        # shot is refused leaves the previous build as it was (as a single file's refused build does)
        manifest_writer = ManifestWriter(out, scan, folders, reuse, hold=had_build)
    crash = _crash or {}
    tasks = [ShotTask(i, plan.written_index[i], plan.names, plan.points[i], folders[i],
                   str(out) if out is not None else None, out is not None,
                   reuse[i]["input_sha256"] if i in reuse else None, crash.get(i), tables)
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
                result = write_shot(out, folders[result.index], *payload, result, tables)
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
                remove_path(p)
            collect(out, listed_tables(manifest_writer.records.values()))  # tables no shot lists any more
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
