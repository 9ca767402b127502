"""Preflight level: findings introduced, resolved, changed and unchanged.

Findings are matched by code and block (a renamed block is mapped to its new
name), never by line, so an edit that moves lines changes nothing here. A
matched finding whose message, fix or severity differs is *changed*: its
numbers are predictions (a transmitted fraction, a separation, a proposed
duration), and a version that moves them must not read as "unchanged".
"""

from __future__ import annotations

import difflib
import re

from .model import Change

_WEIGHT_NEW = {"error": 100, "warning": 90, "note": 20}
_WEIGHT_GONE = {"error": 95, "warning": 85, "note": 15}
_WEIGHT_TEXT = {"error": 65, "warning": 60, "note": 30}  # same severity, other numbers or words

# Where a finding points (a line, a file path) is not what it says: an edit that only moves lines, or two
# versions in other folders, must not make a finding "changed".
_WORD = re.compile(r"[^\s'\"(),;:]+")
_SUFFIX = re.compile(r"[A-Za-z]\w*")  # of a file name: .yaml, .csv
_FILE_LINE = re.compile(r"(\.[A-Za-z]\w*):\d+(?::\d+)?")  # file.yaml:12:3
_LINE = re.compile(r"\b(lines?) \d+(?:\s*(?:-|\.\.|to)\s*\d+)?")


def comparable(text: str, own: str | None = None) -> str:
    """`text` without the places it names (line numbers, folders of files; `own`: the name of the version's
    sequence file, which two versions need not share)."""
    text = _FILE_LINE.sub(r"\1:#", _WORD.sub(_file_name, text or ""))
    if own:
        text = re.sub(rf"(?<![\w.-]){re.escape(own)}(?![\w-])", "<sequence>", text)
    return _LINE.sub(r"\1 #", text)


def _file_name(m) -> str:
    """A word that is a path of a file: its name alone."""
    word = m.group()
    last = re.split(r"[/\\]", word)[-1]
    name, _, suffix = last.rstrip(".").rpartition(".")
    return last if last != word and name and _SUFFIX.fullmatch(suffix) else word


def _key(f, renames=None):
    block = f.block
    if renames and block in renames:
        block = renames[block]
    return f.code, block


def _said(f, own: str | None) -> tuple:
    """What a finding says, where it points aside: equal for a finding that did not change."""
    return f.severity, f.accepted, comparable(f.message, own), comparable(f.hint, own)


_SCORED_PAIRS = 400  # above this many candidate pairs in one code and block, pair in the order written


def _pair(fa: list, fb: list, own: tuple) -> tuple[list, list, list, list]:
    """(identical pairs, other pairs, old findings left, new findings left) of one code and block: identical
    findings first, then the most alike messages (many: in the order written)."""
    waiting: dict = {}
    for x in fa:
        waiting.setdefault(_said(x, own[0]), []).append(x)
    same, left_b = [], []
    for y in fb:
        match = waiting.get(_said(y, own[1]))
        if match:
            same.append((match.pop(0), y))
        else:
            left_b.append(y)
    taken = {id(x) for x, _ in same}
    left_a = [x for x in fa if id(x) not in taken]
    if len(left_a) * len(left_b) > _SCORED_PAIRS:
        n = min(len(left_a), len(left_b))
        return same, list(zip(left_a, left_b)), left_a[n:], left_b[n:]
    words_a = [comparable(x.message, own[0]).split() for x in left_a]
    words_b = [comparable(y.message, own[1]).split() for y in left_b]
    scored = sorted((-difflib.SequenceMatcher(None, wa, wb, autojunk=False).ratio(), i, j)
                    for i, wa in enumerate(words_a) for j, wb in enumerate(words_b))
    used_a, used_b, other = set(), set(), []
    for _, i, j in scored:
        if i not in used_a and j not in used_b:
            used_a.add(i)
            used_b.add(j)
            other.append((left_a[i], left_b[j]))
    other.sort(key=lambda p: (p[1].line, p[1].message))
    return (same, other, [x for i, x in enumerate(left_a) if i not in used_a],
            [y for j, y in enumerate(left_b) if j not in used_b])


def finding_changes(old: list, new: list, renames: dict | None = None,
                    names: tuple = (None, None)) -> tuple[list, list]:
    """(changes, unchanged findings of the new version); `names`: the file names of the two sequences, which
    their findings' texts may name."""
    groups_a: dict = {}
    groups_b: dict = {}
    for f in old:
        groups_a.setdefault(_key(f, renames), []).append(f)
    for f in new:
        groups_b.setdefault(_key(f, None), []).append(f)
    changes, unchanged = [], []
    for key in sorted(set(groups_a) | set(groups_b), key=lambda k: (k[0], k[1] or "")):
        fa = sorted(groups_a.get(key, []), key=lambda f: (f.line, f.message))
        fb = sorted(groups_b.get(key, []), key=lambda f: (f.line, f.message))
        code, block = key
        subject = code + (f" [{block}]" if block else "")
        same, other, gone, added = _pair(fa, fb, names)
        unchanged += [y for _, y in same]
        changes += [_changed(x, y, subject, names) for x, y in other]
        for y in sorted(added, key=lambda f: f.message):
            changes.append(Change("preflight", "finding-introduced", subject, f"{y.severity}: {subject}: {y.message}",
                                  None, y.severity + (" (accepted)" if y.accepted else ""),
                                  _WEIGHT_NEW.get(y.severity, 50) * (0.4 if y.accepted else 1.0), _fd(y)))
        for x in sorted(gone, key=lambda f: f.message):
            changes.append(Change("preflight", "finding-resolved", subject, f"{x.severity}: {subject}: {x.message}",
                                  x.severity + (" (accepted)" if x.accepted else ""), None,
                                  _WEIGHT_GONE.get(x.severity, 50) * (0.4 if x.accepted else 1.0), _fd(x)))
    return changes, unchanged


