"""The fast paths of load + validate + resolve give exactly what the slow paths give.

Outside references:
- JSON Schema draft 2020-12 (https://json-schema.org/draft/2020-12) as implemented by the
  jsonschema package: its own `Draft202012Validator.is_valid` and `iter_errors` on a
  freshly built validator are the oracle for the compiled check and for every finding;
- PyYAML's composer (libyaml's node tree, the loader's node path) for the values and
  line:column positions the event path builds;
- the YAML 1.2.2 specification, section 10.3.2 (core schema tag resolution), for which
  plain scalars can be anything but text (regular expressions written from memory);
- Python's own grammar (`ast.parse`, `keyword.kwlist`) for which texts are bare names.
"""

from __future__ import annotations

import ast
import copy
import json
import keyword
import math
import random
import re
from functools import lru_cache

import jsonschema
import pytest
import yaml
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from seqgen.load import yamlsrc
from seqgen.load.yamlsrc import Document, LoadError, load_text
from seqgen.resolve.expr import evaluate, is_plain_name
from seqgen.resolve.quantities import Bad, to_qty
from seqgen.resolve.units import Qty
from seqgen.physics.schemacheck import compile_schema
from seqgen.validate.schema import findings_from_errors, schema_dir, validate_document

from .conftest import ROOT, SEQUENCES

V = jsonschema.Draft202012Validator
SCHEMA_NAMES = sorted(p.name for p in schema_dir().glob("*.schema.json"))
YAML_FILES = sorted(p for p in ROOT.glob("sequences/**/*.yaml")) + sorted(ROOT.glob("tests/data/**/*.yaml")) + \
    sorted(ROOT.glob("tests/diff_corpus/**/*.yaml"))
SETTINGS = settings(max_examples=150, deadline=None, derandomize=True, database=None,
                    suppress_health_check=list(HealthCheck))


def _schema(name: str) -> dict:
    return json.loads((schema_dir() / name).read_text(encoding="utf-8"))


@lru_cache(maxsize=None)
def _plain(name: str) -> jsonschema.Draft202012Validator:
    return V(_schema(name))  # built here, not taken from seqgen's cache


@lru_cache(maxsize=None)
def _compiled(name: str):
    return compile_schema(_plain(name).schema)


def _docs():
    for path in YAML_FILES:
        try:
            yield path, load_text(path.read_text(encoding="utf-8"), str(path.relative_to(ROOT)))
        except LoadError:
            continue


# ---------------------------------------------------------------- compiled check, keyword by keyword

POOL = [None, True, False, 0, 1, -1, 2, 1.0, 1.5, -0.0, 3.0, 1e300, math.inf, -math.inf, math.nan, 10 ** 30,
        "", "a", "abc", "1", "A_b", "b1", "1b", "linear", "x" * 12, [], [1], [1, 1], [1, "a"], [True, 1],
        [[0, 0], [1, 1]], [1.0, 1], {}, {"a": 1}, {"a": "x", "b": 2}, {"b": None}, {"c": [1]}, {"a": 1, "c": 2},
        {"a": {"a": {}}}, {"1x": 1}, {"kind": "set", "value": 2}]

KEYWORD_SCHEMAS = [
    True, False, {}, {"type": "integer"}, {"type": "number"}, {"type": ["string", "number"]}, {"type": "null"},
    {"type": "boolean"}, {"type": "array"}, {"type": "object"}, {"type": ["integer", "null"]},
    {"enum": ["linear", "smooth"]}, {"enum": [1, True, None, "a", [1]]}, {"const": 1}, {"const": "a"},
    {"const": [1, 1]}, {"pattern": "^[A-Za-z_][A-Za-z0-9_]*$"}, {"pattern": "b"},
    {"minimum": 0}, {"maximum": 1.5}, {"exclusiveMinimum": 0}, {"exclusiveMaximum": 2}, {"multipleOf": 0.5},
    {"multipleOf": 2}, {"minLength": 1}, {"maxLength": 2}, {"minItems": 2}, {"maxItems": 1}, {"uniqueItems": True},
    {"minProperties": 1}, {"maxProperties": 1}, {"required": ["a"]}, {"dependentRequired": {"a": ["b"]}},
    {"properties": {"a": {"type": "integer"}}}, {"properties": {"a": {"type": "integer"}}, "additionalProperties": False},
    {"additionalProperties": {"type": "string"}}, {"patternProperties": {"^a": {"type": "string"}},
                                                   "additionalProperties": False},
    {"propertyNames": {"pattern": "^[a-z]"}}, {"items": {"type": "integer"}}, {"items": False},
    {"prefixItems": [{"type": "integer"}], "items": False}, {"contains": {"type": "string"}},
    {"allOf": [{"type": "integer"}, {"minimum": 0}]}, {"anyOf": [{"type": "string"}, {"minimum": 2}]},
    {"oneOf": [{"type": "integer"}, {"minimum": 0}]}, {"not": {"type": "string"}},
    {"if": {"type": "integer"}, "then": {"minimum": 1}, "else": {"type": "string"}}, {"if": {"required": ["a"]},
                                                                                     "then": {"required": ["b"]}},
    {"dependentSchemas": {"a": {"properties": {"b": False}}}},
    {"type": "object", "properties": {"a": {"$ref": "#/$defs/n"}}, "$defs": {"n": {"type": "number", "minimum": 0}}},
    {"$defs": {"t": {"type": ["array", "integer"], "items": {"$ref": "#/$defs/t"}}}, "$ref": "#/$defs/t"},
    {"$ref": "#/$defs/a~1b", "$defs": {"a/b": {"type": "string"}}}, {"format": "date"},
    {"type": "array", "items": {"type": "array", "items": {"type": "number"}, "minItems": 2, "maxItems": 2}},
]


