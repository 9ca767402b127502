"""Disk use of a scan build (run by hand): python tests/benchmarks/bench_scan_disk.py [--shots N] [--tables NAMES]

Builds the demo scattering sequence (sequences/na23_barrier_scatter.yaml) once as a single shot (its base shot,
`seqgen build` of a file without a scan: today's uncompressed tables) and as a scan build over the time of flight
(by default the demo's own scan, 3 shots from 10 ms to 14 ms; `--shots N`: N values over the same range), and
prints, measured in this run:
- the bytes of the single build and of the scan build (file sizes, and the blocks the file system allocates);
- the ratio of the scan's bytes to the single shot's (the target for the demo's 3 shots is <= 1.5);
- what the scan would take with one uncompressed build folder per shot (N x the single shot), and the ratio;
- the scan's bytes over N x a single shot written with the scan's compressed tables, i.e. what storing each
  distinct table once saves beyond compression (1.0 when every shot's tables differ).
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from seqgen.emit.build import write_build  # noqa: E402
from seqgen.emit.writers import compact_writers, select_writers  # noqa: E402
from seqgen.pipeline import preflight  # noqa: E402
from seqgen.scan.plan import plan_scan  # noqa: E402
from seqgen.scan.run import run_scan  # noqa: E402

DEMO = ROOT / "sequences" / "na23_barrier_scatter.yaml"


def scanned_copy(folder: Path, shots: int | None) -> Path:
    """The demo (its rig and used files copied beside it); with `shots`, a tof scan of that many values."""
    for sub in ("rigs", "common"):
        (folder / sub).mkdir(exist_ok=True)
        for f in (DEMO.parent / sub).glob("*.yaml"):
            shutil.copy(f, folder / sub / f.name)
    lines = []
    for line in DEMO.read_text(encoding="utf-8").splitlines():
        if shots is not None and line.strip().startswith("tof:"):
            line = f"  tof: {{value: 14 ms, min: 1 ms, scan: {{from: 10 ms, to: 14 ms, steps: {shots}}}}}"
        lines.append(line)
    path = folder / "scan.yaml"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def disk(folder: Path) -> tuple[int, int]:
    """(sum of file sizes, bytes of allocated blocks) of every file under `folder`."""
    size = blocks = 0
    for p in folder.rglob("*"):
        if p.is_file() and not p.is_symlink():
            st = os.stat(p)
            size += st.st_size
            blocks += getattr(st, "st_blocks", (st.st_size + 511) // 512) * 512
    return size, blocks


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--shots", type=int, default=None, help="tof values (default: the demo's own scan, 3 shots)")
    ap.add_argument("--tables", default=None, help="table writers by name, as seqgen build --tables")
    ap.add_argument("--jobs", type=int, default=None, help="worker processes of the scan (default: every core)")
    args = ap.parse_args()
    writers = select_writers(args.tables)
    with tempfile.TemporaryDirectory(prefix="seqgen-bench-disk-") as tmp:
        tmp = Path(tmp)
        path = scanned_copy(tmp, args.shots)
        base = preflight(path)  # the base shot: every scanned param at its value:
        assert base.ok, "the demo's base shot has error findings"
        single = disk(write_build(tmp / "single", base.shot, base.compiled, base.findings, writers=writers))
        packed = disk(write_build(tmp / "packed", base.shot, base.compiled, base.findings,
                                  writers=compact_writers(writers)))
        scan = run_scan(plan_scan(path), out=tmp / "scan", jobs=args.jobs, tables=args.tables)
        n = len(scan.shots)
        assert scan.stats["built"] == n, f"only {scan.stats['built']} of {n} shots built"
        whole = disk(tmp / "scan")
        stored = sorted((tmp / "scan" / "tables").iterdir())
        print(f"scan of {n} shots over tof ({', '.join(w.name for w in writers)} tables); "
              f"{len(stored)} distinct table files stored in tables/")
        for label, k in (("file sizes", 0), ("allocated blocks", 1)):
            print(f"  {label}:")
            print(f"    one shot built alone            {single[k] / 1e6:10.3f} MB")
            print(f"    scan build                      {whole[k] / 1e6:10.3f} MB   ratio to one shot: "
                  f"{whole[k] / single[k]:.3f}  (target for the demo's 3 shots: <= 1.5)")
            print(f"    {n} uncompressed shot folders   {n * single[k] / 1e6:10.3f} MB   ratio: {n:.3f}")
            print(f"    scan / ({n} x one compressed shot) {whole[k] / (n * packed[k]):.3f}  "
                  "(what storing each distinct table once saves beyond compression)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