def _changed(x, y, subject: str, own: tuple) -> Change:
    """A finding of both versions that says something else in the new one."""
    what = []
    if x.accepted != y.accepted:
        what.append("now accepted" if y.accepted else "no longer accepted")
    if x.severity != y.severity:
        what.append(f"severity {x.severity} -> {y.severity}")
    text_moved = comparable(x.message, own[0]) != comparable(y.message, own[1])
    if text_moved:
        what.append(word_changes(x.message, y.message, own))
    if comparable(x.hint, own[0]) != comparable(y.hint, own[1]):
        what.append("fix: " + (word_changes(x.hint, y.hint, own) if x.hint and y.hint else
                               f"{x.hint or '(none)'} -> {y.hint or '(none)'}"))
    if x.accepted != y.accepted or x.severity != y.severity:
        weight = 70 if not y.accepted else 40
    else:
        weight = _WEIGHT_TEXT.get(y.severity, 30) * (0.4 if y.accepted else 1.0)
    data = _fd(y)
    data["old"], data["new"] = _side(x), _side(y)
    old, new = (f"{_state(x)}: {x.message}", f"{_state(y)}: {y.message}") if text_moved else (_state(x), _state(y))
    said = f"{y.severity}: {subject}: {'; '.join(what)}" + ("" if text_moved else f": {y.message}")
    return Change("preflight", "finding-changed", subject, said, old, new, weight, data)


_CONTEXT_WORDS = 2
_MAX_FRAGMENTS = 6
_TOKEN = re.compile(r"[^\s(),;]+|[(),;]")  # words, and the punctuation that separates clauses
_UNIT = re.compile(r"(?:[GMkmunpµ]?(?:s|m|Hz|W|K|T|G|A|V|J|rad)(?:/(?:cm|s|m|A))?|%|E_r|k_B|mm/s|um/s)\.?$")
_STOPS = frozenset("(),;")
_NUMBER = re.compile(r"[-+~<>=]*\d[\d.eE+-]*%?$")


def word_changes(old: str, new: str, own: tuple = (None, None)) -> str:
    """The words that differ between two texts, each after the words before it (up to a comma or bracket)
    and with the unit that follows a number: 'transmitted fraction 0.896 -> 0.259; 114 ms -> 1112 ms'."""
    ca, cb = comparable(old, own[0]), comparable(new, own[1])
    ta, tb = list(_TOKEN.finditer(ca)), list(_TOKEN.finditer(cb))
    a, b = [m.group() for m in ta], [m.group() for m in tb]
    ops = [op for op in difflib.SequenceMatcher(None, a, b, autojunk=False).get_opcodes() if op[0] != "equal"]
    if not ops:
        return "(only where it points moved)"
    out, last_j = [], 0
    for _, i1, i2, j1, j2 in ops[:_MAX_FRAGMENTS]:
        was = ca[ta[i1].start():ta[i2 - 1].end()] if i2 > i1 else "(nothing)"
        now = cb[tb[j1].start():tb[j2 - 1].end()] if j2 > j1 else "(nothing)"
        if i2 < len(a) and j2 < len(b) and a[i2] == b[j2] and _UNIT.match(a[i2]) and i2 > i1 and j2 > j1 \
                and _NUMBER.match(a[i2 - 1]) and _NUMBER.match(b[j2 - 1]):
            was, now = f"{was} {a[i2].rstrip('.')}", f"{now} {b[j2].rstrip('.')}"
            unit = 1  # shown: no context of the next fragment
        else:
            unit = 0
        k = j1
        while k > max(last_j, j1 - _CONTEXT_WORDS) and b[k - 1] not in _STOPS:
            k -= 1
        before = cb[tb[k].start():tb[j1 - 1].end()] if k < j1 else ""
        if before and (i1 == i2 or j1 == j2):  # words added or dropped: the words before them on both sides
            was, now = (before if i1 == i2 else f"{before} {was}"), (before if j1 == j2 else f"{before} {now}")
            before = ""
        out.append(f"{before} {was} -> {now}".strip())
        last_j = j2 + unit
    if len(ops) > _MAX_FRAGMENTS:
        out.append(f"... and {len(ops) - _MAX_FRAGMENTS} more (--json: both texts)")
    return "; ".join(out)


_BEFORE_CHECKS = ("load", "schema", "resolve")


def before_checks(findings: list) -> list:
    """The findings raised while loading, validating and resolving (not by preflight checks)."""
    from ..codes import lookup

    return [f for f in findings if lookup(f.code) is None or lookup(f.code).stage in _BEFORE_CHECKS]


def _state(f) -> str:
    return f.severity + (" (accepted)" if f.accepted else "")


def _side(f) -> dict:
    return {"message": f.message, "hint": f.hint, "severity": f.severity, "accepted": f.accepted, "line": f.line}


def _fd(f) -> dict:
    return {"code": f.code, "severity": f.severity, "block": f.block, "message": f.message, "file": f.file,
            "line": f.line, "time_s": f.time_s, "accepted": f.accepted}
