"""Benchmark of the transfer-matrix scattering solver (run by hand, not collected by pytest).

    python tests/benchmarks/bench_scattering.py

Times scalar and spinor transmission for 1000 energies through a light-sheet
barrier of 2000 cells and compares each with a reference bound: one numpy
batched matrix-product chain (pairwise np.matmul tree) over a stack of random
matrices of the same size and dimension (2x2 scalar, 4x4 spinor).  Prints
times and ratios (target: ratio < 5 and time < 0.5 s).
"""

from __future__ import annotations

import os
import sys
import time

import numpy as np
from scipy.constants import hbar, u

sys.path.insert(0, os.path.join(os.path.dirname(__file__), "..", ".."))

from seqgen.physics import scattering as sc  # noqa: E402

N_ENERGIES = 1000
N_CELLS = 2000
REPEATS = 5


def best_time(fn):
    best = np.inf
    for _ in range(REPEATS):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def matmul_chain(M):
    while M.shape[0] > 1:
        n = M.shape[0]
        h = n // 2
        P = np.matmul(M[1 : 2 * h : 2], M[0 : 2 * h : 2])
        if n % 2:
            P = np.concatenate([P, M[-1:]], axis=0)
        M = P
    return M[0]


def main():
    m = 86.909180531 * u                       # Rb-87 mass (AME2020)
    waist = 2e-6
    V0 = 20 * hbar**2 / (2 * m * waist**2)
    x = np.linspace(-2 * waist, 2 * waist, N_CELLS + 1)
    V = sc.gaussian_sheet_potential(0.5 * (x[1:] + x[:-1]), V0, waist)
    E = np.linspace(0.2, 2.0, N_ENERGIES) * V0
    omega_rabi = 0.05 * V0 / hbar
    rabi = omega_rabi * np.exp(-2 * (0.5 * (x[1:] + x[:-1])) ** 2 / waist**2)

    rng = np.random.default_rng(1)
    ref2 = rng.standard_normal((N_CELLS, N_ENERGIES, 2, 2)) * 0.5
    ref4 = rng.standard_normal((N_CELLS, N_ENERGIES, 4, 4)) * 0.3

    t_scalar = best_time(lambda: sc.transmission(x, V, E, m))
    t_bound2 = best_time(lambda: matmul_chain(ref2))
    t_spinor = best_time(lambda: sc.spinor_transmission(x, V, V, rabi, 0.0, E, m))
    t_bound4 = best_time(lambda: matmul_chain(ref4))

    res = sc.transmission(x, V, E, m)
    sres = sc.spinor_transmission(x, V, V, rabi, 0.0, E, m)
    print(f"{N_ENERGIES} energies x {N_CELLS} cells, best of {REPEATS}")
    print(f"scalar : solver {t_scalar:.4f} s   matmul-chain bound (2x2) {t_bound2:.4f} s   "
          f"ratio {t_scalar / t_bound2:.2f}   max|R+T-1| {res.unitarity_error.max():.1e}")
    print(f"spinor : solver {t_spinor:.4f} s   matmul-chain bound (4x4) {t_bound4:.4f} s   "
          f"ratio {t_spinor / t_bound4:.2f}   max|S^H S-1| {sres.unitarity_error.max():.1e}")


if __name__ == "__main__":
    main()
