"""Where the cursor is in a YAML document that may be half typed or broken.

The editor asks about documents that are mostly not valid YAML while they are being typed, so the document is
read line by line by indentation: every `key:` and `- ` item gets its path (keys and item indexes, as
`Document.positions` counts them), and the line of the cursor is also read inside flow collections
(`{channel: x, value: 2 W}`). Nothing here raises on any text: a line that makes no sense is skipped.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from functools import lru_cache

_KEY = re.compile(r"""("[^"\n]*"|'[^'\n]*'|[^\s:{}\[\],#'"][^:{}\[\],#]*?)[ \t]*:(?=[ \t]|$)""")
_WORD_CHARS = frozenset("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789_")
_TOKEN_CHARS = _WORD_CHARS | frozenset(".-/")


@dataclass(frozen=True)
class Entry:
    """One `key:` or `- ` item of the document: its path, 0-based line and column, and its value written on the
    same line (None: none; the text of a flow collection as written)."""

    path: tuple
    line: int
    col: int
    kind: str  # "key" | "item"
    value: str | None
    value_col: int


@dataclass(frozen=True)
class Cursor:
    """The cursor's place: `path` is the collection it is in (its mapping or sequence); `key` the key whose value
    holds it (None when the cursor is where a key, or a sequence item, is written); `item` True when it is
    where a plain `- ` item starts (a key or a scalar); `value` the text of the scalar (or flow element) it is in,
    up to the cursor; `word` the name under the cursor (letters, digits, _) and its columns; `token` the same
    with `.`, `-` and `/` (finding codes, synth parts, paths); `siblings` the other keys of its mapping with
    their values as written on the cursor's line."""

    line: int
    path: tuple
    key: str | None
    item: bool
    value: str
    word: str
    word_start: int
    word_end: int
    token: str
    token_start: int
    token_end: int
    siblings: tuple = ()

    @property
    def prefix(self) -> str:
        """The part of the word before the cursor."""
        return self.value_prefix

    @property
    def value_prefix(self) -> str:
        m = re.search(r"[A-Za-z0-9_]*$", self.value)
        return m.group(0) if m else ""

    @property
    def full_path(self) -> tuple:
        """The path of the value the cursor is in (the collection's path for a key position)."""
        return self.path + ((self.key,) if self.key is not None else ())


def strip_comment(line: str) -> str:
    """The line without its comment (a `#` at the start or after a blank, outside quotes)."""
    quote = None
    for i, ch in enumerate(line):
        if quote:
            if ch == quote:
                quote = None
        elif ch in "'\"" and (i == 0 or line[i - 1] in " \t:[{,-"):
            quote = ch
        elif ch == "#" and (i == 0 or line[i - 1] in " \t"):
            return line[:i]
    return line


def _unquote(name: str) -> str:
    name = name.strip()
    if len(name) >= 2 and name[0] == name[-1] and name[0] in "'\"":
        return name[1:-1]
    return name


def line_tokens(line: str) -> list:
    """(kind, column, name or None, value text or None, value column) of each item dash and key of one line."""
    text = strip_comment(line).rstrip()
    out = []
    pos = len(text) - len(text.lstrip(" "))
    if pos >= len(text) or text[pos] == "#":
        return out
    if text.startswith(("---", "...", "%")) and pos == 0:
        return out
    while pos < len(text) and text[pos] == "-" and (pos + 1 == len(text) or text[pos + 1] in " \t"):
        start = pos
        pos += 1
        while pos < len(text) and text[pos] in " \t":
            pos += 1
        rest = text[pos:]
        if not rest or (rest[0] == "-" and (len(rest) == 1 or rest[1] in " \t")) or _KEY.match(text, pos):
            out.append(("item", start, None, None, pos))
        else:
            out.append(("item", start, None, rest.strip(), pos))
            return out
    m = _KEY.match(text, pos) if pos < len(text) and text[pos] not in "{[" else None
    if m:
        vstart = m.end()
        while vstart < len(text) and text[vstart] in " \t":
            vstart += 1
        value = text[vstart:].strip() or None
        out.append(("key", pos, _unquote(m.group(1)), value, vstart))
    return out


class _Stack:
    """Open keys and items by column: the path of whatever comes next."""

    def __init__(self):
        self.frames: list = []  # [column, kind, label]
        self.counts: dict = {}

    def path(self) -> tuple:
        return tuple(f[2] for f in self.frames)

    def close_to(self, col: int, kind: str) -> None:
        frames = self.frames
        while frames and (frames[-1][0] > col or (frames[-1][0] == col and (kind == "key" or frames[-1][1] == "item"))):
            frames.pop()

    def push(self, kind: str, col: int, name) -> tuple:
        self.close_to(col, kind)
        if kind == "item":
            parent = self.path()
            name = self.counts.get(parent, 0)
            self.counts[parent] = name + 1
            # a new item starts a new mapping: forget the item counts below the old one
            for k in [k for k in self.counts if len(k) > len(parent) and k[:len(parent)] == parent]:
                del self.counts[k]
        self.frames.append([col, kind, name])
        return self.path()


def _feed(stack: _Stack, lines, start: int = 0) -> list:
    entries = []
    for n, line in enumerate(lines, start):
        for kind, col, name, value, vcol in line_tokens(line):
            entries.append(Entry(stack.push(kind, col, name), n, col, kind, value, vcol))
    return entries


@lru_cache(maxsize=16)
def outline(text: str) -> tuple:
    """Every key and item of the document as `Entry`s, in order (best effort on a broken document)."""
    return tuple(_feed(_Stack(), text.splitlines()))


def entry_at(entries, path: tuple) -> Entry | None:
    for e in entries:
        if e.path == path:
            return e
    return None


def _flow(text: str, base: tuple):
    """Read a flow collection up to the cursor: (path of the innermost collection, its key at the cursor or
    None, whether the cursor is at a key, the element's text so far, (key, value) pairs before the cursor)."""
    frames: list = []  # [kind, key or index, element start, pairs]
    quote = None
    for i, ch in enumerate(text):
        if quote:
            if ch == quote:
                quote = None
            continue
        if ch in "'\"":
            quote = ch
        elif ch in "{[":
            frames.append(["map" if ch == "{" else "seq", None if ch == "{" else 0, i + 1, []])
        elif ch in "}]":
            if frames:
                frames.pop()
        elif ch == "," and frames:
            top = frames[-1]
            if top[0] == "map":
                if top[1] is not None:
                    top[3].append((top[1], text[top[2]:i].strip()))
                top[1] = None
            else:
                top[1] += 1
            top[2] = i + 1
        elif ch == ":" and frames and frames[-1][0] == "map" and frames[-1][1] is None \
                and (i + 1 == len(text) or text[i + 1] in " \t,}]"):
            top = frames[-1]
            top[1] = _unquote(text[top[2]:i])
            top[2] = i + 1
    if not frames:
        return base, None, False, text, ()
    path = base
    for kind, label, _, _ in frames[:-1]:
        if label is None:  # a collection at a key position: not a path
            return base, None, False, "", ()
        path += (label,)
    kind, label, start, pairs = frames[-1]
    element = text[start:].lstrip()
    if kind == "map":
        return path, label, label is None, element, tuple(pairs)
    return path + (label,), None, False, element, ()


def _around(line: str, character: int, chars) -> tuple:
    start = character
    while start > 0 and line[start - 1] in chars:
        start -= 1
    end = character
    while end < len(line) and line[end] in chars:
        end += 1
    return line[start:end], start, end


def _rest_pairs(text: str) -> tuple:
    """(key, value) pairs of a flow mapping written on one line, at its first level (best effort)."""
    return tuple((k, v.strip()) for k, v in re.findall(r"([A-Za-z_][A-Za-z0-9_]*)\s*:\s*([^,{}\[\]]*)", text))


def cursor_at(text: str, line: int, character: int) -> Cursor | None:
    """The cursor's place, or None (outside the text, or in a comment)."""
    lines = text.splitlines()
    if line < 0 or character < 0:
        return None
    if line >= len(lines):
        if line == len(lines) and character == 0:
            lines.append("")
        else:
            return None
    cur = lines[line]
    character = min(character, len(cur))
    before = cur[:character]
    if strip_comment(before) != before:
        return None
    stack = _Stack()
    _feed(stack, lines[:line])
    word, ws, we = _around(cur, character, _WORD_CHARS)
    token, ts, te = _around(cur, character, _TOKEN_CHARS)
    common = dict(line=line, word=word, word_start=ws, word_end=we, token=token, token_start=ts, token_end=te)
    for kind, col, name, _, _ in line_tokens(cur):  # on a key of the line: the mapping the key is in
        if kind == "key" and col <= character <= col + len(name) and col < len(before) + 1:
            for k2, c2, n2, _, _ in line_tokens(cur):
                if c2 >= col:
                    break
                stack.push(k2, c2, n2)
            stack.close_to(col, "key")
            return Cursor(path=stack.path(), key=None, item=False, value=before[col:], **common)
    toks = line_tokens(before)
    if not before.strip():  # nothing yet on the line: a key or item of the collection at this column
        stack.close_to(character, "key")
        return Cursor(path=stack.path(), key=None, item=False, value="", **common)
    tail_start = 0
    for kind, col, name, value, vcol in toks:
        if kind == "key":
            stack.push("key", col, name)
        else:
            stack.push("item", col, None)
        tail_start = vcol
    last = toks[-1] if toks else None
    if last is None:  # a continuation line of a flow collection or a scalar: take it as a value
        return Cursor(path=stack.path()[:-1], key=(stack.path() or (None,))[-1], item=False,
                      value=before.strip(), **common)
    kind, col, name, value, vcol = last
    full_pairs = _rest_pairs(cur[vcol:])
    if kind == "item" and value is None:  # "- na|": a key or a scalar item being typed
        path = stack.path()
        return Cursor(path=path, key=None, item=True, value=before[tail_start:].strip(), **common)
    if kind == "item":
        return Cursor(path=stack.path()[:-1], key=None, item=True, value=before[vcol:].strip(), **common)
    key_path = stack.path()
    parent = key_path[:-1]
    vtext = before[vcol:] if len(before) >= vcol else ""
    if vtext[:1] in ("{", "["):
        path, key, at_key, element, pairs = _flow(vtext, key_path)
        return Cursor(path=path, key=None if at_key else key, item=False, value=element,
                      siblings=full_pairs or pairs, **common)
    return Cursor(path=parent, key=name, item=False, value=vtext, **common)


def block_name_spans(text: str) -> dict:
    """Block name -> (line, column) of its `name:` value in this document (best effort, broken text too)."""
    out = {}
    for e in outline(text):
        if len(e.path) == 3 and e.path[0] == "blocks" and e.path[2] == "name" and e.value:
            out.setdefault(_unquote(e.value), (e.line, e.value_col))
    return out
