"""Diff benchmark (run by hand): python tests/benchmarks/bench_diff.py [--blocks N]

Writes a synthetic sequence (16 analog and 4 digital channels on 3 devices, N
blocks chained with `after:`, each a ramp or a pulse) and two one-param
variants of it:
- "shift": a param in the anchor of the second block changes, so every later
  block moves and every output differs (the worst case for the diff);
- "local": a param used by one block near the end changes.
For each variant it prints the time of `seqgen diff` (both preflights plus the
comparison), the time of building both versions (preflight + compile + write
each) and their ratio (target < 1.5), plus the comparison alone and the ratio
of the diff to preflighting and compiling both without writing anything (the
stricter measure: what the diff adds on top of the pipeline it must run).
"""

from __future__ import annotations

import argparse
import shutil
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from seqgen.diff import diff_versions, load_version  # noqa: E402
from seqgen.emit.build import write_build  # noqa: E402
from seqgen.pipeline import preflight  # noqa: E402


def write_rig(folder: Path) -> None:
    rig = ["seqgen_rig: 1", "name: bench-diff", "devices:",
           "  ao0: {timebase: 1 MHz, min_interval: 1 us, memory_depth: 100000000}",
           "  ao1: {timebase: 1 MHz, min_interval: 1 us, memory_depth: 100000000}",
           "  dio: {timebase: 10 MHz, min_interval: 100 ns, memory_depth: 100000000}", "channels:"]
    for d in range(2):
        for c in range(8):
            rig.append(f"  a{d}_{c}: {{device: ao{d}, kind: analog, output: {{unit: V, range: [-10 V, 10 V], bits: 16}}}}")
    for c in range(4):
        rig.append(f"  ttl{c}: {{device: dio, kind: digital}}")
    (folder / "rig.yaml").write_text("\n".join(rig) + "\n")


def write_sequence(folder: Path, name: str, blocks: int, gap: str = "1 ms", late: str = "0.4 V") -> Path:
    seq = ["seqgen: 1", "rig: rig.yaml", "params:", "  swing: 0.3 V", f"  gap: {gap}", f"  late: {late}",
           "  ramp_time: 2 ms", "blocks:"]
    for b in range(blocks):
        anchor = "at: 0 s" if b == 0 else (f"after: b{b - 1} + gap" if b == 1 else f"after: b{b - 1}")
        ch = f"a{b % 2}_{(b // 2) % 8}"
        sign = "" if (b // 16) % 2 == 0 else "-"
        value = "late" if b == blocks - 3 else f"{sign}swing"
        if b % 5 == 4:
            action = f"pulse: {{channel: ttl{b % 4}, duration: 50 us}}\n      - hold: {{duration: 100 us}}"
        else:
            action = f"ramp: {{channel: {ch}, to: {value}, over: ramp_time, shape: smooth}}"
        seq.append(f"  - name: b{b}\n    {anchor}\n    actions:\n      - {action}")
    # every output back to 0 at the end
    seq.append(f"  - name: end\n    after: b{blocks - 1}\n    actions:")
    seq += [f"      - set: {{channel: a{d}_{c}, value: 0 V}}" for d in range(2) for c in range(8)]
    path = folder / name
    path.write_text("\n".join(seq) + "\n")
    return path


def build_both(a: Path, b: Path, out: Path) -> float:
    t0 = time.perf_counter()
    for src, dst in ((a, out / "build_a"), (b, out / "build_b")):
        res = preflight(src)
        write_build(dst, res.shot, res.compiled, res.findings, force=True)
    return time.perf_counter() - t0


def preflight_both(a: Path, b: Path) -> float:
    t0 = time.perf_counter()
    preflight(a)
    preflight(b)
    return time.perf_counter() - t0


def diff_both(a: Path, b: Path) -> tuple[float, float, object]:
    t0 = time.perf_counter()
    va, vb = load_version(str(a)), load_version(str(b))
    t1 = time.perf_counter()
    rep = diff_versions(va, vb)
    t2 = time.perf_counter()
    return t2 - t0, t2 - t1, rep


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--blocks", type=int, default=2000)
    args = ap.parse_args()
    folder = Path(tempfile.mkdtemp(prefix="seqgen-bench-diff-"))
    try:
        write_rig(folder)
        base = write_sequence(folder, "base.yaml", args.blocks)
        variants = {"shift": write_sequence(folder, "shift.yaml", args.blocks, gap="1.5 ms"),
                    "local": write_sequence(folder, "local.yaml", args.blocks, late="0.45 V")}
        res = preflight(base)
        rows = sum(len(t.ticks) for t in res.compiled.tables)
        print(f"sequence: {args.blocks} blocks, {len(res.shot.segments)} writes, {rows} table rows, "
              f"{len(res.findings)} findings")
        for name, variant in variants.items():
            build_s = build_both(base, variant, folder)
            pre_s = preflight_both(base, variant)
            diff_s, compare_s, rep = diff_both(base, variant)
            print(f"{name:>6}: {len(rep.changes):5d} changes | diff {diff_s:7.3f} s (comparison alone {compare_s:6.3f} s) | "
                  f"build both {build_s:7.3f} s | ratio diff / build both = {diff_s / build_s:5.2f} (target < 1.5) | "
                  f"diff / preflight both = {diff_s / pre_s:5.2f}")
    finally:
        shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    main()