def _outcome(check, x):
    try:
        return check(x)
    except Exception as exc:  # noqa: BLE001  (jsonschema's multipleOf raises OverflowError on infinity)
        return type(exc).__name__


@pytest.mark.parametrize("schema", KEYWORD_SCHEMAS, ids=lambda s: json.dumps(s)[:50])
def test_compiled_check_agrees_with_jsonschema_on_each_keyword(schema):
    plain = V(schema)
    fast = compile_schema(schema)
    assert fast is not None
    for x in POOL:
        # jsonschema's is_valid (draft 2020-12) is the reference, raising included
        assert _outcome(fast.is_valid, x) == _outcome(plain.is_valid, x), x


def test_schemas_with_embedded_resources_are_not_compiled():
    # draft 2020-12: $id below the root starts another resource, whose '#' references mean something else
    assert compile_schema({"$defs": {"x": {"$id": "other.json", "type": "string"}}}) is None
    assert compile_schema({"unevaluatedProperties": False}) is None
    assert compile_schema({"$ref": "other.json#/x"}) is None
    # other drafts: other meanings
    assert compile_schema({"$schema": "http://json-schema.org/draft-07/schema#", "type": "string"}) is None


@pytest.mark.parametrize("name", SCHEMA_NAMES)
def test_every_project_schema_compiles(name):
    assert compile_schema(_schema(name)) is not None


def test_compiled_check_agrees_on_every_yaml_file_and_schema():
    checked = 0
    validators = {name: _plain(name) for name in SCHEMA_NAMES}
    fasts = {name: compile_schema(v.schema) for name, v in validators.items()}
    for _, doc in _docs():
        for name, plain in validators.items():
            assert fasts[name].is_valid(doc.data) == plain.is_valid(doc.data), (doc.file, name)
            checked += 1
    assert checked > 100


# ---------------------------------------------------------------- findings on the corpus and on mutants

def _reference_findings(doc, name):
    return findings_from_errors(_plain(name).iter_errors(doc.data), doc)


def _schema_for(doc) -> str:
    return "rig.schema.json" if isinstance(doc.data, dict) and "seqgen_rig" in doc.data else "sequence.schema.json"


def test_findings_equal_jsonschema_walk_on_the_corpus():
    compared = with_errors = 0
    for _, doc in _docs():
        name = _schema_for(doc)
        got = validate_document(doc, name)
        assert got == _reference_findings(doc, name), doc.file
        compared += 1
        with_errors += bool(got)
    assert compared > 50 and with_errors > 0


def _mutate(data, rng: random.Random):
    """One random edit at a random place: a value replaced, a key removed, renamed or added, an item duplicated."""
    data = copy.deepcopy(data)
    spots = []

    def walk(node, depth):
        if isinstance(node, dict):
            spots.append(node)
            for v in node.values():
                walk(v, depth + 1)
        elif isinstance(node, list):
            spots.append(node)
            for v in node:
                walk(v, depth + 1)

    walk(data, 0)
    node = rng.choice(spots)
    values = [None, True, 0, -1, 2.5, math.nan, "", "smoth", "b1", "1 ms", [], {}, [1, 2], {"x": 1}, "nope"]
    if isinstance(node, dict) and node:
        key = rng.choice(list(node))
        op = rng.randrange(4)
        if op == 0:
            node[key] = rng.choice(values)
        elif op == 1:
            del node[key]
        elif op == 2:
            node[key + "x"] = node.pop(key)
        else:
            node[rng.choice(["at", "with", "after", "shape", "value", "name", "kind", "extra"])] = rng.choice(values)
    elif isinstance(node, list) and node:
        i = rng.randrange(len(node))
        if rng.random() < 0.5:
            node[i] = rng.choice(values)
        else:
            node.insert(i, copy.deepcopy(node[i]))
    return data


