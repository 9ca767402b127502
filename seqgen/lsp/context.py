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
from pathlib import Path

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
    holds it (an int: the index of the sequence item it is in; None when the cursor is where a key is written);
    `item` True when it is where a plain `- ` item starts (a key of a mapping item, or a scalar item); `value` the text of the scalar (or flow element) it is in,
    up to the cursor; `word` the name under the cursor (letters, digits, _) and its columns; `token` the same
    with `.`, `-` and `/` (finding codes, synth parts, paths); `siblings` the other keys of its mapping with
    their values as written on the cursor's line; `character` its column."""

    line: int
    path: tuple
    key: str | int | None
    item: bool
    value: str
    word: str
    word_start: int
    word_end: int
    token: str
    token_start: int
    token_end: int
    siblings: tuple = ()
    character: int = 0  # the cursor's column

    @property
    def value_prefix(self) -> str:
        """The name being typed: the letters, digits and _ of the value just before the cursor."""
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
    return path, label, False, element, ()


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
    common = dict(line=line, character=character, word=word, word_start=ws, word_end=we, token=token,
                  token_start=ts, token_end=te)
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
    if kind == "item":  # "- na|": a key or a scalar item being typed
        path = stack.path()
        vtext = before[tail_start:]
        if vtext[:1] in ("{", "["):  # "- {code: ...": a flow collection as the item (accept: entries)
            fpath, key, at_key, element, pairs = _flow(vtext, path)
            return Cursor(path=fpath, key=None if at_key else key, item=False, value=element,
                          siblings=full_pairs or pairs, **common)
        return Cursor(path=path[:-1], key=path[-1], item=True, value=vtext.strip(), **common)
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


# ----------------------------------------------------------------------------- the document's world
# What the features read beside the cursor's text: the schema, the files the document uses and its rig. Each
# is cached by the file's content, so a call after the first reads a few small files and hashes them.


@dataclass(frozen=True)
class Place:
    """A name's place: its file, 0-based line and the columns of the name."""

    file: Path
    line: int
    col: int
    end: int


def is_rig_text(text: str) -> bool:
    return re.search(r"(?m)^seqgen_rig\s*:", text) is not None


@lru_cache(maxsize=4)
def _schema(name: str) -> dict:
    from ..validate.schema import load_schema

    return load_schema(name)


def schema_for(text: str) -> dict:
    return _schema("rig.schema.json" if is_rig_text(text) else "sequence.schema.json")


def deref(root: dict, node) -> dict:
    """`node` with its `$ref`s followed (its own description kept over the target's)."""
    seen = 0
    while isinstance(node, dict) and isinstance(node.get("$ref"), str) and seen < 16:
        ref = node["$ref"]
        target = root
        for part in ref.lstrip("#/").split("/") if ref.startswith("#/") else ("\0",):
            target = target.get(part) if isinstance(target, dict) else None
        if not isinstance(target, dict):
            break
        node = {**target, **{k: v for k, v in node.items() if k != "$ref"}}
        seen += 1
    return node if isinstance(node, dict) else {}


def properties(root: dict, node) -> dict:
    """The properties a mapping may hold, those of its anyOf / oneOf / allOf branches included."""
    node = deref(root, node)
    props = dict(node.get("properties") or {})
    for branch in (*node.get("anyOf", ()), *node.get("oneOf", ()), *node.get("allOf", ())):
        for k, v in properties(root, branch).items():
            props.setdefault(k, v)
    return props


def schema_at(root: dict, path: tuple):
    """The schema of the value at `path` (None where the schema says nothing)."""
    node = root
    for part in path:
        node = deref(root, node)
        if isinstance(part, int):
            items = node.get("items")
            if not isinstance(items, dict):
                items = next((b.get("items") for b in (*node.get("anyOf", ()), *node.get("oneOf", ()))
                              if isinstance(b, dict) and isinstance(b.get("items"), dict)), None)
            node = items
        else:
            props = properties(root, node)
            extra = node.get("additionalProperties")
            node = props.get(part) if part in props else (extra if isinstance(extra, dict) else None)
        if node is None:
            return None
    return node


