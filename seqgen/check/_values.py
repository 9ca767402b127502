"""Physical value of an output at given times, evaluated from the shot's segments."""

from __future__ import annotations

import numpy as np

from ..compile.shapes import shape_fraction


def value_at(shot, output: str, times) -> np.ndarray:
    """Physical value (SI) held or ramped on `output` at each time (vectorised)."""
    t = np.atleast_1d(np.asarray(times, dtype=float))
    out = shot.rig.outputs[output]
    v = np.full(t.shape, out.safe, dtype=float)
    segs = sorted((s for s in shot.segments if s.output == output),
                  key=lambda s: (s.t0, 0 if s.action.endswith(":end") else 1))
    for s in segs:
        if s.kind == "set":
            v = np.where(t >= s.t0, s.v1, v)
        else:
            inside = (t >= s.t0) & (t < s.t1)
            if np.any(inside):
                frac_s = (t[inside] - s.t0) / (s.t1 - s.t0)
                if s.shape in ("blackman", "gaussian"):
                    from ..compile.tables import _envelope

                    frac = _envelope(s.shape, frac_s)
                else:
                    frac = shape_fraction(s.shape, frac_s, duration_s=s.t1 - s.t0, tau_s=s.tau_s, table=s.table)
                v = v.copy()
                v[inside] = s.v0 + (s.v1 - s.v0) * frac
            v = np.where(t >= s.t1, s.v1, v)
    return v