@pytest.mark.parametrize("path", sorted(SEQUENCES.glob("*.yaml")) + [SEQUENCES / "rigs" / "na23_demo_rig.yaml"],
                         ids=lambda p: p.name)
def test_findings_equal_jsonschema_walk_on_mutated_demos(path):
    doc = load_text(path.read_text(encoding="utf-8"), path.name)
    name = _schema_for(doc)
    assert validate_document(doc, name) == []  # the demos are valid
    rng = random.Random(20260)
    invalid = 0
    for _ in range(40):
        mutant = Document(doc.file, _mutate(doc.data, rng), doc.positions, doc.text_sha256)
        got = validate_document(mutant, name)
        assert got == _reference_findings(mutant, name)
        invalid += bool(got)
    assert invalid > 10


def test_findings_equal_on_a_large_file_with_scattered_errors():
    lines = ["seqgen: 1", "rig: rigs/na23_demo_rig.yaml", "blocks:"]
    for b in range(300):
        shape = "smoth" if b in (7, 150) else "smooth"
        extra = ", bogus: 1" if b == 299 else ""
        anchor = "at: 0 s" if b == 0 else (f"after: b{b - 1}\n    with: b0" if b == 42 else f"after: b{b - 1}")
        lines.append(f"  - name: b{b}\n    {anchor}\n    actions:\n"
                     f"      - ramp: {{channel: mot_coil, to: 1 A, over: 2 ms, shape: {shape}{extra}}}")
    doc = load_text("\n".join(lines) + "\n", "big.yaml")
    got = validate_document(doc, "sequence.schema.json")
    assert got == _reference_findings(doc, "sequence.schema.json")
    assert {f.code for f in got} == {"schema.bad-value", "schema.unknown-key"}
    assert len({f.line for f in got}) == 4


# hypothesis: JSON-like values built from the sequence schema's own vocabulary, against every $defs entry

def _vocabulary() -> list:
    words = set()

    def walk(s):
        if isinstance(s, dict):
            for k, v in s.items():
                if k in ("properties", "$defs"):
                    words.update(v)
                if k == "enum":
                    words.update(x for x in v if isinstance(x, str))
                walk(v)
        elif isinstance(s, list):
            for v in s:
                walk(v)

    for name in ("sequence.schema.json", "rig.schema.json"):
        walk(_schema(name))
    return sorted(words)


_WORDS = _vocabulary()
_SCALARS = st.one_of(st.none(), st.booleans(), st.integers(-3, 70), st.floats(allow_nan=True, allow_infinity=True),
                     st.sampled_from(_WORDS), st.sampled_from(["2 ms", "", "1x", "A", "Hz"]))
_VALUES = st.recursive(_SCALARS, lambda inner: st.one_of(
    st.lists(inner, max_size=4), st.dictionaries(st.sampled_from(_WORDS), inner, max_size=5)), max_leaves=12)
_DEFS = [("sequence.schema.json", d) for d in _schema("sequence.schema.json")["$defs"]] + \
        [("rig.schema.json", d) for d in _schema("rig.schema.json").get("$defs", {})]


