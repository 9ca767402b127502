"""Lowest escape route out of a potential well: the barrier an atom at the minimum must climb to leave it.

A well's depth is the energy of the lowest mountain pass (first-order saddle point: gradient zero, exactly one
negative Hessian eigenvalue) on a path from the minimum to far away, minus the energy of the minimum: the
minimax over paths, whose highest point on the minimum-energy path is that saddle (J. Chem. Phys. 113, 9901
(2000), climbing-image nudged elastic band, for the definitions; not used here). Found here in two steps:

1. rays: the potential along straight rays from the minimum (vectorised, log-spaced radii); each ray's barrier is
   its first maximum, or its first *shoulder*, or the far-field value when neither occurs;
2. refinement: the lowest ray maxima are refined to the saddle point by Newton's method on the gradient
   (scipy.optimize.root with the Hessian as Jacobian) and kept when the Hessian there has exactly one negative
   eigenvalue and the energy is not above the ray's (a ray is one path, so its maximum bounds the saddle from
   above).

A shoulder is where the valley along a ray flattens to a small fraction of the steepest slope met before it
and then steepens again: the crossing of a weak beam with a strong one, whose own potential along its axis
rises only over its Rayleigh length (millimetres instead of tens of micrometres). Tilted by less than that
residual slope it would be a true saddle; past it the atoms leave the crossing and spread along the strong beam,
which is what a lab calls escaping (modelling choice, SHOULDER_SLOPE below).

Pure numpy/scipy on callables; nothing here knows about beams.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

# a shoulder counts as the way out when the slope there is below this fraction of the steepest slope before it
# (modelling choice, no source: a weak crossing beam on a strong one gives ~1e-3; two beams of comparable
# waist along the same ray give no local minimum of the slope at all)
SHOULDER_SLOPE = 0.05

SADDLE, RIDGE, SHOULDER, FAR = "saddle", "ridge", "shoulder", "far"


@dataclass(frozen=True)
class Escape:
    """The lowest way out found: ``energy`` (J, the potential at the barrier), ``point`` (m, the barrier; the
    ray's far end for a far-field escape), ``direction`` (unit vector from the minimum towards it) and ``kind``:
    ``saddle`` (a refined first-order saddle point), ``ridge`` (a ray maximum that did not refine; an upper
    bound), ``shoulder`` or ``far`` (no barrier along the ray: the far-field value)."""

    energy: float
    point: np.ndarray
    direction: np.ndarray
    kind: str


def fibonacci_directions(n: int) -> np.ndarray:
    """n nearly uniform unit vectors on the sphere (golden-angle spiral), shape (n, 3)."""
    i = np.arange(n) + 0.5
    z = 1 - 2 * i / n
    phi = np.pi * (3 - np.sqrt(5)) * i
    rho = np.sqrt(1 - z**2)
    return np.stack([rho * np.cos(phi), rho * np.sin(phi), z], axis=-1)


def ray_barriers(values: np.ndarray, radii: np.ndarray, far: np.ndarray,
                 shoulder_slope: float = SHOULDER_SLOPE) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Barrier of each ray on its grid: (energy, point index, kind code 0 max / 1 shoulder / 2 far) per ray.

    ``values`` (n_rays, n) is the potential at ``radii`` (n,), radii[0] = 0 at the minimum; ``far`` (n_rays,) the
    far-field value of each ray, used when the ray has neither a maximum nor a shoulder (index n - 1). A
    shoulder's index j means between points j and j + 1 (its energy the mean of the two)."""
    n_rays, n = values.shape
    slope = np.diff(values, axis=1) / np.diff(radii)
    idx = np.arange(n - 1)
    # first maximum: the slope turns from rising to not rising at point j (between slopes j-1 and j)
    is_max = np.zeros_like(slope, dtype=bool)
    is_max[:, 1:] = (slope[:, :-1] > 0) & (slope[:, 1:] <= 0)
    # first shoulder: a local minimum of a positive slope, well below the steepest slope before it
    steepest = np.maximum.accumulate(slope, axis=1)
    is_sh = np.zeros_like(is_max)
    is_sh[:, 1:-1] = ((slope[:, 1:-1] > 0) & (slope[:, 1:-1] < slope[:, :-2]) & (slope[:, 1:-1] <= slope[:, 2:])
                      & (slope[:, 1:-1] < shoulder_slope * steepest[:, 1:-1]))
    big = n + 1
    j_max = np.where(is_max, idx, big).min(axis=1)
    j_sh = np.where(is_sh, idx, big).min(axis=1)
    energy = np.maximum(values[:, 1:].max(axis=1), far)
    index = np.full(n_rays, n - 1)
    kind = np.full(n_rays, 2)
    rows = np.arange(n_rays)
    mx = (j_max <= j_sh) & (j_max < big)
    energy[mx] = values[rows[mx], j_max[mx]]
    index[mx] = j_max[mx]
    kind[mx] = 0
    sh = (j_sh < j_max) & (j_sh < big)
    energy[sh] = 0.5 * (values[rows[sh], j_sh[sh]] + values[rows[sh], j_sh[sh] + 1])
    index[sh] = j_sh[sh]
    kind[sh] = 1
    return energy, index, kind


def hessian_from_gradient(grad: Callable, x: np.ndarray, step: float) -> np.ndarray:
    """Symmetrised central-difference Hessian of a scalar field from its analytic gradient (one call on 6 points)."""
    offsets = np.concatenate([np.eye(3), -np.eye(3)]) * step
    g = grad(x + offsets)
    h = (g[:3] - g[3:]) / (2 * step)
    return 0.5 * (h + h.T)


def refine_saddle(grad: Callable, start: np.ndarray, length: float, force_scale: float,
                  ) -> tuple[np.ndarray, int] | None:
    """A stationary point of the field near ``start`` and its number of negative Hessian eigenvalues, or None.

    Newton's method on grad = 0 (scipy.optimize.root, 'hybr' with the Hessian as Jacobian) in coordinates
    scaled by ``length``, the gradient by ``force_scale``."""
    from scipy import optimize

    def g(y):
        return grad(start + y * length) / force_scale

    def jac(y):
        return hessian_from_gradient(lambda p: grad(p) / force_scale, start + y * length, 1e-4 * length) * length

    try:
        res = optimize.root(g, np.zeros(3), jac=jac, method="hybr", options={"xtol": 1e-12})
    except (ValueError, np.linalg.LinAlgError):
        return None
    # judged by the gradient left, not res.success: started on the saddle, hybr reports "no progress"
    if not np.all(np.isfinite(res.x)) or not np.linalg.norm(g(res.x)) < 1e-8:
        return None
    x = start + res.x * length
    lam = np.linalg.eigvalsh(jac(res.x))
    n_neg = int(np.sum(lam < -1e-9 * np.max(np.abs(lam))))
    return x, n_neg


def lowest_escape(f: Callable, grad: Callable, x0, directions, radii, far: Callable, length: float,
                  force_scale: float, refine: int = 3) -> Escape:
    """Lowest escape from the minimum ``x0`` of ``f`` over rays along ``directions`` (unit, (n, 3)).

    ``radii`` (n_r,) increasing from 0; ``far(end_points)`` the far-field value (the potential with the local
    features gone, e.g. gravity alone) at the rays' ends; ``length`` and ``force_scale`` the scales of the
    well for the Newton refinement; ``refine`` how many of the lowest ray maxima to refine."""
    from scipy import optimize

    x0 = np.asarray(x0, dtype=float)
    dirs = np.asarray(directions, dtype=float)
    pts = x0 + radii[None, :, None] * dirs[:, None, :]
    values = f(pts)  # radii[0] = 0: column 0 is the minimum itself
    energy, index, kind = ray_barriers(values, radii, far(pts[:, -1]))
    u0 = values[0, 0]
    out = None
    others = np.flatnonzero(kind != 0)
    if others.size:
        i = others[np.argmin(energy[others])]
        r = radii[index[i]] if kind[i] == 2 else 0.5 * (radii[index[i]] + radii[index[i] + 1])
        out = Escape(float(energy[i]), x0 + r * dirs[i], dirs[i].copy(), SHOULDER if kind[i] == 1 else FAR)
    maxima = np.flatnonzero(kind == 0)
    for i in maxima[np.argsort(energy[maxima], kind="stable")][:refine]:
        if out is not None and energy[i] >= out.energy:
            break
        d, j = dirs[i], index[i]
        # the ray's own maximum between the grid's neighbours: an upper bound of the saddle's energy
        res = optimize.minimize_scalar(lambda r: -float(f(x0 + r * d)), bounds=(radii[j - 1], radii[j + 1]),
                                       method="bounded", options={"xatol": 1e-10 * radii[j]})
        start, top = x0 + res.x * d, -float(res.fun)
        best = Escape(top, start, d.copy(), RIDGE)
        found = refine_saddle(grad, start, length, force_scale)
        if found is not None:
            x, n_neg = found
            e = float(f(x))
            # a saddle of this well: one unstable direction, above the minimum, not above the ray's maximum,
            # and not a distant pass the ray never came near
            near = np.linalg.norm(x - start) <= 0.5 * res.x + 2 * length
            if n_neg == 1 and u0 < e <= top + 1e-9 * abs(top - u0) and near:
                best = Escape(e, x, (x - x0) / np.linalg.norm(x - x0), SADDLE)
        if out is None or best.energy < out.energy:
            out = best
    return out