def description(root: dict, node) -> str:
    if not isinstance(node, dict):
        return ""
    return str(node.get("description") or deref(root, node).get("description") or "")


def read_small(path: Path) -> str | None:
    """A file's text (None: missing, unreadable or over 8 MiB)."""
    try:
        if not path.is_file() or path.stat().st_size > 8 * 1024 * 1024:
            return None
        return path.read_text(encoding="utf-8", errors="replace")
    except (OSError, ValueError):
        return None


def top_value(text: str, key: str) -> Entry | None:
    e = entry_at(outline(text), (key,))
    return e if e is not None and e.value else None


def rig_path(text: str, path: Path) -> Path | None:
    """The rig file a sequence names (`rig:`, relative to the sequence); the document itself for a rig file."""
    if is_rig_text(text):
        return Path(path)
    e = top_value(text, "rig")
    return Path(path).parent / _unquote(e.value) if e is not None else None


@lru_cache(maxsize=8)
def _rig_model(rig_text: str, name: str):
    from ..load.yamlsrc import LoadError, load_text
    from ..resolve.rig import build_rig
    from ..resolve.sources import RIG_SCHEMA
    from ..validate.schema import validate_document

    try:
        doc = load_text(rig_text, name)
    except LoadError:
        return None
    if not isinstance(doc.data, dict) or any(f.severity == "error" for f in validate_document(doc, RIG_SCHEMA)):
        return None  # the rig builder reads only rigs its schema passes (as seqgen.resolve.sources does)
    rig, findings = build_rig(doc)
    return None if any(f.severity == "error" for f in findings) else rig


@dataclass(frozen=True)
class RigInfo:
    """A rig file: its path and text, the model seqgen builds from it (None if it cannot), and where each of
    its names is written: section ("channels", "beams", "coils", "drives", "imaging", "devices") -> name ->
    Place, with the section of every beam's role."""

    path: Path
    text: str
    rig: object
    names: dict
    roles: dict


@lru_cache(maxsize=8)
def _rig_info(rig_text: str, file: str) -> RigInfo:
    names: dict = {}
    roles = {}
    for e in outline(rig_text):
        if len(e.path) == 2 and e.kind == "key" and isinstance(e.path[1], str):
            names.setdefault(e.path[0], {})[e.path[1]] = Place(Path(file), e.line, e.col, e.col + len(e.path[1]))
            if e.path[0] == "beams" and e.value:
                m = re.search(r"\brole\s*:\s*([A-Za-z_]+)", e.value)
                if m:
                    roles[e.path[1]] = m.group(1)
        elif len(e.path) == 3 and e.path[0] == "beams" and e.path[2] == "role" and e.value:
            roles[e.path[1]] = _unquote(e.value)
    return RigInfo(Path(file), rig_text, _rig_model(rig_text, file), names, roles)


_WIRING_SUBKEYS = {"start": "on", "advance": "per_edge", "clock": "line"}  # as seqgen.resolve.rig reads them
_WIRING_FLOW = re.compile(r"\b(start|advance|clock)\s*:\s*\{[^}]*?\b(on|per_edge|line)\s*:\s*([A-Za-z_][A-Za-z0-9_]*)")


def wiring_lines(info: RigInfo | None) -> frozenset:
    """The digital lines the rig's devices are wired by (`start: {on: LINE}`, `advance: {per_edge: LINE}`,
    `clock: {line: LINE}`): seqgen generates their edges and no sequence may write them. Read from the built rig,
    else (a rig that does not build) from its text."""
    if info is None:
        return frozenset()
    if info.rig is not None:
        return frozenset(x for d in info.rig.devices.values() for x in (d.start_on, d.step_on, d.clock_on) if x)
    out = set()
    for e in outline(info.text):
        p = e.path
        if p[:1] != ("devices",) or not e.value:
            continue
        if len(p) == 4 and _WIRING_SUBKEYS.get(p[2]) == p[3]:
            out.add(_unquote(e.value))
        elif len(p) in (2, 3):  # a device's flow entry, or its continuation line (`start: {on: ...}, ...`)
            written = e.value if len(p) == 2 else f"{p[2]}: {e.value}"
            out.update(m.group(3) for m in _WIRING_FLOW.finditer(written) if _WIRING_SUBKEYS[m.group(1)] == m.group(2))
    return frozenset(out)


