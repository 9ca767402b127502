"""Safe YAML loading that keeps the line and column of every key and value.

The document is composed into nodes with the libyaml-backed safe loader when
available (fast), then converted to plain dicts and lists while recording the
position of each path. Aliases are expanded with a budget so that an
alias-expansion bomb is refused instead of exhausting memory; duplicate keys
are an error rather than silently last-wins.

A plain document (no anchors, aliases or explicit tags; one document; no
duplicate or non-scalar keys; within the depth and node limits) is built
straight from libyaml's event stream in one pass, without composing nodes:
about twice as fast on a large file. Anything else, every error included, is
loaded again by the node path above, so findings and limits are exactly its own.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import gc
import re
import stat

import yaml

from ..findings import Finding, SourcePos, make
from ..codes import DUPLICATE_KEY, FILE_MISSING, FILE_TOO_LARGE, YAML_SYNTAX, YAML_TOO_COMPLEX, YAML_UNSUPPORTED

_BASE_LOADER = getattr(yaml, "CBaseLoader", yaml.BaseLoader)
_DEFAULT_TAGS = {yaml.ScalarNode: "tag:yaml.org,2002:str", yaml.SequenceNode: "tag:yaml.org,2002:seq",
                 yaml.MappingNode: "tag:yaml.org,2002:map"}


class _Loader(_BASE_LOADER):
    """libyaml composer without implicit tag resolution: plain scalars are typed
    by _plain_scalar afterwards, which is several times faster than the
    resolver's regex walk for every scalar. Explicit tags still come through."""

    def resolve(self, kind, value, implicit):
        return _DEFAULT_TAGS[kind]

MAX_FILE_BYTES = 8 * 1024 * 1024
MAX_NODES = 2_000_000  # after alias expansion
MAX_DEPTH = 64



_INT = re.compile(r"^[-+]?(0|[1-9][0-9_]*)$")
_HEX = re.compile(r"^0x[0-9a-fA-F_]+$")
_FLOAT = re.compile(r"^[-+]?([0-9][0-9_]*\.?[0-9]*|\.[0-9]+)([eE][-+]?[0-9]+)?$")  # ASCII digits only (YAML 1.2 core)
_SPECIAL = {"true": True, "false": False, "null": None, "~": None, "": None,
            ".inf": float("inf"), "+.inf": float("inf"), "-.inf": float("-inf"), ".nan": float("nan")}


# first characters of every _SPECIAL word (in any of its accepted cases), of _INT, _HEX and _FLOAT, and ""
_MAY_TYPE = frozenset("0123456789+-.~tTfFnN") | {""}


def _plain_scalar(text: str):
    """Type a plain (unquoted) scalar by the YAML 1.2 core schema.

    1.2e5 is a number (a YAML 1.1 loader would read it as text, a common trap);
    `on`/`off`/`yes`/`no` stay text, so a channel named `on` is not a boolean.
    """
    if text[:1] not in _MAY_TYPE:  # a word (channel, shape, param name): neither special nor a number
        return text
    low = text.lower()
    if low in _SPECIAL and text in (low, low.capitalize(), low.upper()):
        return _SPECIAL[low]
    if _INT.match(text):
        try:
            return int(text.replace("_", ""))
        except ValueError:  # over Python's limit on digits (4300): no real quantity is that long
            return float(text.replace("_", ""))
    if _HEX.match(text):
        return int(text.replace("_", ""), 16)
    if _FLOAT.match(text):
        return float(text.replace("_", ""))
    return text


class LoadError(Exception):
    def __init__(self, finding: Finding):
        super().__init__(finding.message)
        self.finding = finding


@dataclass(frozen=True)
class Document:
    """Plain data of one YAML file plus positions keyed by path tuples."""

    file: str
    data: Any
    positions: dict  # path tuple -> (line, column), 1-based
    text_sha256: str

    def pos(self, path: tuple = ()) -> SourcePos:
        """Position of the deepest known prefix of `path`."""
        positions = self.positions
        if type(path) is not tuple:
            path = tuple(path)
        hit = positions.get(path)
        while hit is None and path:
            path = path[:-1]
            hit = positions.get(path)
        line, col = hit if hit is not None else (0, 0)
        return SourcePos(self.file, line, col)


