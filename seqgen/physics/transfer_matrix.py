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

    Pairwise tree: log2(n) Python steps, each one batched matmul.  An unpaired
    last matrix (odd count) is the leftmost factor: it is multiplied into a
    separate left factor instead of being appended to the halved stack (that copy
    cost a third of the time for odd cell counts).
    """
    left = None
    while M.shape[0] > 1:
        n = M.shape[0]
        if n % 2:
            left = M[-1] if left is None else left @ M[-1]
            M = M[:-1]
        M = np.matmul(M[1::2], M[0::2])
    return M[0] if left is None else left @ M[0]


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
# step narrower than one probe interval whose two edges cancel there is not seen.
PROBE_PER_CELL = 16
# Bisection steps: halving a double-precision interval 64 times reaches adjacent floats.
_BISECTIONS = 64
# Rounds of the search: each splits the probe intervals where a jump was found, so a
# second jump in the same interval is found in the next round.
_ROUNDS = 8


def _bisect_jumps(f, a, b, va, vb, tiny):
    """Bisect each interval [a, b] towards its largest change; the (a, b) pairs that end
    on a jump (change over the final interval at least half the change over the start
    interval and above tiny), each a rounding-width bracket."""
    d0 = np.abs(vb - va)
    for _ in range(_BISECTIONS):
        m = a + 0.5 * (b - a)
        vm = np.broadcast_to(np.asarray(f(m), dtype=float), m.shape)
        left = np.abs(vm - va) >= np.abs(vb - vm)
        b = np.where(left, m, b)
        vb = np.where(left, vm, vb)
        a = np.where(left, a, m)
        va = np.where(left, va, vm)
    step = np.abs(vb - va)
    keep = (step >= 0.5 * d0) & (step > tiny)
    return a[keep], b[keep]


def jumps(functions, x0, x1, n_probe):
    """Positions in (x0, x1) where any of the callables jumps, located to rounding.

    Each probe interval over which the function changes is bisected, always keeping
    the half over which it changes more: over a jump the change stays (the jump),
    over a smooth stretch it halves each step.  A jump is kept when it is larger than
    half the change over its probe interval (so larger than the smooth change there)
    and than 1e-12 of the largest |value|.  The brackets found become probe points
    and the split intervals are searched again, so several jumps in one probe
    interval are found too.
    """
    found = []
    for f in functions:
        if not callable(f):
            continue
        pts = np.linspace(x0, x1, n_probe + 1)
        v = np.broadcast_to(np.asarray(f(pts), dtype=float), pts.shape)
        finite = np.abs(v[np.isfinite(v)])
        tiny = 1e-12 * (float(np.max(finite)) if finite.size else 0.0)
        fresh = np.ones(pts.size - 1, dtype=bool)
        for _ in range(_ROUNDS):
            width_ok = np.diff(pts) > 4 * np.spacing(np.maximum(np.abs(pts[:-1]), np.abs(pts[1:])))
            idx = np.flatnonzero(fresh & width_ok & (np.abs(np.diff(v)) > tiny))
            if idx.size == 0:
                break
            a, b = _bisect_jumps(f, pts[idx], pts[idx + 1], v[idx], v[idx + 1], tiny)
            new = np.setdiff1d(np.concatenate([a, b]), pts)
            if new.size == 0:
                break
            found.append(0.5 * (a + b))
            pts_new = np.union1d(pts, new)
            v = np.broadcast_to(np.asarray(f(pts_new), dtype=float), pts_new.shape)
            touched = np.isin(pts_new, new)
            fresh = touched[:-1] | touched[1:]
            pts = pts_new
    if not found:
        return np.empty(0)
    cuts = np.unique(np.concatenate(found))
    return cuts[(cuts > x0) & (cuts < x1)]


def aligned_counts(x0, x1, cuts, n_cells):
    """Pieces between cuts and their initial cell counts, ceil(n_cells * length / total), at least one.

    Cuts closer than 1e-9 of the range to each other or to an end are merged into it:
    moving a jump that little changes T by far less than any tolerance asked for,
    and keeps every piece wide enough to be divided into many cells.
    """
    merge = 1e-9 * (x1 - x0)
    inner = np.sort(np.asarray(cuts, dtype=float))
    inner = inner[(inner > x0 + merge) & (inner < x1 - merge)]
    pts = [x0]
    for c in inner:
        if c - pts[-1] > merge:
            pts.append(c)
    if x1 - pts[-1] <= merge:
        pts.pop()
    pts = np.array(pts + [x1])
    return pts, np.maximum(1, np.ceil(n_cells * np.diff(pts) / (x1 - x0)).astype(int))


def aligned_grid(pts, counts):
    """Edges with counts[i] uniform cells between pts[i] and pts[i + 1]: every cut an edge,
    so a cell never straddles a jump and midpoint sampling stays second order."""
    pieces = [np.linspace(a, b, c + 1)[:-1] for a, b, c in zip(pts[:-1], pts[1:], counts)]
    return np.concatenate(pieces + [pts[-1:]])


def refine(run, metric, pieces, rtol, max_cells):
    """Refine the grid until the estimated error of the metric is below rtol / 3 (relative).

    pieces = (pts, counts) from `aligned_counts`: cell edges on the located jumps;
    run(x) gives the result on edges x.  Every piece grows from c to 2c - 1 cells
    (1 to 3): c and 2c - 1 have no common divisor, so successive grids share no
    inner edge and a feature the grid misses (a kink, a jump not located) does not
    look converged just because two nested grids sample it alike.  Between edges
    the potential is smooth and midpoint cells converge as h^2, so the error
    estimate of the finer result is |change| / (r^2 - 1), r the smallest ratio of
    cell counts of a piece (Richardson; conservative for the other pieces);
    converged means 3 x that estimate <= rtol.  The first refinement is always
    made; refinement stops with converged=False when the next grid would pass
    max_cells.  Returns (result, error_estimate, cells, converged).
    """
    pts, counts = pieces
    prev = run(aligned_grid(pts, counts))
    error = None
    while True:
        finer = np.where(counts == 1, 3, 2 * counts - 1)
        if error is not None and int(np.sum(finer)) > max_cells:
            return prev, error, int(np.sum(counts)), False
        cur = run(aligned_grid(pts, finer))
        ratio = float(np.min(finer / counts))
        error = np.abs(metric(cur) - metric(prev)) / (ratio**2 - 1.0)
        scale = np.maximum(np.abs(metric(cur)), np.finfo(float).tiny)
        # Safety factor 3 on an estimate that is only asymptotic (at r = 2 this is |change| <= rtol).
        counts = finer
        if bool(np.all(3.0 * error <= rtol * scale)):
            return cur, error, int(np.sum(counts)), True
        prev = cur
