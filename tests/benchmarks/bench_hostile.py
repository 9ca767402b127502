"""Worst-case time and memory on hostile input (run by hand): python tests/benchmarks/bench_hostile.py [CASE ...]

Each case runs in a fresh child process (so peak memory is its own): it builds a
hostile input, runs every stage that the input lets run (load, validate, resolve,
checks, compile; no build folder), and reports wall time, CPU time and peak
resident memory. The last column is the ratio of the CPU time to that of a
preflight of the bundled thermometry demo in the same way, so the numbers
compare across machines. Every case must end in findings or a preflight, never
a traceback (the child exits non-zero if one happens).
"""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
HEAD = "seqgen: 1\nrig: rigs/na23_demo_rig.yaml\n"


def _block(actions: str) -> str:
    return HEAD + "blocks:\n  - name: a\n    at: 1 ms\n    actions:\n" + actions


CASES = {
    "demo (reference)": "DEMO",
    "8 MiB of small mappings (the size limit)":
        HEAD + "description: x\nfill:\n" + "".join(f"  k{i}: {{a: [1, 2, 3], b: x}}\n" for i in range(255_000)),
    "alias bomb (10^10 nodes)":
        "a0: &a0 [x, x, x, x, x, x, x, x, x, x]\n" + "".join(
            f"a{i}: &a{i} [{', '.join([f'*a{i - 1}'] * 10)}]\n" for i in range(1, 10)),
    "100 000 nested brackets": "a: " + "[" * 100_000 + "]" * 100_000 + "\n",
    "20 000 pulses in one block": _block("".join(
        "      - pulse: {channel: camera, duration: 20 us}\n      - hold: {duration: 20 us}\n" for _ in range(20_000))),
    "3 000 blocks": HEAD + "blocks:\n" + "".join(
        f"  - name: b{i}\n    actions:\n      - pulse: {{channel: camera, duration: 20 us}}\n" for i in range(3000)),
    "1000 s smooth ramp (1e9 ticks)": _block("      - ramp: {channel: cross_a_power, to: 1 W, over: 1000 s, shape: smooth}\n"
                                            "      - set: {channel: cross_a_power, value: 0 W}\n"),
    "1e8 s hold (under the tick limit)": _block("      - hold: {duration: 1e8 s}\n"),
    "1e11 s hold (over the tick limit)": _block("      - hold: {duration: 1e11 s}\n"),
    "2000-character expression": HEAD + "params:\n  t: '" + " + ".join(["1 ms"] * 285) + "'\n" + _block(
        "      - hold: {duration: t}\n")[len(HEAD):],
    "300 chained params": HEAD + "params:\n  p0: 1 us\n" + "".join(f"  p{i}: p{i - 1} * 1.01\n" for i in range(1, 300))
        + _block("      - hold: {duration: p299}\n")[len(HEAD):],
}

_CHILD = r"""
import json, resource, sys, time
from pathlib import Path
from seqgen.check import run_table_checks, run_timeline_checks
from seqgen.compile.tables import compile_shot
from seqgen.load.yamlsrc import LoadError
from seqgen.resolve.sequence import resolve
from seqgen.resolve.sources import load_sources
anchor = Path("sequences/bench_hostile.yaml")  # never written: rig paths resolve from its folder
text = sys.stdin.read()
if text == "DEMO":
    anchor = Path("sequences/na23_thermometry.yaml")
    text = anchor.read_text()
t0, c0 = time.perf_counter(), time.process_time()
outcome = "findings"
try:
    src = load_sources(anchor, text=text, display="hostile.yaml")
    findings = list(src.findings)
    shot, rf = resolve(src)
    findings += rf
    if shot is not None:
        findings += run_timeline_checks(shot)
        compiled, cf = compile_shot(shot)
        findings += cf + run_table_checks(shot, compiled)
        outcome = "preflight, %d rows" % sum(len(t.ticks) for t in compiled.tables)
    codes = sorted({f.code for f in findings if f.severity == "error"})
except LoadError as exc:
    codes = [exc.finding.code]
print(json.dumps({"wall": time.perf_counter() - t0, "cpu": time.process_time() - c0,
                  "rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                  "outcome": outcome, "codes": codes[:3], "bytes": len(text.encode())}))
"""


def run(name: str, text: str) -> dict:
    r = subprocess.run([sys.executable, "-c", _CHILD], input=text, cwd=ROOT, capture_output=True, text=True)
    if r.returncode != 0:
        return {"error": f"exit {r.returncode}: {r.stderr.strip().splitlines()[-1] if r.stderr.strip() else ''}"}
    return json.loads(r.stdout.strip().splitlines()[-1])


def main(argv: list[str]) -> int:
    wanted = [n for n in CASES if not argv or any(a in n for a in argv)]
    ref = run("demo", "DEMO")
    print(f"{'case':<42} {'input':>9} {'wall s':>8} {'cpu s':>8} {'peak MB':>8} {'cpu/demo':>9}  outcome")
    bad = 0
    for name in wanted:
        res = ref if name.startswith("demo") else run(name, CASES[name])
        if "error" in res:
            bad += 1
            print(f"{name:<42} CRASH {res['error']}")
            continue
        print(f"{name:<42} {res['bytes'] / 1024:>7.0f}kB {res['wall']:>8.2f} {res['cpu']:>8.2f} {res['rss_mb']:>8.0f} "
              f"{res['cpu'] / ref['cpu']:>9.1f}  {res['outcome']} {' '.join(res['codes'])}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
