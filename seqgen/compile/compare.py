"""Where two compiled channel tables make an output take different values: the one comparison behind
`seqgen diff` (output level) and the plot's diff windows, so both always mark the same changes.

Both tables of a device are evaluated on the union of their rows (the hold model: the last row at or before
each point, forward fill with `searchsorted`; a linear-output device interpolates), on ticks when the two
timebases agree, else on times.

The tolerance (`tolerance`): a difference of one quantisation step - one DAC code, `Output.lsb` - or more
IS a difference; two values of the same code differ only by float noise, far below a code, and do not
count. So the threshold is half a code of the finer of the two versions; half a level on a digital line;
a relative 1e-9 of the range for an output without bits (or a build folder: its manifest's code grid is
not read here). Imports only numpy: the diff and the plot both use it without reaching into each other.
"""

from __future__ import annotations

import numpy as np

DIGITAL_TOL = 0.5  # digital levels are 0 and 1
UNQUANTIZED_REL_TOL = 1e-9  # of the output range, for outputs without a DAC resolution


def tolerance(digital: bool, lsbs, spans) -> float:
    """Differences above this count. `lsbs`: the code steps of the two versions (0 or None: unquantized);
    `spans`: their output ranges (hi - lo), used only when neither version is quantized."""
    if digital:
        return DIGITAL_TOL
    steps = [s for s in lsbs if s]
    if steps:
        return 0.5 * min(steps)
    return UNQUANTIZED_REL_TOL * max(list(spans) or [1.0])


def union(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Sorted union of two sorted arrays (concatenate, sort, drop repeats)."""
    c = np.concatenate([x, y])
    c.sort(kind="stable")
    if len(c) > 1:
        c = c[np.r_[True, c[1:] != c[:-1]]]
    return c


class TableGrid:
    """Two tables of one device (old, new) on the union of their ticks (or times, when the timebases differ).

    `times` are the union points in seconds; `old(col)` / `new(col)` give a column of each table there."""

    def __init__(self, a, b, lin_a: bool, lin_b: bool):
        if a.tick_s == b.tick_s:
            xa, xb, scale = np.asarray(a.ticks), np.asarray(b.ticks), a.tick_s
        else:  # different timebases (a rig change): compare on times
            xa, xb, scale = np.asarray(a.ticks) * a.tick_s, np.asarray(b.ticks) * b.tick_s, 1.0
        self.xa, self.xb, self.lin_a, self.lin_b = xa, xb, lin_a, lin_b
        self.u = union(xa, xb)
        self.times = self.u * scale
        # hold model: the row in force at each union point (the last row at or before it)
        self.ia = np.clip(np.searchsorted(xa, self.u, side="right") - 1, 0, max(len(xa) - 1, 0))
        self.ib = np.clip(np.searchsorted(xb, self.u, side="right") - 1, 0, max(len(xb) - 1, 0))

    def old(self, col: np.ndarray) -> np.ndarray:
        return self._on(col, self.xa, self.ia, self.lin_a)

    def new(self, col: np.ndarray) -> np.ndarray:
        return self._on(col, self.xb, self.ib, self.lin_b)

    def _on(self, col, x, rows, linear):
        col = np.asarray(col, dtype=float)
        if not len(col):
            return np.full(len(self.u), np.nan)
        return np.interp(self.u, x, col) if linear and len(col) > 1 else col[rows]


def differing(grid: TableGrid, col_old: np.ndarray, col_new: np.ndarray, tol: float):
    """(old values, new values, differs) of one output on the grid's points; differs: |new - old| > tol."""
    ua, ub = grid.old(col_old), grid.new(col_new)
    return ua, ub, np.abs(ub - ua) > tol
