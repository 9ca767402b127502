"""The pipeline in one place: load + validate (sources) -> resolve -> check -> compile.

Each stage is its own module; this file only strings them together for the
command line, scans and notebooks:

1. `load_sources(path)`: the sequence, the files it uses and its rig, read and
   validated (a file that cannot be read at all raises `LoadError`);
2. `resolve(src, overrides)`: a `Shot` (or None) and its findings;
3. `run_timeline_checks(shot, rules)`: the timeline and physics rules;
4. `compile_shot(shot)`, then `run_table_checks(shot, compiled, rules)`: the shot is compiled once, and the
   physics predictions of step 3 read the same tables (`seqgen.predict.played`).

`rules` is a tuple of rules (default: all of `seqgen.check.RULES`); a caller may
pass fewer, e.g. without the slow physics rules.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from .check import RULES, Rule, apply_accepts, run_table_checks, run_timeline_checks
from .check.rules import as_rules
from .compile.tables import compile_shot
from .findings import Finding, has_errors, sort_findings
from .load.yamlsrc import LoadError
from .model import Compiled, Shot
from .predict.played import compiled_shot
from .resolve.sequence import resolve
from .resolve.sources import Sources, load_sources

# the stages, for a caller that strings them itself (e.g. to choose the rules after seeing the shot)
__all__ = ["Result", "preflight", "preflight_resolved", "load_sources", "resolve", "run_timeline_checks",
           "compile_shot", "run_table_checks", "clear_shared_caches"]


@dataclass
class Result:
    shot: Shot | None = None
    compiled: Compiled | None = None
    findings: list = field(default_factory=list)
    sources: Sources | None = None

    @property
    def ok(self) -> bool:
        resolved = self.shot is not None or any(f.code == "schema.fragment" for f in self.findings)
        return resolved and not has_errors(self.findings)

    def _repr_html_(self) -> str:
        """In a notebook: the findings table, the safety caution and the timeline (inline SVG, no script)."""
        from .emit.notebook import result_html

        return result_html(self)


def preflight(path: str | Path, *, compile_tables: bool = True, overrides: dict | None = None,
              sources: Sources | None = None, rules: tuple[Rule, ...] | None = None) -> Result:
    """Run every stage that can run; findings collect along the way.

    `overrides`: param name -> value replacing the param's (a text with units such as '3 mW', a number in SI
    units, or a Qty); `sources`: sources already loaded (then `path` is not read); `rules`: the checks to run."""
    try:
        src = sources or load_sources(path)
    except LoadError as exc:
        return Result(findings=[exc.finding])
    shot, rf = resolve(src, overrides)
    return preflight_resolved(src, shot, rf, compile_tables=compile_tables, rules=rules)


def preflight_resolved(src: Sources, shot: Shot | None, resolve_findings: list, *,
                       compile_tables: bool = True, rules: tuple[Rule, ...] | None = None) -> Result:
    """The stages after resolve, for a shot already resolved from `src` (a scan resolves each shot once)."""
    rules = RULES if rules is None else as_rules(rules)  # a wrong argument fails here, before any work
    res = Result(sources=src)
    findings: list[Finding] = list(src.findings) + list(resolve_findings)
    if shot is None:
        res.findings = sort_findings(findings)
        return res
    res.shot = shot
    findings += run_timeline_checks(shot, rules)
    if compile_tables:
        compiled, cf = compiled_shot(shot)  # the tables the physics predictions read, compiled once per shot
        findings += list(cf)
        findings += run_table_checks(shot, compiled, rules)
        res.compiled = compiled
    res.findings = sort_findings(apply_accepts(findings, shot.accepts))
    return res


def clear_shared_caches() -> None:
    """Forget the analyses that shots share by content (trap minimisations, sampled ramps).

    Results never depend on these caches; benchmarks clear them to time a cold,
    first shot, as a fresh `seqgen check` process would see it.
    """
    from .compile.tables import RAMP_CACHE
    from .predict import clear_caches

    clear_caches()
    RAMP_CACHE.clear()