def load_file(path: str | Path, display: str | None = None) -> Document:
    p = Path(path)
    name = display or str(path)
    try:
        st = p.stat()
        if stat.S_ISDIR(st.st_mode):
            raise IsADirectoryError(name)
        if not stat.S_ISREG(st.st_mode):  # a device (/dev/zero), a pipe or a socket: reading may never end
            raise LoadError(make(FILE_MISSING, f"{name} is not a regular file", SourcePos(name),
                                 hint="name a .yaml file"))
        size = st.st_size
        if size > MAX_FILE_BYTES:
            raise LoadError(make(FILE_TOO_LARGE, f"file is {size} bytes, over the {MAX_FILE_BYTES} byte limit",
                                 SourcePos(name), hint="check that this is the sequence file you meant"))
        with open(p, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES + 1)  # bounded even if the file grows while it is read
        if len(raw) > MAX_FILE_BYTES:
            raise LoadError(make(FILE_TOO_LARGE, f"file is over the {MAX_FILE_BYTES} byte limit", SourcePos(name),
                                 hint="check that this is the sequence file you meant"))
    except LoadError:
        raise
    except IsADirectoryError:
        raise LoadError(make(FILE_MISSING, f"{name} is a folder, not a file", SourcePos(name),
                             hint="name a .yaml file")) from None
    except OSError as exc:
        raise LoadError(make(FILE_MISSING, f"cannot read {name}: {exc.strerror or exc}", SourcePos(name),
                             hint="check the path; paths in a sequence file are relative to that file")) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise LoadError(make(YAML_SYNTAX, f"file is not UTF-8 text (byte {exc.start})", SourcePos(name),
                             hint="save the file as UTF-8")) from None
    return load_text(text, name)


def load_text(text: str, name: str = "<text>") -> Document:
    """Parse YAML text into a Document (LoadError with a finding on bad input).

    The cyclic garbage collector is paused meanwhile: building hundreds of
    thousands of nodes otherwise triggers collections over an ever larger heap,
    which made a file at the size limit about 2.5 times slower to load. The
    node trees hold no reference cycles, so nothing is lost by waiting."""
    paused = gc.isenabled()
    gc.disable()
    try:
        return _load_text(text, name)
    finally:
        if paused:
            gc.enable()


def _load_text(text: str, name: str) -> Document:
    import hashlib

    sha = hashlib.sha256(text.encode("utf-8")).hexdigest()
    if len(text) > MAX_FILE_BYTES:
        raise LoadError(make(FILE_TOO_LARGE, "text too large", SourcePos(name)))
    try:
        data, positions = _build_from_events(text)
    except _NotPlain:
        return _load_via_nodes(text, name, sha)
    return Document(name, data, positions, sha)


def _load_via_nodes(text: str, name: str, sha: str) -> Document:
    """Compose the node tree, check it and convert it: every document, and every error, goes through here."""
    try:
        _check_depth(text, name)
        nodes = list(yaml.compose_all(text, Loader=_Loader))
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line, col = (mark.line + 1, mark.column + 1) if mark else (0, 0)
        problem = exc.problem or exc.context or "syntax error"
        hint = "YAML forbids tabs for indentation; use spaces" if "\t" in problem or "tab" in problem else \
            "check indentation, colons and brackets on this line and the one before"
        raise LoadError(make(YAML_SYNTAX, f"YAML syntax: {problem}", SourcePos(name, line, col), hint=hint)) from None
    except yaml.YAMLError as exc:
        raise LoadError(make(YAML_SYNTAX, f"YAML error: {exc}", SourcePos(name))) from None
    except RecursionError:
        raise LoadError(make(YAML_TOO_COMPLEX, "document nests too deeply", SourcePos(name))) from None
    if len(nodes) > 1:
        raise LoadError(make(YAML_UNSUPPORTED, "several YAML documents in one file", SourcePos(name),
                             hint="keep one document per file (remove the extra '---')"))
    positions: dict = {}
    if not nodes or nodes[0] is None:
        return Document(name, None, positions, sha)
    if "&" in text:  # without anchors there are no aliases, so nothing can expand
        _check_size(nodes[0], name)
    conv = _Converter(name, positions)
    data = conv.convert(nodes[0], (), 0)
    return Document(name, data, positions, sha)


class _NotPlain(Exception):
    """The event path declines: the node path loads the text (and reports what is wrong)."""


_SCALAR_EV, _MAP_EV, _SEQ_EV = yaml.ScalarEvent, yaml.MappingStartEvent, yaml.SequenceStartEvent
_MAP_END_EV, _SEQ_END_EV = yaml.MappingEndEvent, yaml.SequenceEndEvent
_DOC_EV, _DOC_END_EV = yaml.DocumentStartEvent, yaml.DocumentEndEvent
_STREAM_EV, _STREAM_END_EV = yaml.StreamStartEvent, yaml.StreamEndEvent
_KEY_TYPES = (str, int, float, bool)


