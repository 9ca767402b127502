"""Transfer-matrix numerics shared by `scattering` (scalar) and `spinor` (two components).

Plain functions in SI units, independent of the rest of seqgen; the method and
the conventions are described in `seqgen.physics.scattering`.  The names here
are the building blocks of those two modules, not an interface of their own:
callers use `seqgen.physics.scattering`.
"""

from __future__ import annotations

import numpy as np


# Number of cell matrices handled per block of energies: large enough to keep
# the Python overhead of the tree reduction negligible, small enough that the
# temporaries stay cache/allocator friendly (measured: ~5x faster for 4x4 than
# one huge stack).
_MATRICES_PER_BLOCK = 20_000

# exp(650) is near the top of the double range: beyond it the product of cell
# matrices overflows (T < 1e-560 there anyway).
_MAX_EVANESCENT_EXPONENT = 650.0


def cos_and_sinc(q2, d, check_total=False):
    """cos(q d) and sin(q d)/q for real q^2 of either sign, in real arithmetic.

    Both are entire in q^2, so the classically forbidden branch is cosh/sinh and
    q^2 = 0 is the removable limit (1, d): stable at E = V.  check_total: axis 0
    runs over cells; refuse barriers whose product of cells would overflow.
    """
    q2 = np.asarray(q2, dtype=float)
    a = np.sqrt(np.abs(q2)) * d
    pos = q2 >= 0.0
    neg = ~pos
    if np.any((a > _MAX_EVANESCENT_EXPONENT) & neg):
        raise ValueError("a cell is too opaque (kappa*d > 650): refine the grid")
    if check_total and np.any(np.sum(a, axis=0, where=neg) > _MAX_EVANESCENT_EXPONENT):
        raise ValueError("barrier too opaque for double precision (integral of kappa dx > 650, T < 1e-560)")
    # Evaluate each branch only where it applies (ufunc `where`), no wasted cosh.
    c = np.empty_like(a)
    num = np.empty_like(a)
    np.cos(a, out=c, where=pos)
    np.cosh(a, out=c, where=neg)
    np.sin(a, out=num, where=pos)
    np.sinh(a, out=num, where=neg)
    zero = a == 0.0
    np.divide(num, a, out=num, where=~zero)
    num[zero] = 1.0
    s = num * d
    return c, s


def chain_product(M):
    """Ordered product M[n-1] @ ... @ M[1] @ M[0] of a stack (n, ..., d, d).

    Pairwise tree: log2(n) Python steps, each one batched matmul.
    """
    while M.shape[0] > 1:
        n = M.shape[0]
        half = n // 2
        P = np.matmul(M[1 : 2 * half : 2], M[0 : 2 * half : 2])
        if n % 2:
            # The unpaired cell is the rightmost one, so it stays last.
            P = np.concatenate([P, M[-1:]], axis=0)
        M = P
    return M[0]


def _boundary(k, x, k0):
    """Matrix mapping flux-normalised plane-wave amplitudes (a, b) to (psi, psi'/k0) at x.

    psi_j = (a_j e^{i k_j x} + b_j e^{-i k_j x}) / sqrt(k_j); and its inverse.
    k: (B, n) real positive, k0: (B,).
    """
    B, n = k.shape
    ep = np.exp(1j * k * x)
    em = 1.0 / ep
    sk = np.sqrt(k)
    kk = k / k0[:, None]
    i = np.arange(n)
    L = np.zeros((B, 2 * n, 2 * n), dtype=complex)
    L[:, i, i] = ep / sk
    L[:, i, n + i] = em / sk
    L[:, n + i, i] = 1j * kk * ep / sk
    L[:, n + i, n + i] = -1j * kk * em / sk
    Linv = np.zeros_like(L)
    Linv[:, i, i] = 0.5 * sk * em
    Linv[:, i, n + i] = -0.5j * em * sk / kk
    Linv[:, n + i, i] = 0.5 * sk * ep
    Linv[:, n + i, n + i] = 0.5j * ep * sk / kk
    return L, Linv


def amplitudes(P, kL, kR, x0, x1, k0):
    """Scattering amplitudes from the total (psi, psi'/k0) transfer matrix P (B, 2n, 2n).

    In the flux-normalised amplitude basis the transfer matrix Tm obeys
    Tm^H S Tm = S with S = diag(1, -1) (current conservation), hence
    (Tm^-1)_aa = Tm_aa^H and t = (Tm_aa^H)^-1: no subtraction of large numbers,
    which keeps deep tunnelling accurate.  Returns t, r (incident from the
    left) and t', r' (incident from the right), each (B, n, n).
    """
    n = kL.shape[1]
    L0, _ = _boundary(kL, x0, k0)
    _, R1inv = _boundary(kR, x1, k0)
    Tm = R1inv @ P @ L0
    Taa, Tab = Tm[:, :n, :n], Tm[:, :n, n:]
    Tba, Tbb = Tm[:, n:, :n], Tm[:, n:, n:]
    t = np.linalg.inv(np.conj(np.swapaxes(Taa, -1, -2)))
    Tbb_inv = np.linalg.inv(Tbb)
    r = -Tbb_inv @ Tba
    t_right = Tbb_inv
    r_right = Tab @ Tbb_inv
    return t, r, t_right, r_right


