"""Start-up benchmark (run by hand): python tests/benchmarks/bench_start.py [--runs 5]

What an editor pays on every save: the wall time of a fresh process for
- `python -m seqgen explain physics.shallow-trap` (the code catalogue only),
- `python -m seqgen check sequences/na23_thermometry.yaml` (the small demo, the whole preflight),
- `python -c "import seqgen"` (the package face),
each the median of N fresh processes, and its ratio to the floor measured in the same run:
`python -c "import numpy"` (an interpreter that loads numpy, which every command needs).
The checkout is put first on PYTHONPATH, so the numbers are those of this tree, not an installed seqgen.
Compiled bytecode is kept (as for an installed package) in a temporary folder removed at the end, also where
PYTHONDONTWRITEBYTECODE is set; --as-is runs the commands in the environment as it is.
"""

from __future__ import annotations

import argparse
import os
import statistics
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]

COMMANDS = (
    ("import numpy (floor)", [sys.executable, "-c", "import numpy"]),
    ("explain physics.shallow-trap", [sys.executable, "-m", "seqgen", "explain", "physics.shallow-trap"]),
    ("check na23_thermometry.yaml", [sys.executable, "-m", "seqgen", "check", "sequences/na23_thermometry.yaml"]),
    ("import seqgen", [sys.executable, "-c", "import seqgen"]),
)


def wall(cmd: list, env: dict) -> float:
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=ROOT, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    t1 = time.perf_counter()
    if done.returncode not in (0, 1):  # check exits 1 on error findings; anything else is a failed run
        raise SystemExit(f"{' '.join(cmd)} failed ({done.returncode}): {done.stderr.decode()[-500:]}")
    return t1 - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5, help="fresh processes per command (median)")
    ap.add_argument("--as-is", action="store_true", help="keep the environment's bytecode settings")
    args = ap.parse_args()
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT)] + [p for p in os.environ.get("PYTHONPATH", "")
                                                                         .split(os.pathsep) if p]))
    pycache = None
    if not args.as_is:
        pycache = tempfile.mkdtemp(prefix="seqgen-bench-pyc-")
        env.pop("PYTHONDONTWRITEBYTECODE", None)
        env["PYTHONPYCACHEPREFIX"] = pycache
    try:
        run(args.runs, env, "bytecode kept" if pycache else "environment as is")
    finally:
        if pycache:
            shutil.rmtree(pycache, ignore_errors=True)


def run(runs: int, env: dict, mode: str) -> None:
    for _, cmd in COMMANDS:  # one warm-up each: bytecode, the file cache and pint's unit cache are filled
        wall(cmd, env)
    times = {name: [] for name, _ in COMMANDS}
    for _ in range(runs):  # interleaved, so a slow moment of the machine hits every command alike
        for name, cmd in COMMANDS:
            times[name].append(wall(cmd, env))
    floor = statistics.median(times[COMMANDS[0][0]])
    print(f"median of {runs} fresh processes (python {sys.version.split()[0]}, {mode}):")
    for name, _ in COMMANDS:
        m = statistics.median(times[name])
        print(f"  {name:32s} {m:6.3f} s   {m / floor:5.1f} x floor")


if __name__ == "__main__":
    main()
