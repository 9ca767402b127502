"""Scan benchmark (run by hand): python tests/benchmarks/bench_scan.py [--shots N] [--jobs P] [--build]

Scans the demo scattering sequence (sequences/na23_barrier_scatter.yaml) over
N values of the time of flight (10 ms .. 16 ms) and prints, measured in this run:
- the single-shot time: one `preflight` of the file (load + validate + resolve
  + checks + compile, in process, imports excluded, the content-keyed caches
  emptied first, as in a fresh `seqgen check`), median of 3;
- the scan time: plan_scan + run_scan over P worker processes (default: every
  core), check only, or also writing every build with --build;
- shots per second, and the ratio of the scan time to N x single-shot time
  (what checking the N shots one by one would cost; the target is <= 0.5 on
  2 cores);
- parallel efficiency: serial time per shot (M shots with one process) x N
  divided by (P x scan time);
- the CPU ratio: CPU seconds of the scan (this process and its workers) over
  N x the single shot's CPU seconds, which shows the work shared between shots
  whatever else runs on the machine (the load average is printed too).
"""

from __future__ import annotations

import argparse
import resource
import shutil
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from seqgen.pipeline import clear_shared_caches, preflight  # noqa: E402
from seqgen.scan.plan import plan_scan  # noqa: E402
from seqgen.scan.run import default_jobs, run_scan  # noqa: E402

DEMO = ROOT / "sequences" / "na23_barrier_scatter.yaml"


def scanned_copy(folder: Path, shots: int, name: str = "scan.yaml") -> Path:
    """The demo (with its rig and used file copied beside it) with a tof scan of `shots` values."""
    for sub in ("rigs", "common"):
        (folder / sub).mkdir(exist_ok=True)
        for f in (DEMO.parent / sub).glob("*.yaml"):
            shutil.copy(f, folder / sub / f.name)
    lines = []
    for line in DEMO.read_text(encoding="utf-8").splitlines():
        if line.strip().startswith("tof:"):
            line = f"  tof: {{value: 14 ms, scan: {{from: 10 ms, to: 16 ms, steps: {shots}}}}}"
        lines.append(line)
    path = folder / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _children_cpu() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def _load() -> float:
    try:
        return float(Path("/proc/loadavg").read_text().split()[0])
    except (OSError, ValueError, IndexError):
        return float("nan")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shots", type=int, default=1000)
    ap.add_argument("--jobs", type=int, default=None)
    ap.add_argument("--serial", type=int, default=8, help="shots run with one process to measure efficiency")
    ap.add_argument("--build", action="store_true", help="also write every shot's build")
    args = ap.parse_args()
    jobs = args.jobs or default_jobs()
    folder = Path(tempfile.mkdtemp(prefix="seqgen-bench-scan-"))
    try:
        path = scanned_copy(folder, args.shots)
        preflight(path)  # warm-up: lazy imports, caches of unit texts
        singles, cpus = [], []
        for _ in range(3):
            clear_shared_caches()  # a single check starts cold, as a fresh `seqgen check` process does
            t, c = time.perf_counter(), time.process_time()
            res = preflight(path)
            singles.append(time.perf_counter() - t)
            cpus.append(time.process_time() - c)
        single, single_cpu = statistics.median(singles), statistics.median(cpus)
        print(f"single shot (preflight, in process): {single * 1e3:.1f} ms wall, {single_cpu * 1e3:.1f} ms CPU "
              f"(median of 3; {'no errors' if res.ok else 'ERRORS'})")

        serial_path = scanned_copy(folder, args.serial, "serial.yaml")
        t = time.perf_counter()
        serial = run_scan(plan_scan(serial_path), jobs=1)
        t_serial = (time.perf_counter() - t) / len(serial.shots)
        print(f"serial scan of {len(serial.shots)} shots: {t_serial * 1e3:.1f} ms per shot")

        out = folder / "out" if args.build else None
        t, c0, k0 = time.perf_counter(), time.process_time(), _children_cpu()
        scan = run_scan(plan_scan(path), jobs=jobs, out=out)
        t_scan = time.perf_counter() - t
        cpu_scan = time.process_time() - c0 + _children_cpu() - k0
        n = len(scan.shots)
        what = "check + build" if args.build else "check"
        print(f"scan of {n} shots ({what}) on {jobs} process(es): {t_scan:.2f} s, {n / t_scan:.2f} shots/s, "
              f"{sum(r.ok for r in scan.shots)} pass")
        print(f"ratio scan time / (N x single-shot time): {t_scan / (n * single):.3f}  (target <= 0.5 on 2 cores)")
        print(f"parallel efficiency (N x serial per-shot) / (P x scan time): {n * t_serial / (jobs * t_scan):.2f}")
        print(f"CPU ratio scan CPU / (N x single-shot CPU): {cpu_scan / (n * single_cpu):.3f}  (work shared between "
              f"shots; independent of other load on the machine)")
        print(f"machine load average during the run: {_load():.2f} on {default_jobs()} core(s)")
        if args.build:
            again_t = time.perf_counter()
            again = run_scan(plan_scan(path), jobs=jobs, out=out)
            print(f"resume of the finished build: {time.perf_counter() - again_t:.2f} s, "
                  f"{again.stats['reused']} of {n} shots kept")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