def edges_and_cells(x, V):
    """Cell edges and per-cell potential from (edges, cell values | node values | callable)."""
    x = np.asarray(x, dtype=float)
    if x.ndim != 1 or x.size < 2 or np.any(np.diff(x) <= 0):
        raise ValueError("x must be a strictly increasing 1D array of at least 2 points")
    if callable(V):
        return x, np.broadcast_to(np.asarray(V(0.5 * (x[1:] + x[:-1])), dtype=float), (x.size - 1,))
    V = np.asarray(V, dtype=float)
    if V.ndim == 0:
        return x, np.full(x.size - 1, float(V))
    if V.shape == (x.size - 1,):
        return x, V
    if V.shape == (x.size,):
        # Values on grid points: each cell takes the mean of its two ends.
        return x, 0.5 * (V[1:] + V[:-1])
    raise ValueError("potential must be callable, scalar, or have len(x)-1 (cells) or len(x) (points) values")


def energy_blocks(n_cells, n_energies):
    step = max(1, min(n_energies, _MATRICES_PER_BLOCK // max(n_cells, 1)))
    return [slice(s, min(s + step, n_energies)) for s in range(0, n_energies, step)]


def as_energies(energies_J):
    E = np.asarray(energies_J, dtype=float)
    return E, E.reshape(-1)


# Jumps are searched on a probe grid this many times finer than the first grid; a
# step narrower than one probe interval (both edges inside it) is not seen.
PROBE_PER_CELL = 16
# Bisection steps: halving a double-precision interval 64 times reaches adjacent floats.
_BISECTIONS = 64


def jumps(functions, x0, x1, n_probe):
    """Positions in (x0, x1) where any of the callables jumps, located to rounding.

    Each probe interval [a, b] is bisected, always keeping the half over which
    the function changes more: over a jump the change stays (the jump), over a
    smooth stretch it halves each step.  A jump is kept when the change over the
    final (rounding-width) interval is at least half the change over the probe
    interval and above 1e-12 of the largest |value|, i.e. when the jump is larger
    than the smooth change over one probe interval.
    """
    x = np.linspace(x0, x1, n_probe + 1)
    found = []
    for f in functions:
        if not callable(f):
            continue
        v = np.broadcast_to(np.asarray(f(x), dtype=float), x.shape)
        d = np.abs(np.diff(v))
        scale = float(np.max(np.abs(v))) if v.size else 0.0
        idx = np.flatnonzero(d > 1e-12 * scale)
        if idx.size == 0:
            continue
        a, b = x[idx].copy(), x[idx + 1].copy()
        va, vb = v[idx].copy(), v[idx + 1].copy()
        for _ in range(_BISECTIONS):
            m = a + 0.5 * (b - a)
            vm = np.broadcast_to(np.asarray(f(m), dtype=float), m.shape)
            left = np.abs(vm - va) >= np.abs(vb - vm)
            b = np.where(left, m, b)
            vb = np.where(left, vm, vb)
            a = np.where(left, a, m)
            va = np.where(left, va, vm)
        step = np.abs(vb - va)
        keep = (step >= 0.5 * d[idx]) & (step > 1e-12 * scale)
        found.append(0.5 * (a[keep] + b[keep]))
    if not found:
        return np.empty(0)
    cuts = np.unique(np.concatenate(found))
    return cuts[(cuts > x0) & (cuts < x1)]


def aligned_grid(x0, x1, cuts, n_cells):
    """About n_cells edges over [x0, x1], uniform between cuts, every cut an edge.

    Each piece gets ceil(n_cells * length / total) cells (at least one), so a cell
    never straddles a jump and midpoint sampling stays second order.
    """
    pts = np.concatenate([[x0], np.asarray(cuts, dtype=float), [x1]])
    pts = pts[np.concatenate([[True], np.diff(pts) > 0])]
    if pts[-1] != x1:
        pts[-1] = x1
    counts = np.maximum(1, np.ceil(n_cells * np.diff(pts) / (x1 - x0)).astype(int))
    pieces = [np.linspace(a, b, c + 1)[:-1] for a, b, c in zip(pts[:-1], pts[1:], counts)]
    return np.concatenate(pieces + [np.array([x1])])


def refine(run, metric, grid, n_cells, rtol, max_cells):
    """Refine the grid until the estimated error of the metric is below rtol / 3 (relative).

    grid(n) gives the edges of about n cells (cell edges on the located jumps),
    run(x) the result on edges x.  Cells grow as n -> 2n + 1 so successive grids
    are not nested: a feature the grid misses (a kink, a jump not located) does
    not look converged just because two nested grids sample it alike.  Between
    edges the potential is smooth and midpoint cells converge as h^2, so the
    error estimate of the finer result is |change| / (r^2 - 1), r the ratio of
    cell counts (Richardson); converged means 3 x that estimate <= rtol.  Stops
    at max_cells (the first refinement is always made) with converged=False if
    the tolerance was not met.  Returns (result, error_estimate, cells, converged).
    """
    x = grid(n_cells)
    prev = run(x)
    n_prev, n = x.size - 1, n_cells
    while True:
        n = 2 * n + 1 if n >= max_cells else min(2 * n + 1, max_cells)
        x = grid(n)
        cur = run(x)
        ratio = (x.size - 1) / n_prev
        error = np.abs(metric(cur) - metric(prev)) / (ratio**2 - 1.0)
        scale = np.maximum(np.abs(metric(cur)), np.finfo(float).tiny)
        # Safety factor 3 on an estimate that is only asymptotic (at r = 2 this is |change| <= rtol).
        converged = bool(np.all(3.0 * error <= rtol * scale))
        if converged or n >= max_cells:
            return cur, error, x.size - 1, converged
        prev, n_prev = cur, x.size - 1
