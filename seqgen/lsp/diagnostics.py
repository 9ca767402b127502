"""Findings -> editor diagnostics, as plain data (the server turns them into LSP objects).

Pure: the text of each file comes in as lines, nothing is read or sent here. A diagnostic spans the word
its finding points at (the key, or the value the position names), 0-based as LSP counts; its message is the
finding as `seqgen check` prints it without the place (block, time, message, accepted reason, then the fix).
Other places a finding names ("(file.yaml:9:9)", "first on line 8", "at line 11", the members of a cycle,
`data["other_line"]`) become related locations, so an editor can jump to both lines of an overlap.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Callable, Iterable, Mapping

from ..findings import Finding, SourcePos
from ..textfmt import fmt_when

SEVERITY = {"error": 1, "warning": 2, "note": 3}  # LSP DiagnosticSeverity: Error, Warning, Information
ACCEPTED_SEVERITY = 4  # Hint: an accepted finding stays visible, quietly
SOURCE = "seqgen"


@dataclass(frozen=True)
class Related:
    """Another place a finding names: file (as findings name it), 0-based line and character, what it is."""
    file: str
    line: int
    character: int
    message: str


@dataclass(frozen=True)
class Diagnostic:
    """One finding placed in one file: 0-based line, characters [start, end) on it."""
    file: str
    line: int
    start: int
    end: int
    severity: int
    code: str
    message: str
    related: tuple = ()  # Related
    finding: Finding | None = None  # what it shows (the code actions read its hint)


_WORD = re.compile(r"[^\s:,{}\[\]#]+")
_FILE_REF = re.compile(r"([\w./\\~-]+\.ya?ml):(\d+)(?::(\d+))?")
_LINE_REF = re.compile(r"\blines? (\d+)\b(?![.\d])(?! ?[kMG]?Hz)")
_CYCLE = re.compile(r"(?:cycle|loop): (.+?)(?:$|\s\|\|)")
_BOTH = re.compile(r"\bboth '([^']+)'.*? and '([^']+)'")


def message_of(f: Finding) -> str:
    """The finding's text without its place: `[block] t=... message (accepted: why)`, then `fix: hint`."""
    head = f"[{f.block}] " if f.block else ""
    when = f"t={fmt_when(f.time_s)} " if f.time_s is not None else ""
    acc = f" (accepted: {f.accept_reason})" if f.accepted else ""
    text = f"{head}{when}{f.message}{acc}"
    return text + (f"\nfix: {f.hint}" if f.hint else "")


def span(lines: list | None, line: int, column: int) -> tuple[int, int, int]:
    """(0-based line, start, end) of the word at the 1-based `line`:`column` (the whole line's text when no
    word stands there; line 0 of the file when the place is unknown)."""
    if line <= 0 or not lines or line > len(lines):
        return 0, 0, 0
    text = lines[line - 1]
    start = min(max(column - 1, 0), len(text))
    m = _WORD.match(text, start)
    if m and m.end() > start:
        return line - 1, start, m.end()
    stripped = text.rstrip()
    first = len(text) - len(text.lstrip())
    return line - 1, first, max(len(stripped), first)


def related_of(f: Finding, names: Mapping[str, SourcePos] | None = None) -> tuple[Related, ...]:
    """Other places the finding names: 'file.yaml:L:C', 'line N' (of its own file), `data["other_line"]`, and the
    members of a cycle (`names`: block and param name -> its place; a file name -> its first line)."""
    out: list[Related] = []
    own = (f.file, f.line)
    text = f"{f.message} || {f.hint}"
    for m in _FILE_REF.finditer(text):
        out.append(Related(m.group(1), int(m.group(2)) - 1, max(int(m.group(3) or 1) - 1, 0), "named here"))
    files_named = {(r.file, r.line) for r in out}
    for m in _LINE_REF.finditer(_FILE_REF.sub("", text)):
        n = int(m.group(1))
        if (f.file, n - 1) not in files_named:
            out.append(Related(f.file, n - 1, 0, f"line {n}"))
    data = dict(f.data)
    if isinstance(data.get("other_line"), int) and data["other_line"] > 0:
        col = data.get("other_column")
        out.append(Related(f.file, data["other_line"] - 1, max(int(col) - 1, 0) if isinstance(col, int) else 0,
                           "the other write"))
    cycle = _CYCLE.search(f.message)
    if cycle:
        for name in dict.fromkeys(x.strip() for x in cycle.group(1).split(" -> ")):
            pos = (names or {}).get(name)
            if pos is not None and pos.line:
                out.append(Related(pos.file, pos.line - 1, max(pos.column - 1, 0), f"'{name}' in the cycle"))
            elif name.endswith((".yaml", ".yml")):
                out.append(Related(name, 0, 0, f"{name} in the cycle"))
    both = _BOTH.search(f.message)
    if both:  # "line 'trig' wires both 'dio2' (advance) and 'ao' (start)": the two it names
        for name in both.groups():
            pos = (names or {}).get(name)
            if pos is not None and pos.line:
                out.append(Related(pos.file, pos.line - 1, max(pos.column - 1, 0), f"'{name}'"))
    seen, unique = set(), []
    for r in out:  # the finding's own place and repeats are left out
        key = (r.file, r.line)
        if key not in seen and key != (own[0], own[1] - 1):
            seen.add(key)
            unique.append(r)
    return tuple(unique)


def to_diagnostics(findings: Iterable[Finding], lines_of: Callable[[str], list | None],
                   names: Mapping[str, SourcePos] | None = None) -> list[Diagnostic]:
    """Each finding as a diagnostic in its own file (`lines_of(file)`: that file's lines, or None)."""
    out = []
    for f in findings:
        line, start, end = span(lines_of(f.file) if f.file else None, f.line, f.column)
        sev = ACCEPTED_SEVERITY if f.accepted else SEVERITY.get(f.severity, 3)
        out.append(Diagnostic(f.file, line, start, end, sev, f.code, message_of(f), related_of(f, names), f))
    return out


def mirrored(d: Diagnostic, file: str, line: int, column: int, lines: list | None) -> Diagnostic:
    """A diagnostic of another file (a `use:`d file, the rig) shown at the `use:` / `rig:` key of `file` that
    leads to it (1-based `line`, `column`), naming where it is and pointing there."""
    at, start, end = span(lines, line, column)
    where = f"{d.file}:{d.line + 1}:{d.start + 1}"
    here = Related(d.file, d.line, d.start, "the finding")
    return Diagnostic(file, at, start, end, d.severity, d.code, f"in {where}: {d.message}", (here,) + d.related,
                      d.finding)
