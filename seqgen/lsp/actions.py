"""Code actions for findings, as plain data (the server turns them into LSP objects).

Pure: a file's text comes in as lines and edits come out. Two kinds:
- the fix a finding proposes ("did you mean 'blocks'?", "write '30 uW'", "write 'kick_time: 2 ms'"), written
  where `tests/test_applied_fixes.py` writes it: over the key a finding on an unknown key names, after the key
  named in a 'key: value' fix, else over the value of the key at the finding's column;
- accepting a finding: an entry `{code: ..., block: ..., reason: ""}` appended to the sequence's
  `accept:` list, the list created at the end of the file when there is none.
"""

from __future__ import annotations

import difflib
import json
import re
from dataclasses import dataclass

from ..findings import Finding

QUICKFIX = "quickfix"
# empty: the file does not validate (schema.bad-value at the reason) until the user writes why, so one click
# never accepts a finding, least of all a safety or hardware error, without a reason
TODO_REASON = ""

_PROPOSED = (re.compile(r"\bwrite '([^']+)'"), re.compile(r"\be\.g\. '([^']+)'"),
             re.compile(r"did you mean '([^']+)'\?"))
_KEY_AT = re.compile(r"[A-Za-z_][A-Za-z0-9_]*:\s+")
_KEY_VALUE = re.compile(r"([A-Za-z_][A-Za-z0-9_]*): (.+)")
_UNKNOWN_KEY = re.compile(r"^unknown key '([^']+)'")
_PLAIN = re.compile(r"[A-Za-z_][A-Za-z0-9_.-]*")
_QUOTED = re.compile(r"'([^'\s]+)'")


@dataclass(frozen=True)
class Edit:
    """Replace the text from (start_line, start_char) to (end_line, end_char), 0-based, of `file` by `text`."""
    file: str
    start_line: int
    start_char: int
    end_line: int
    end_char: int
    text: str


@dataclass(frozen=True)
class Action:
    title: str
    kind: str
    edits: tuple  # Edit
    finding: Finding
    preferred: bool = False


def proposed(hint: str) -> str | None:
    """The value a fix names: the first quoted text after 'write', 'e.g.' or 'did you mean', else None."""
    for rx in _PROPOSED:
        m = rx.search(hint or "")
        if m:
            return m.group(1)
    return None


def scalar_end(line: str, start: int) -> int:
    """Where the YAML scalar starting at `start` ends: a quoted string, or up to , } ] or a comment."""
    if start < len(line) and line[start] in "'\"":
        end = line.find(line[start], start + 1)
        return end + 1 if end > 0 else len(line)
    end = start
    while end < len(line) and line[end] not in ",}]" and not line.startswith(" #", end):
        end += 1
    while end > start and line[end - 1] == " ":
        end -= 1
    return end


def fix_action(f: Finding, lines: list) -> Action | None:
    """The edit that writes the value `f`'s fix proposes into `lines` (the text of `f.file`), or None."""
    value = proposed(f.hint)
    if value is None or not f.file or not 0 < f.line <= len(lines):
        return None
    line = lines[f.line - 1]
    start = max(f.column - 1, 0)
    unknown = _UNKNOWN_KEY.match(f.message)
    kv = _KEY_VALUE.fullmatch(value)
    if unknown and line.startswith(unknown.group(1), start):  # a misspelt key: rename it
        end, title = start + len(unknown.group(1)), f"Change '{unknown.group(1)}' to '{value}'"
    elif kv:
        key, value = kv.groups()
        at = re.search(rf"\b{re.escape(key)}:\s*(\{{\s*value:\s*)?", line)
        if not at:
            return None
        start = at.end()
        end, title = scalar_end(line, start), f"Write '{key}: {value}'"
    else:
        at = _KEY_AT.match(line, start)  # a finding at a key: its value is replaced
        start = at.end() if at else start
        end, title = scalar_end(line, start), f"Write '{value}'"
        if "did you mean" in f.hint:  # a misspelt name inside the value ('after: aa + 1 ms'): that name alone
            start, end, title = _misspelt(f.message, value, line, start, end) or (start, end, title)
    if start >= len(line) or end <= start:
        return None
    return Action(title, QUICKFIX, (Edit(f.file, f.line - 1, start, f.line - 1, end, value),), f, preferred=True)