def rig_info(text: str, path: Path) -> RigInfo | None:
    """The rig of a sequence (or the rig file being edited), cached by its content; None if there is none."""
    rp = rig_path(text, path)
    if rp is None:
        return None
    rig_text = text if is_rig_text(text) else read_small(rp)
    return _rig_info(rig_text, str(rp)) if rig_text is not None else None


@dataclass(frozen=True)
class Names:
    """The blocks and params a sequence sees, its own and those of the files it uses: name -> Place, and each
    param's value as written."""

    blocks: dict
    params: dict
    written: dict
    files: tuple  # (Place of the `use:` / `rig:` path in the document, the file's path)


@lru_cache(maxsize=32)
def _file_names(text: str, file: str) -> tuple:
    blocks, params, written = {}, {}, {}
    for e in outline(text):
        p = e.path
        if len(p) == 3 and p[0] == "blocks" and p[2] == "name" and e.value:
            name = _unquote(e.value)
            blocks.setdefault(name, Place(Path(file), e.line, e.value_col, e.value_col + len(name)))
        elif len(p) == 2 and p[0] == "params" and isinstance(p[1], str):
            params.setdefault(p[1], Place(Path(file), e.line, e.col, e.col + len(p[1])))
            written.setdefault(p[1], e.value or "")
        elif len(p) == 3 and p[0] == "params" and p[2] == "value" and e.value:
            written[p[1]] = e.value
    return blocks, params, written


_FLOW_FILE = re.compile(r"""[{,]\s*file\s*:\s*(?:"([^"\n]*)"|'([^'\n]*)'|([^,}\s][^,}]*?))\s*(?=[,}]|$)""")


def _use_entries(text: str, path: Path) -> tuple:
    """(the `use:` index or None for `rig:`, Place of the path as written, the file) of each file the document
    names; a `use:` entry written as a flow mapping (`- {file: x, params: {...}}`) too."""
    out = []
    for e in outline(text):
        p = e.path
        if e.value and ((len(p) == 3 and p[0] == "use" and p[2] == "file") or p == ("rig",)):
            value = _unquote(e.value)
            start = e.value_col + (1 if e.value[:1] in "'\"" else 0)
            out.append((p[1] if p[0] == "use" else None, Place(Path(path), e.line, start, start + len(value)),
                        Path(path).parent / value))
        elif e.value and len(p) == 2 and p[0] == "use" and e.value[:1] == "{":
            m = _FLOW_FILE.search(e.value)
            if m:
                g = next(i for i in (1, 2, 3) if m.group(i) is not None)
                start = e.value_col + m.start(g)
                out.append((p[1], Place(Path(path), e.line, start, start + len(m.group(g))),
                            Path(path).parent / m.group(g)))
    return tuple(out)


def _use_files(text: str, path: Path) -> tuple:
    return tuple((place, file) for _, place, file in _use_entries(text, path))


def used_file(text: str, path: Path, index: int) -> Path | None:
    """The file the document's `use:` entry `index` names."""
    return next((file for i, _, file in _use_entries(text, path) if i == index), None)


def names(text: str, path: Path) -> Names:
    blocks, params, written = (dict(d) for d in _file_names(text, str(path)))
    files = _use_files(text, path)
    for place, file in files:
        if place.line >= 0 and file.suffix in (".yaml", ".yml") and not is_rig_text(text):
            used = read_small(file) if file != rig_path(text, path) else None
            if used is None:
                continue
            b, p, w = _file_names(used, str(file))
            for k, v in b.items():
                blocks.setdefault(k, v)
            for k, v in p.items():
                params.setdefault(k, v)
                written.setdefault(k, w.get(k, ""))
    return Names(blocks, params, written, files)