def _build_from_events(text: str):
    """(data, positions) of a plain document, built from the parser's events; _NotPlain otherwise.

    Gives what the node path gives (`_Converter` on the composed tree): the same values
    (`_plain_scalar` for plain scalars), the same positions (a mapping value sits at its
    key, a list item or the root at its own start), the same depth count as
    `_check_depth`. It declines anchors, aliases, explicit tags (hence merge keys),
    several documents, non-scalar, null or repeated keys, too many nodes and any
    parser error, so that the node path reports them with its own findings.
    """
    parser = _Loader(text)
    get = parser.get_event
    positions: dict = {}
    root = None
    docs = 0
    count = 0  # nodes other than keys, as _Converter counts them
    stack: list = []
    container = None  # the dict or list being filled; None at the top level
    path: tuple = ()
    is_map = False
    key = None  # pending key of the mapping being filled
    index = 0  # next index of the list being filled
    try:
        while True:
            ev = get()
            cls = type(ev)
            if cls is _SCALAR_EV:
                if ev.tag is not None or ev.anchor is not None:
                    raise _NotPlain
                value = ev.value if ev.style else _plain_scalar(ev.value)
                m = ev.start_mark
                if is_map:
                    if key is None:
                        if value is None or not isinstance(value, _KEY_TYPES):
                            raise _NotPlain
                        key = str(value)
                        if key in container:
                            raise _NotPlain
                        positions[path + (key,)] = (m.line + 1, m.column + 1)
                        continue
                    count += 1
                    container[key] = value
                    key = None
                    continue
                count += 1
                if container is None:
                    positions[()] = (m.line + 1, m.column + 1)
                    root = value
                    continue
                positions[path + (index,)] = (m.line + 1, m.column + 1)
                container.append(value)
                index += 1
                continue
            if cls is _MAP_EV or cls is _SEQ_EV:
                if ev.tag is not None or ev.anchor is not None or len(stack) >= MAX_DEPTH:
                    raise _NotPlain
                count += 1
                new: Any = {} if cls is _MAP_EV else []
                m = ev.start_mark
                if is_map:
                    if key is None:
                        raise _NotPlain  # a mapping or list used as a key
                    new_path = path + (key,)
                    container[key] = new
                elif container is None:
                    new_path = ()
                    positions[()] = (m.line + 1, m.column + 1)
                    root = new
                else:
                    new_path = path + (index,)
                    positions[new_path] = (m.line + 1, m.column + 1)
                    container.append(new)
                    index += 1
                stack.append((container, path, is_map, key, index))
                container, path, is_map, key, index = new, new_path, cls is _MAP_EV, None, 0
                continue
            if cls is _MAP_END_EV or cls is _SEQ_END_EV:
                container, path, is_map, key, index = stack.pop()
                key = None
                continue
            if cls is _DOC_EV:
                docs += 1
                if docs > 1:
                    raise _NotPlain
                continue
            if cls is _STREAM_END_EV:
                break
            if cls is _DOC_END_EV or cls is _STREAM_EV:
                continue
            raise _NotPlain  # an alias, or an event this path does not know
    except Exception:  # a parser error, or anything unforeseen: the node path reports it its own way
        raise _NotPlain from None
    finally:
        parser.dispose()
    if count > MAX_NODES:
        raise _NotPlain
    return root, positions


def _check_depth(text: str, name: str) -> None:
    """Refuse deep nesting before composing anything.

    libyaml's composer recurses in C: a document nested some 50 000 levels deep
    (100 kB of '[') overflows the C stack and kills the process outright, so the
    depth is counted first on the parser's event stream, which keeps its own stack.
    """
    depth = 0
    starts = (yaml.SequenceStartEvent, yaml.MappingStartEvent)
    ends = (yaml.SequenceEndEvent, yaml.MappingEndEvent)
    for ev in yaml.parse(text, Loader=_Loader):
        if isinstance(ev, starts):
            depth += 1
            if depth > MAX_DEPTH:
                m = ev.start_mark
                raise LoadError(make(YAML_TOO_COMPLEX, f"document nests deeper than {MAX_DEPTH} levels",
                                     SourcePos(name, m.line + 1, m.column + 1),
                                     hint="sequence and rig files need only a few levels; remove the extra brackets"))
        elif isinstance(ev, ends):
            depth -= 1


_PLAIN_COLLECTION_TAGS = ("tag:yaml.org,2002:map", "tag:yaml.org,2002:seq", "tag:yaml.org,2002:omap")


