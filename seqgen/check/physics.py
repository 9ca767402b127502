"""Physics checks: registers the physics check modules and gathers their reports."""

from __future__ import annotations

from . import physics_traps  # noqa: F401

_REPORTERS = [physics_traps.report]

for _name in ("physics_states", "physics_barrier", "physics_magnetic"):
    try:
        _mod = __import__(f"{__package__}.{_name}", fromlist=["report"])
        _REPORTERS.append(_mod.report)
    except ImportError:  # the module may not exist yet in a partial checkout
        pass


def report_physics(shot) -> list[dict]:
    rows = []
    for rep in _REPORTERS:
        rows.extend(rep(shot))
    return sorted(rows, key=lambda r: r["time_s"])
