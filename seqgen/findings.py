"""The one diagnostic type of seqgen, shared by every stage.

A leaf: it imports nothing from seqgen. Codes come from `seqgen.codes`.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field, replace
from typing import Iterable

from .textfmt import fmt_when

SEVERITIES = ("error", "warning", "note")
_RANK = {name: i for i, name in enumerate(SEVERITIES)}


@dataclass(frozen=True)
class SourcePos:
    file: str
    line: int = 0  # 1-based; 0 when unknown
    column: int = 0

    def __str__(self) -> str:
        if self.line:
            return f"{self.file}:{self.line}:{self.column}"
        return self.file


@dataclass(frozen=True)
class Finding:
    code: str
    severity: str
    message: str
    file: str = ""
    line: int = 0
    column: int = 0
    block: str | None = None
    time_s: float | None = None
    hint: str = ""
    accepted: bool = False
    accept_reason: str = ""
    data: tuple = field(default=(), compare=False)  # (key, value) pairs of numbers for tools

    @property
    def where(self) -> str:
        if not self.file:
            return "<no file>"
        return str(SourcePos(self.file, self.line, self.column))

    def with_pos(self, pos: SourcePos | None) -> "Finding":
        if pos is None:
            return self
        return replace(self, file=pos.file, line=pos.line, column=pos.column)

    def to_dict(self) -> dict:
        out = {
            "code": self.code,
            "severity": self.severity,
            "message": self.message,
            "file": self.file,
            "line": self.line,
            "column": self.column,
            "block": self.block,
            "time_s": self.time_s,
            "hint": self.hint,
            "accepted": self.accepted,
        }
        if self.accepted:
            out["accept_reason"] = self.accept_reason
        if self.data:
            out["data"] = dict(self.data)
        return out


def make(code, message: str, pos: SourcePos | None = None, *, severity: str | None = None,
         block: str | None = None, time_s: float | None = None, hint: str = "", data: dict | None = None) -> Finding:
    """Build a finding of a catalogue code (`seqgen.codes`); the severity defaults to the code's own."""
    default = getattr(code, "severity", None)
    if default is None:  # a bare string: codes are values, so a misspelt one cannot slip through
        raise TypeError(f"finding code must be a seqgen.codes value, not {code!r}")
    f = Finding(code=code.slug, severity=severity or default, message=message, block=block, time_s=time_s, hint=hint,
                data=tuple(sorted((data or {}).items())))
    return f.with_pos(pos)


def sort_findings(findings: Iterable[Finding]) -> list[Finding]:
    """Most severe first, then by place; a finding reported twice (two paths reach the same mistake) once."""
    unique = dict.fromkeys(findings)  # equal findings (data aside) collapse, first one kept
    return sorted(unique, key=lambda f: (_RANK.get(f.severity, 9), f.file, f.line, f.column, f.code, f.message))


def has_errors(findings: Iterable[Finding]) -> bool:
    """True when an error finding is not accepted: a build is refused."""
    return any(f.severity == "error" and not f.accepted for f in findings)


def summary(findings: Iterable[Finding]) -> dict:
    counts = {s: 0 for s in SEVERITIES}
    accepted = 0
    for f in findings:
        if f.accepted:
            accepted += 1
        else:
            counts[f.severity] = counts.get(f.severity, 0) + 1
    counts["accepted"] = accepted
    return counts


def format_text(f: Finding) -> str:
    """A finding as `seqgen check` prints it: `file:line:column: severity: code: [block] t=... message`, then the fix."""
    when = f" t={fmt_when(f.time_s)}" if f.time_s is not None else ""
    blk = f" [{f.block}]" if f.block else ""
    acc = f" (accepted: {f.accept_reason})" if f.accepted else ""
    text = f"{f.where}: {f.severity}: {f.code}:{blk}{when} {f.message}{acc}"
    if f.hint:
        text += f"\n    fix: {f.hint}"
    return text


def to_json(findings: Iterable[Finding]) -> str:
    return json.dumps([f.to_dict() for f in findings], indent=2, sort_keys=True)
