"""Scans of two versions: scanned params added or removed, their values, how they combine, the shot order.

The other levels compare the shot resolved with the base values; a scan whose
values, shot count or order changed changes the data set the lab takes even
when that shot stays the same, so it is a difference of its own (level
"resolved", kinds `scan-*`).
"""

from __future__ import annotations

from ..textfmt import fmt_si
from .model import REL_TOL, Change


def _same_values(a, b) -> bool:
    if len(a.values) != len(b.values) or a.values[:1] and a.values[0].dims != b.values[0].dims:
        return False
    return all(abs(x.value - y.value) <= REL_TOL * max(abs(x.value), abs(y.value)) for x, y in zip(a.values, b.values))


def _how(plan) -> str:
    lockstep = "lockstep" if len(plan.nest) == 1 and len(plan.axes) > 1 else plan.combine
    order = f"shuffled (seed {plan.seed})" if plan.order == "shuffled" else "written order"
    return f"{len(plan)} shots, {lockstep}, nest {' > '.join(plan.nest)}, {order}"


def scan_changes(old, new, old_invalid: bool = False, new_invalid: bool = False) -> list[Change]:
    """Changes between two ScanPlans (either may be None: no scan, or with *_invalid a scan that does not
    expand, whose findings the preflight level reports)."""
    if old_invalid or new_invalid:
        if old_invalid and new_invalid:
            return []  # both scans are broken: the preflight level compares their findings
        good = new if old_invalid else old
        what = good.describe() if good is not None else "no scan"
        kind = "scan-added" if old_invalid else "scan-removed"
        return [Change("resolved", kind, "scan", f"the scan of the {'old' if old_invalid else 'new'} version does "
                       f"not expand into shots (see its findings); the {'new' if old_invalid else 'old'} one: {what}",
                       None if old_invalid else what, what if old_invalid else None, weight=2.0,
                       data={"invalid": "old" if old_invalid else "new"})]
    if old is None and new is None:
        return []
    if old is None or new is None:
        plan = new or old
        kind, verb = ("scan-added", "now scans") if new is not None else ("scan-removed", "no longer scans")
        return [Change("resolved", kind, "scan", f"the sequence {verb}: {plan.describe()}",
                       None if new is not None else old.describe(), new.describe() if new is not None else None,
                       weight=2.0, data={"shots_old": len(old) if old else 1, "shots_new": len(new) if new else 1})]
    changes: list[Change] = []
    oa, na = {a.name: a for a in old.axes}, {a.name: a for a in new.axes}
    for name in na.keys() - oa.keys():
        changes.append(Change("resolved", "scan-param-added", name, f"param '{name}' is now scanned: {na[name].describe()}",
                              None, na[name].describe(), weight=1.5, data={"values": [q.value for q in na[name].values],
                                                                            "unit": na[name].unit}))
    for name in oa.keys() - na.keys():
        changes.append(Change("resolved", "scan-param-removed", name, f"param '{name}' is no longer scanned "
                              f"(was {oa[name].describe()})", oa[name].describe(), None, weight=1.5,
                              data={"values": [q.value for q in oa[name].values], "unit": oa[name].unit}))
    for name in sorted(oa.keys() & na.keys()):
        a, b = oa[name], na[name]
        if not _same_values(a, b) or a.kind != b.kind or a.group != b.group:
            lo = lambda ax: fmt_si(min(q.value for q in ax.values), ax.unit)  # noqa: E731
            hi = lambda ax: fmt_si(max(q.value for q in ax.values), ax.unit)  # noqa: E731
            what = [] if _same_values(a, b) else [f"{len(a.values)} -> {len(b.values)} values, "
                                                   f"{lo(a)} .. {hi(a)} -> {lo(b)} .. {hi(b)}"]
            if a.kind != b.kind:
                what.append(f"{a.kind} -> {b.kind}")
            if a.group != b.group:
                what.append(f"group {a.group or '(none)'} -> {b.group or '(none)'}")
            changes.append(Change("resolved", "scan-values", name, f"scan of '{name}': " + "; ".join(what),
                                  a.describe(), b.describe(), weight=1.2,
                                  data={"old": [q.value for q in a.values], "new": [q.value for q in b.values],
                                        "unit": b.unit}))
    # a different nest because params joined or left the scan is already said above; a reordered one is not
    renested = set(old.nest) == set(new.nest) and old.nest != new.nest
    if renested or (len(old), old.combine, old.order, old.seed) != (len(new), new.combine, new.order, new.seed):
        changes.append(Change("resolved", "scan-shots", "scan", f"scan: {_how(old)} -> {_how(new)}", _how(old), _how(new),
                              weight=1.0, data={"shots_old": len(old), "shots_new": len(new), "order_old": old.order,
                                                "order_new": new.order, "seed_old": old.seed, "seed_new": new.seed}))
    return changes
