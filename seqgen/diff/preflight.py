"""Preflight level: findings introduced, resolved and unchanged.

Findings are matched by code and block (a renamed block is mapped to its new
name), never by line, so an edit that moves lines changes nothing here.
"""

from __future__ import annotations

from .model import Change

_WEIGHT_NEW = {"error": 100, "warning": 90, "note": 20}
_WEIGHT_GONE = {"error": 95, "warning": 85, "note": 15}


def _key(f, renames=None):
    block = f.block
    if renames and block in renames:
        block = renames[block]
    return f.code, block


def finding_changes(old: list, new: list, renames: dict | None = None) -> tuple[list, list]:
    """(changes, unchanged findings of the new version)."""
    groups_a: dict = {}
    groups_b: dict = {}
    for f in old:
        groups_a.setdefault(_key(f, renames), []).append(f)
    for f in new:
        groups_b.setdefault(_key(f, None), []).append(f)
    changes, unchanged = [], []
    for key in sorted(set(groups_a) | set(groups_b), key=lambda k: (k[0], k[1] or "")):
        fa = sorted(groups_a.get(key, []), key=lambda f: f.message)
        fb = sorted(groups_b.get(key, []), key=lambda f: f.message)
        code, block = key
        subject = code + (f" [{block}]" if block else "")
        for x, y in zip(fa, fb):
            if x.accepted != y.accepted or x.severity != y.severity:
                what = ("now accepted" if y.accepted else "no longer accepted") if x.accepted != y.accepted else \
                    f"severity {x.severity} -> {y.severity}"
                changes.append(Change("preflight", "finding-changed", subject, f"{y.severity}: {subject}: {what}: {y.message}",
                                      _state(x), _state(y), 70 if not y.accepted else 40, _fd(y)))
            else:
                unchanged.append(y)
        for y in fb[len(fa):]:
            changes.append(Change("preflight", "finding-introduced", subject, f"{y.severity}: {subject}: {y.message}",
                                  None, y.severity + (" (accepted)" if y.accepted else ""),
                                  _WEIGHT_NEW.get(y.severity, 50) * (0.4 if y.accepted else 1.0), _fd(y)))
        for x in fa[len(fb):]:
            changes.append(Change("preflight", "finding-resolved", subject, f"{x.severity}: {subject}: {x.message}",
                                  x.severity + (" (accepted)" if x.accepted else ""), None,
                                  _WEIGHT_GONE.get(x.severity, 50) * (0.4 if x.accepted else 1.0), _fd(x)))
    return changes, unchanged


_BEFORE_CHECKS = ("load", "schema", "resolve")


def before_checks(findings: list) -> list:
    """The findings raised while loading, validating and resolving (not by preflight checks)."""
    from ..codes import lookup

    return [f for f in findings if lookup(f.code) is None or lookup(f.code).stage in _BEFORE_CHECKS]


def _state(f) -> str:
    return f.severity + (" (accepted)" if f.accepted else "")


def _fd(f) -> dict:
    return {"code": f.code, "severity": f.severity, "block": f.block, "message": f.message, "file": f.file,
            "line": f.line, "time_s": f.time_s, "accepted": f.accepted}
