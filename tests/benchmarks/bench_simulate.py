"""Simulation benchmark (run by hand): python tests/benchmarks/bench_simulate.py [--interactions on|off]

1. The barrier demo's crossing (`seqgen.physics.crossing.simulate_crossing`, one run at the chosen grid and
   step) against the time numpy takes for the same number of FFT pairs (numpy.fft.fft + numpy.fft.ifft of a
   (2, n) complex array, n the grid's size): their ratio (target <= 2). scipy.fft, which the solver uses, is
   timed the same way for reference. The solver does one batched FFT pair per step; everything else it does
   per step (kinetic and local phases, the 2x2 coupling in the sheet's window, the mean field where the atoms
   are) is what the ratio measures.
2. The wall time of `seqgen simulate sequences/na23_barrier_scatter.yaml` as a user runs it (a fresh process:
   preflight, the simulation, the convergence run at half dx and dt, text output); target within a minute on
   2 cores.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from seqgen.physics.crossing import simulate_crossing  # noqa: E402
from seqgen.pipeline import preflight  # noqa: E402
from seqgen.predict.simulate import build_setup  # noqa: E402

DEMO = ROOT / "sequences" / "na23_barrier_scatter.yaml"


def fft_pairs(n: int, pairs: int, module) -> float:
    """Seconds for `pairs` forward-and-inverse FFTs of a (2, n) complex array with `module` (numpy.fft or
    scipy.fft)."""
    a = np.exp(1j * np.linspace(0, 50, 2 * n)).reshape(2, n)
    start = time.perf_counter()
    for _ in range(pairs):
        a = module.ifft(module.fft(a, axis=-1), axis=-1)
    return time.perf_counter() - start


def main(argv=None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--interactions", choices=("on", "off"), default="on")
    p.add_argument("--skip-cli", action="store_true", help="skip the wall time of the command")
    p.add_argument("--repeat", type=int, default=3, help="timings of each, the best taken (default 3)")
    args = p.parse_args(argv)
    import scipy.fft

    shot = preflight(str(DEMO)).shot
    setup = build_setup(shot, interactions=args.interactions == "on")
    setup_crossing = setup.crossing
    simulate_crossing(setup_crossing)  # warm up (imports, FFT plans)
    sims, refs_np, refs_sp = [], [], []
    for _ in range(args.repeat):  # interleaved, the best of each: other load on the machine hits both alike
        start = time.perf_counter()
        c = simulate_crossing(setup_crossing)
        sims.append(time.perf_counter() - start)
        n, steps = c.numerics.n, c.numerics.steps
        refs_np.append(fft_pairs(n, steps, np.fft))
        refs_sp.append(fft_pairs(n, steps, scipy.fft))
    sim, ref_np, ref_sp = min(sims), min(refs_np), min(refs_sp)
    print(f"crossing of the demo (interactions {args.interactions}): {n} points, {steps} steps: {sim:.2f} s")
    print(f"  numpy.fft, {steps} FFT pairs of (2, {n}): {ref_np:.2f} s -> ratio {sim / ref_np:.2f} (target <= 2)")
    print(f"  scipy.fft, the same pairs: {ref_sp:.2f} s -> ratio {sim / ref_sp:.2f}")
    if not args.skip_cli:
        env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
        start = time.perf_counter()
        done = subprocess.run([sys.executable, "-m", "seqgen", "simulate", str(DEMO)], cwd=ROOT, env=env,
                              capture_output=True, text=True)
        wall = time.perf_counter() - start
        print(f"seqgen simulate {DEMO.relative_to(ROOT)} (with the convergence run): {wall:.1f} s wall, exit "
              f"{done.returncode} (target within 60 s on 2 cores; {os.cpu_count()} cores here)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