def _near_valid(draw, root: dict, schema, depth: int = 0):
    """A value that follows `schema` loosely (random branch, subset of properties), with random corruption."""
    if depth > 6 or draw(st.integers(0, 11)) == 0:
        return draw(_VALUES)
    while isinstance(schema, dict) and "$ref" in schema:
        schema = root["$defs"][schema["$ref"].rsplit("/", 1)[-1]]
    if not isinstance(schema, dict):
        return draw(_VALUES)
    for key in ("oneOf", "anyOf", "allOf"):
        if key in schema:
            return _near_valid(draw, root, draw(st.sampled_from(schema[key])), depth + 1)
    if "enum" in schema:
        return draw(st.sampled_from(schema["enum"]))
    if "const" in schema:
        return schema["const"]
    types = schema.get("type", "object" if "properties" in schema else "string")
    kind = draw(st.sampled_from(types if isinstance(types, list) else [types]))
    if kind == "object":
        props = schema.get("properties", {})
        out = {}
        for k in props:
            if k in schema.get("required", []) or draw(st.booleans()):
                out[k] = _near_valid(draw, root, props[k], depth + 1)
        if not props and isinstance(schema.get("additionalProperties"), dict):
            for k in draw(st.lists(st.sampled_from(["tof", "p1", "a"]), max_size=2, unique=True)):
                out[k] = _near_valid(draw, root, schema["additionalProperties"], depth + 1)
        return out
    if kind == "array":
        n = draw(st.integers(schema.get("minItems", 0), max(schema.get("minItems", 0), min(schema.get("maxItems", 3), 3))))
        return [_near_valid(draw, root, schema.get("items", {}), depth + 1) for _ in range(n)]
    if kind in ("number", "integer"):
        lo = schema.get("minimum", schema.get("exclusiveMinimum", -2))
        return draw(st.sampled_from([lo, lo + 1, lo - 1, 0, 1, 2.5, 16, 1.0]))
    if kind == "boolean":
        return draw(st.booleans())
    if kind == "null":
        return None
    return draw(st.sampled_from(["2 ms", "b1", "mot_coil", "linear", "Na23", "1x", "", "tof + 1 ms"]))


@SETTINGS
@given(st.sampled_from(_DEFS), st.data())
def test_compiled_refs_agree_with_jsonschema_on_generated_values(target, data):
    name, d = target
    plain = _plain(name)
    sub = plain.evolve(schema=plain.schema["$defs"][d])
    near = st.composite(lambda draw: _near_valid(draw, plain.schema, plain.schema["$defs"][d]))()
    value = data.draw(st.one_of(near, _VALUES))
    assert _compiled(name).ref(f"#/$defs/{d}")(value) == sub.is_valid(value)


# ---------------------------------------------------------------- loader: event path against the node path

def _node_path(text: str):
    try:
        doc = yamlsrc._load_via_nodes(text, "t.yaml", "sha")
        return ("doc", repr(doc.data), list(doc.positions.items()))
    except LoadError as exc:
        return ("error", exc.finding)


def _event_path(text: str):
    try:
        data, positions = yamlsrc._build_from_events(text)
    except yamlsrc._NotPlain:
        return None
    return ("doc", repr(data), list(positions.items()))


def _compose_marks(text: str) -> dict:
    """path -> (line, column) from PyYAML's own composer: a mapping value at its key, else the node itself."""
    out = {}
    loader = getattr(yaml, "CSafeLoader", yaml.SafeLoader)

    def walk(node, path):
        out.setdefault(path, (node.start_mark.line + 1, node.start_mark.column + 1))
        if isinstance(node, yaml.MappingNode):
            for k, v in node.value:
                out[path + (k.value,)] = (k.start_mark.line + 1, k.start_mark.column + 1)
                walk(v, path + (k.value,))
        elif isinstance(node, yaml.SequenceNode):
            for i, v in enumerate(node.value):
                walk(v, path + (i,))

    root = yaml.compose(text, Loader=loader)
    if root is not None:
        walk(root, ())
    return out


def test_event_path_positions_match_pyyaml_composer_marks():
    for path in sorted(SEQUENCES.glob("*.yaml")) + [SEQUENCES / "rigs" / "na23_demo_rig.yaml"]:
        text = path.read_text(encoding="utf-8")
        data, positions = yamlsrc._build_from_events(text)
        assert positions == _compose_marks(text), path


def test_event_path_equals_node_path_on_corpus_and_byte_mutations():
    rng = random.Random(7)
    built = declined = 0
    for path in YAML_FILES:
        text = path.read_text(encoding="utf-8")
        texts = [text]
        for _ in range(12):
            chars = list(text)
            for _ in range(rng.randint(1, 3)):
                if not chars:
                    break
                i = rng.randrange(len(chars))
                ch = rng.choice(list(":-[]{},&*!'\" \n\t#|>?x1.~"))
                op = rng.random()
                if op < 0.4:
                    chars[i] = ch
                elif op < 0.7:
                    chars.insert(i, ch)
                else:
                    del chars[i]
            texts.append("".join(chars))
        for t in texts:
            fast = _event_path(t)
            slow = _node_path(t)
            if fast is None:
                declined += 1
            else:
                built += 1
                assert fast == slow, t[:300]
            got = load_text(t, "t.yaml") if slow[0] == "doc" else None
            if got is not None:
                assert (repr(got.data), list(got.positions.items())) == slow[1:]
            else:
                with pytest.raises(LoadError) as exc:
                    load_text(t, "t.yaml")
                assert exc.value.finding == slow[1]
    assert built > 100 and declined > 10


