"""Stage 4: preflight checks (timing, hardware, safety, physics).

Importing this package registers every check. `run_timeline_checks` runs the
checks on a resolved shot; `run_table_checks` the ones that need the compiled
tables; `apply_accepts` marks findings the sequence file accepts.
"""

from __future__ import annotations

from dataclasses import replace

from ..caution import CAUTION  # noqa: F401  (re-exported: the one wording lives in seqgen/caution.py)
from ..findings import Finding, make
from ..registry import CHECKS, declare
from . import hardware, safety, timing  # noqa: F401  (register checks)

try:  # physics checks need the physics package; they register on import
    from . import physics  # noqa: F401
except ImportError:  # pragma: no cover
    physics = None

CHECK_CRASHED = declare("schema.check-crashed", "error", """
    A preflight check raised an unexpected error. This is a bug in seqgen, not
    in your file; the other checks still ran. Please report it with the file.""", stage="check")


def _run(stage: str, *args) -> list[Finding]:
    out: list[Finding] = []
    for spec in CHECKS:
        if spec.info.stage != stage:
            continue
        try:
            out.extend(spec.func(*args))
        except Exception as exc:  # a bug in one check must not hide the others
            out.append(make(CHECK_CRASHED, f"check {spec.info.code} failed: {type(exc).__name__}: {exc}",
                            hint="report this; meanwhile the other checks' results stand"))
    return out


def run_timeline_checks(shot) -> list[Finding]:
    return _run("timeline", shot) + _run("physics", shot)


def run_table_checks(shot, compiled) -> list[Finding]:
    return _run("tables", shot, compiled)


def apply_accepts(findings: list[Finding], accepts) -> list[Finding]:
    out = []
    for f in findings:
        for a in accepts:
            if a.code == f.code and (a.block is None or a.block == f.block):
                f = replace(f, accepted=True, accept_reason=a.reason)
                break
        out.append(f)
    return out
