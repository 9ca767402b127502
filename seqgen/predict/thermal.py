"""A thermal cloud through the optical trap's changes before a release: its rms widths at an image when the
trap changed suddenly before the release (a dimple switched off in a weak guide), where the cloud is not in
equilibrium in the trap the release opens.

The cloud is taken in equilibrium at the sample's temperature in the trap as it was right after it was last
switched on (<x^2> = k_B T / (m w^2), <v^2> = k_B T / m, equipartition); a stretch of the trap that changes
slowly (adiabaticity parameter below `cloud.ADIABATIC`) keeps it in equilibrium in the trap at its end, at the
sample's temperature (the temperature the sample names is the one at the release); a sudden change or a fast
ramp moves each axis's phase-space moments exactly (`physics.expansion.thermal_moments_after`, the ramp in
`HISTORY_SAMPLES` steps at each step's mean frequency). Principal axes are followed by rank (ascending
frequency), as for a condensate (`cloud._optical_history`)."""

from __future__ import annotations

import numpy as np
from scipy import constants as sc

from .traps import trap_history


def thermal_history(shot, sp, t_rel, temperature_k, adiabatic: float, samples: int, max_radians: float):
    """(<x^2> (3,), <v^2> (3,), <x v> (3,), at_equilibrium) along the release trap's axes (by rank) at the
    release t_rel, or None without a trap just before t_rel. A stretch of more than `max_radians` of the
    fastest trap frequency dephases the motion (a real trap is not exactly harmonic): each axis's energy is
    then shared equally between position and velocity."""
    from ..physics.adiabatic import adiabaticity_parameter
    from ..physics.expansion import thermal_moments_after

    v2 = sc.k * temperature_k / sp.mass_kg
    state = None  # (X, V, C, at equilibrium)
    for times, omegas, ramp in trap_history(shot, sp, t_rel, samples):
        a, z = times[0], times[-1]
        if not np.all(np.isfinite(omegas)) or np.any(omegas <= 0):
            state = None  # not held here: a later trap holds a cloud afresh
            continue
        if state is None:
            state = (v2 / omegas[0] ** 2, np.full(3, v2), np.zeros(3), True)
        X, V, C, eq = state
        slow = len(times) < 3 or float(np.max(adiabaticity_parameter(times, omegas.T, axis=-1))) < adiabatic
        sudden = not np.allclose(X, v2 / omegas[0] ** 2, rtol=1e-9, atol=0) if eq else True
        if eq and slow and not sudden:
            state = (v2 / omegas[-1] ** 2, np.full(3, v2), np.zeros(3), True)
            continue
        if float(np.max(omegas)) * (z - a) > max_radians:  # dephased: energy shared, at the end's trap
            w = omegas[-1]
            energy = X * omegas[0] ** 2 + V
            state = (0.5 * energy / w ** 2, 0.5 * energy, np.zeros(3), False)
            continue
        for k in range(len(times) - 1):  # each step at its mean frequency
            w = 0.5 * (omegas[k] + omegas[k + 1]) if ramp else omegas[0]
            X, V, C = thermal_moments_after(X, V, C, w, times[k + 1] - times[k])
        state = (X, V, C, False)
    if state is None:
        return None
    return state
