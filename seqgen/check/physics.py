"""Gathers the physics rule modules' report rows for `show --physics`, the plot and the report."""

from __future__ import annotations

from . import physics_barrier, physics_magnetic, physics_states, physics_traps

_REPORTERS = (physics_traps.report, physics_states.report, physics_barrier.report, physics_magnetic.report)


def report_physics(shot) -> list[dict]:
    rows = []
    for rep in _REPORTERS:
        rows.extend(rep(shot))
    return sorted(rows, key=lambda r: r["time_s"])