@pytest.mark.parametrize("text", [
    "a: &x 1\nb: *x\n",  # anchors and aliases
    "a: !!int '3'\n",  # explicit tag
    "base: &b {x: 1}\nc:\n  <<: *b\n  y: 2\n",  # merge key
    "a: 1\n---\nb: 2\n",  # two documents
    "a: 1\na: 2\n",  # duplicate key
    "? [a]\n: 1\n",  # a list as a key
    "~: 1\n",  # a null key
    "a: *nowhere\n",  # undefined alias
    "a: [1, 2\n",  # syntax error
    "[" * 70 + "]" * 70 + "\n",  # deeper than the limit
    "a: !custom x\n",
])
def test_event_path_declines_and_load_gives_the_node_path_result(text):
    assert _event_path(text) is None
    slow = _node_path(text)
    if slow[0] == "error":
        with pytest.raises(LoadError) as exc:
            load_text(text, "t.yaml")
        assert exc.value.finding == slow[1]
    else:
        doc = load_text(text, "t.yaml")
        assert (repr(doc.data), list(doc.positions.items())) == slow[1:]


def test_depth_limit_is_the_same_on_both_paths():
    ok = "[" * yamlsrc.MAX_DEPTH + "]" * yamlsrc.MAX_DEPTH + "\n"
    assert _event_path(ok) == _node_path(ok)
    too_deep = "[" * (yamlsrc.MAX_DEPTH + 1) + "]" * (yamlsrc.MAX_DEPTH + 1) + "\n"
    assert _event_path(too_deep) is None and _node_path(too_deep)[1].code == "schema.yaml-too-complex"


# YAML 1.2.2 spec, 10.3.2 core schema: every plain scalar that resolves to null, bool, int or float
# (from memory; '0o' octal included although seqgen reads it as text)
_CORE_NOT_TEXT = re.compile(r"null|Null|NULL|~|true|True|TRUE|false|False|FALSE|[-+]?[0-9]+|0o[0-7]+|0x[0-9a-fA-F]+|"
                            r"[-+]?(\.[0-9]+|[0-9]+(\.[0-9]*)?)([eE][-+]?[0-9]+)?|[-+]?(\.inf|\.Inf|\.INF)|"
                            r"\.nan|\.NaN|\.NAN|")


@SETTINGS
@given(st.one_of(st.from_regex(_CORE_NOT_TEXT, fullmatch=True), st.text(max_size=8)))
def test_plain_scalars_that_may_not_be_text_start_with_a_listed_character(text):
    if _CORE_NOT_TEXT.fullmatch(text):
        assert text[:1] in yamlsrc._MAY_TYPE  # the shortcut never skips a core-schema number, bool or null
    if text[:1] not in yamlsrc._MAY_TYPE:
        assert yamlsrc._plain_scalar(text) == text


# ---------------------------------------------------------------- resolve: a bare param name

@pytest.mark.parametrize("text", ["a", "_", "tof", "match", "case", "type", "__debug__", "ms", "pi", "e", "x1"]
                         + keyword.kwlist + ["é", "a b", "1a", "a" * 2001, "a.b"])
def test_plain_name_means_what_python_parses_as_a_name(text):
    try:
        is_name = len(text) <= 2000 and isinstance(ast.parse(text, mode="eval").body, ast.Name) and text.isascii()
    except SyntaxError:
        is_name = False
    assert is_plain_name(text) == is_name


@pytest.mark.parametrize("name", ["swing", "ms", "pi", "True", "None", "lambda", "e", "a" * 2001])
def test_param_name_shortcut_gives_what_the_evaluator_gives(name):
    env = {name: Qty(0.3, (1.0, 0, 0, 0, 0, 0, 0))}
    doc = Document("t.yaml", {"v": name}, {("v",): (3, 4)}, "sha")
    try:
        want = ("value", evaluate(name, env))
    except Exception as exc:  # noqa: BLE001  (compare the kind of refusal)
        want = ("error", type(exc).__name__)
    try:
        got = ("value", to_qty(name, doc, ("v",), env))
    except Bad as bad:
        got = ("error", "ExprError")
        assert bad.finding.line == 3
    assert got == want