def _check_size(root, name: str) -> None:
    """Refuse documents whose alias expansion is too large, before expanding anything.

    The expanded size of a node is 1 + the sizes of its children; memoised on
    node identity, this costs one visit per distinct node however many times
    aliases repeat it.
    """
    sizes: dict[int, int] = {}
    stack = [(root, 0, False)]
    while stack:
        node, depth, done = stack.pop()
        if depth > MAX_DEPTH:
            m = node.start_mark
            raise LoadError(make(YAML_TOO_COMPLEX, f"document nests deeper than {MAX_DEPTH} levels",
                                 SourcePos(name, m.line + 1, m.column + 1)))
        if id(node) in sizes:
            continue
        if isinstance(node, yaml.ScalarNode):
            sizes[id(node)] = 1
            continue
        if not isinstance(node, (yaml.MappingNode, yaml.SequenceNode)):
            continue
        if node.tag not in _PLAIN_COLLECTION_TAGS and not node.tag.startswith("tag:yaml.org,2002:set"):
            m = node.start_mark
            raise LoadError(make(YAML_UNSUPPORTED, f"unsupported YAML tag {node.tag}", SourcePos(name, m.line + 1, m.column + 1),
                                 hint="remove the '!tag'"))
        children = ([c for kv in node.value for c in kv] if isinstance(node, yaml.MappingNode) else list(node.value))
        if done:
            total = 1 + sum(sizes.get(id(c), 1) for c in children)
            sizes[id(node)] = total
            if total > MAX_NODES:
                m = node.start_mark
                raise LoadError(make(YAML_TOO_COMPLEX, f"document expands to more than {MAX_NODES} nodes",
                                     SourcePos(name, m.line + 1, m.column + 1),
                                     hint="remove the chain of aliases (&name / *name) that multiplies the content"))
            continue
        stack.append((node, depth, True))
        stack.extend((c, depth + 1, False) for c in children if id(c) not in sizes)


class _Converter:
    def __init__(self, name: str, positions: dict):
        self.name = name
        self.positions = positions
        self.count = 0
        self.constructor = yaml.constructor.SafeConstructor()

    def _fail(self, code, msg, node, hint=""):
        m = node.start_mark
        raise LoadError(make(code, msg, SourcePos(self.name, m.line + 1, m.column + 1), hint=hint))

    def convert(self, node, path: tuple, depth: int):
        self.count += 1
        if self.count > MAX_NODES:
            self._fail(YAML_TOO_COMPLEX, f"document expands to more than {MAX_NODES} nodes", node,
                       "remove the chain of aliases (&name / *name) that multiplies the content")
        if depth > MAX_DEPTH:
            self._fail(YAML_TOO_COMPLEX, f"document nests deeper than {MAX_DEPTH} levels", node)
        m = node.start_mark
        self.positions.setdefault(path, (m.line + 1, m.column + 1))
        if not isinstance(node, yaml.ScalarNode) and node.tag not in _PLAIN_COLLECTION_TAGS:
            self._fail(YAML_UNSUPPORTED, f"unsupported YAML tag {node.tag}", node, "remove the '!tag'")
        if isinstance(node, yaml.MappingNode):
            out: dict = {}
            # merge keys (<<) are resolved by flattening first
            self.constructor.flatten_mapping(node)
            for key_node, value_node in node.value:
                if not isinstance(key_node, yaml.ScalarNode):
                    self._fail(YAML_UNSUPPORTED, "mapping keys must be plain words", key_node)
                key = self._scalar(key_node)
                if not isinstance(key, (str, int, float, bool)) or key is None:
                    self._fail(YAML_UNSUPPORTED, "mapping keys must be plain words", key_node)
                key = str(key)
                if key in out:
                    first = self.positions.get(path + (key,), (0, 0))[0]
                    self._fail(DUPLICATE_KEY, f"key '{key}' appears twice in this mapping (first on line {first})",
                               key_node, "remove or rename one of them")
                km = key_node.start_mark
                self.positions[path + (key,)] = (km.line + 1, km.column + 1)
                out[key] = self.convert(value_node, path + (key,), depth + 1)
            return out
        if isinstance(node, yaml.SequenceNode):
            return [self.convert(v, path + (i,), depth + 1) for i, v in enumerate(node.value)]
        return self._scalar(node)

    def _scalar(self, node):
        tag = node.tag
        if tag == "tag:yaml.org,2002:str":
            return _plain_scalar(node.value) if not node.style else node.value
        if tag.startswith("tag:yaml.org,2002:") and tag[18:] in (
                "str", "int", "float", "bool", "null", "timestamp", "binary"):
            try:
                value = self.constructor.construct_object(node, deep=True)
            except yaml.constructor.ConstructorError as exc:
                self._fail(YAML_UNSUPPORTED, f"cannot read value: {exc.problem}", node)
            except (ValueError, OverflowError) as exc:
                self._fail(YAML_UNSUPPORTED, f"cannot read value: {exc}", node)
            if tag.endswith(":timestamp"):
                return node.value  # keep dates as written
            if tag.endswith(":binary"):
                self._fail(YAML_UNSUPPORTED, "binary values are not accepted", node)
            return value
        self._fail(YAML_UNSUPPORTED, f"unsupported YAML tag {tag}", node, "remove the '!tag'")
