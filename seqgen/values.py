"""Physical value of a channel of a resolved shot at given times.

One evaluator of a `Shot`'s segments, shared by the preflight checks (trap
powers, Rabi frequencies, coil currents) and by the pictures (the intended
curve drawn beside the compiled table). It reads `seqgen.model` types only and
knows nothing of devices, ticks, latency or DAC codes: the values are the
intended ones, in SI (the output's physical unit), before calibration.
"""

from __future__ import annotations

import numpy as np

from .compile.shapes import PULSE_ENVELOPES, pulse_envelope, shape_fraction
from .model import Shot

__all__ = ["value_at"]


def value_at(shot: Shot, output: str, times) -> np.ndarray:
    """Physical value (SI) held or ramped on `output` at each time (vectorised; returns a 1-D array).

    Before the first write the output holds its safe value. A `set` holds from
    its time on; a ramp follows its shape over [t0, t1) and holds its end value
    from t1 on. Writes are applied in time order (a block's closing write,
    action ``...:end``, before another write at the same time).
    """
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
                if s.shape in PULSE_ENVELOPES:
                    frac = pulse_envelope(s.shape, frac_s)
                else:
                    frac = shape_fraction(s.shape, frac_s, duration_s=s.t1 - s.t0, tau_s=s.tau_s, table=s.table)
                v = v.copy()
                v[inside] = s.v0 + (s.v1 - s.v0) * frac
            v = np.where(t >= s.t1, s.v1, v)
    return v
