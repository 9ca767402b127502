"""What a preflight rule is: a function that reads a shot and yields findings of the codes it names.

`rule` only describes a function; it registers nothing. The rules that run are
the explicit tuple `seqgen.check.RULES`, which a caller may replace.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Iterator

from ..codes import Code
from ..findings import Finding

STAGES = ("timeline", "physics", "tables")  # what a rule reads: the shot; the shot's physics; (shot, compiled)


@dataclass(frozen=True)
class Rule:
    code: Code  # the code it reports; its doc and source are what `seqgen explain` prints
    func: Callable[..., Iterator[Finding]]
    stage: str = "timeline"

    @property
    def name(self) -> str:
        return self.func.__name__

    def __call__(self, *args) -> Iterator[Finding]:
        return self.func(*args)


def rule(code: Code, *, stage: str | None = None) -> Callable[[Callable], Rule]:
    """Describe a rule function: the code it reports and what it reads (see `STAGES`; by default the code's
    own stage, and a stage that contradicts the code's is refused)."""
    if not isinstance(code, Code):
        raise TypeError(f"rule code must be a seqgen.codes value, not {code!r}")
    stage = stage or code.stage
    if stage != code.stage:
        raise ValueError(f"rule for {code} reads stage {stage!r} but the code is declared for {code.stage!r}")
    if stage not in STAGES:
        raise ValueError(f"unknown rule stage {stage!r}; one of {STAGES}")

    def wrap(func: Callable) -> Rule:
        return Rule(code, func, stage)

    return wrap


def as_rules(rules) -> tuple[Rule, ...]:
    """A caller's rules as a tuple of `Rule`s; anything else is refused with what to pass."""
    rules = tuple(rules) if not isinstance(rules, (str, Rule)) else (rules,)
    bad = [r for r in rules if not isinstance(r, Rule)]
    if bad:
        raise TypeError(f"rules must be seqgen.check.Rule values (e.g. a subset of seqgen.RULES), not {bad[0]!r}")
    return rules