def _misspelt(message: str, value: str, line: str, start: int, end: int) -> tuple | None:
    """(start, end, title) of the name the message quotes that stands as a word in line[start:end] and is
    closest to the proposed `value`, or None."""
    best = None
    for name in dict.fromkeys(_QUOTED.findall(message)):
        m = re.search(rf"(?<![\w.]){re.escape(name)}(?![\w.])", line[start:end])
        if m and name != value:
            score = difflib.SequenceMatcher(None, name, value).ratio()
            if best is None or score > best[0]:
                best = (score, start + m.start(), start + m.end(), f"Change '{name}' to '{value}'")
    return best[1:] if best else None


def _yaml_word(text: str) -> str:
    return text if _PLAIN.fullmatch(text) else json.dumps(text)


def accept_entry(f: Finding) -> str:
    """The flow mapping that accepts `f`: its code, its block when it has one, a reason to fill in."""
    block = f", block: {_yaml_word(f.block)}" if f.block else ""
    return f"{{code: {_yaml_word(f.code)}{block}, reason: {json.dumps(TODO_REASON)}}}"


def _top_key(lines: list, key: str) -> int | None:
    for i, text in enumerate(lines):
        if text.startswith(f"{key}:"):
            return i
    return None


def accept_action(f: Finding, file: str, lines: list) -> Action | None:
    """The edit that accepts `f` in the sequence `file` (its `lines`): appended to its `accept:` list, or a new
    list at the end of the file; None when the list is written in a form this does not edit (a flow list
    over several lines)."""
    if f.accepted or f.code.startswith("schema."):  # a file that does not load or resolve accepts nothing
        return None
    entry = accept_entry(f)
    title = f"Accept {f.code}" + (f" in block '{f.block}'" if f.block else "") + " (then write the reason)"
    at = _top_key(lines, "accept")
    if at is None:
        n = len(lines)
        while n and not lines[n - 1].strip():
            n -= 1
        if n == 0:
            return None
        last = lines[n - 1]
        edit = Edit(file, n - 1, len(last), n - 1, len(last), f"\naccept:\n  - {entry}")
        return Action(title, QUICKFIX, (edit,), f)
    head = lines[at]
    rest = head[len("accept:"):].split(" #")[0].strip()
    if not rest:
        last, indent = at, "  - "
        for i in range(at + 1, len(lines)):
            text = lines[i]
            if not text.strip() or text.lstrip().startswith("#"):
                continue
            if text.startswith((" ", "-")):
                if last == at:
                    indent = text[:len(text) - len(text.lstrip(" "))] + "- "
                last = i
                continue
            break
        edit = Edit(file, last, len(lines[last]), last, len(lines[last]), f"\n{indent}{entry}")
        return Action(title, QUICKFIX, (edit,), f)
    if rest.startswith("[") and rest.endswith("]"):  # a flow list on the key's line
        close = head.rindex("]", 0, len(head.split(" #")[0]))
        inner = head[head.index("[") + 1:close].strip()
        edit = Edit(file, at, close, at, close, (", " if inner else "") + entry)
        return Action(title, QUICKFIX, (edit,), f)
    return None


def actions_for(findings, file_lines, main_file: str, main_lines: list) -> list[Action]:
    """Every action for `findings`: the fix each proposes (in its own file, `file_lines(file)` -> lines or None)
    and accepting each in the sequence `main_file`."""
    out = []
    for f in findings:
        lines = file_lines(f.file) if f.file else None
        fix = fix_action(f, lines) if lines is not None else None
        if fix is not None:
            out.append(fix)
        acc = accept_action(f, main_file, main_lines)
        if acc is not None:
            out.append(acc)
    return out