# ----------------------------------------------------------------------------- what a name at the cursor is

# (the mapping's key or action, the key) -> the rig names it takes, as the lowerings of seqgen.resolve.actions
# and the rig builder read them; "beams:trap" is the beams of that role
NAME_FIELDS = {
    ("set", "channel"): "outputs", ("ramp", "channel"): "outputs", ("pulse", "channel"): "outputs",
    ("sweep", "channel"): "synth-freq", ("trigger", "channel"): "digital", ("modulation", "channel"): "synth",
    ("trap_ramp", "beam"): "beams:trap", ("release", "beams"): "beams:trap", ("release", "coils"): "coils",
    ("push", "coil"): "coils", ("push", "beam"): "beams", ("barrier", "beam"): "beams:barrier",
    ("clock_pulse", "drive"): "drives", ("separate", "coil"): "coils", ("image", "setup"): "imaging",
    ("end", "leave_on"): "outputs", ("magnetic_hold", "currents"): "coils",
    # rig files: (section, key)
    ("beams", "power_channel"): "channels", ("coils", "current_channel"): "channels",
    ("drives", "channel"): "synth", ("imaging", "camera_channel"): "digital", ("imaging", "probe_beam"): "beams",
    ("channels", "device"): "devices",
}
BLOCK_FIELDS = {("blocks", "after"), ("blocks", "with"), ("accept", "block"), ("use", "blocks")}


def owner_of(full: tuple, rig_file: bool) -> tuple:
    """(the mapping's key or action, the key) of a value path, indexes skipped."""
    keys = [p for p in full if isinstance(p, str)]
    if not keys:
        return "", ""
    if rig_file:
        return keys[0], keys[-1]
    return (keys[-2] if len(keys) > 1 else ""), keys[-1]



def subject(cur: Cursor, text: str, path: Path) -> tuple:
    """What the name under the cursor is: ("code", slug), ("block", name), ("param", name), ("rig", section,
    name), ("file", Path), ("key", key path) or ("", "")."""
    from ..codes import ALL

    if cur.token in ALL:
        return ("code", cur.token)
    world = names(text, path)
    for place, file in world.files:
        if place.line == cur.line and place.col <= cur.word_start and cur.word_end <= place.end:
            return ("file", file)
    rig_file = is_rig_text(text)
    word = cur.word
    if cur.key is None:  # on a key
        full = cur.path + (word,)
        if rig_file and len(full) == 2 and full[0] in ("channels", "beams", "coils", "drives", "imaging", "devices"):
            return ("rig", full[0], word)
        if not rig_file and ((full[:1] == ("params",) and len(full) == 2) or
                             (full[:1] == ("use",) and len(full) == 4 and full[2] == "params")):
            return ("param", word)
        if not rig_file and full[-3:-1] == ("magnetic_hold", "currents"):
            return ("rig", "coils", word)
        return ("key", full)
    full = cur.full_path
    owner, field = owner_of(full, rig_file)
    section = full[0] if full else ""
    if not rig_file and (((section, field) in BLOCK_FIELDS) or full[:1] == ("blocks",) and field == "name") \
            and word in world.blocks:
        return ("block", word)
    what = NAME_FIELDS.get((owner, field))
    info = rig_info(text, path)
    if what and info is not None:
        sec = {"outputs": "channels", "synth-freq": "channels", "digital": "channels", "synth": "channels"}.get(
            what.partition(":")[0], what.partition(":")[0])
        name = cur.token.split(".")[0] if sec == "channels" else word
        if name in info.names.get(sec, {}):
            return ("rig", sec, cur.token if sec == "channels" and "." in cur.token else name)
    if not rig_file and word in world.params:
        return ("param", word)
    if not rig_file and word in world.blocks:
        return ("block", word)
    if info is not None:
        for sec in ("channels", "beams", "coils", "drives", "imaging", "devices"):
            if word in info.names.get(sec, {}):
                return ("rig", sec, word)
    return ("", "")
