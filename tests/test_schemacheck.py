"""The compiled schema check (`seqgen.physics.schemacheck`), which answers "valid?" without jsonschema, gives
jsonschema's answer.

Outside reference: JSON Schema draft 2020-12 (https://json-schema.org/draft/2020-12) as implemented by the
jsonschema package: `jsonschema.Draft202012Validator(schema).is_valid(instance)`, a validator built here without
a format checker, as seqgen builds its own. Compared on seeded random mutations of the demo sequences, the rigs
and the atom data (wrong types, bools for numbers, floats for integers, unknown keys, missing keys, texts against
patterns, empty lists, duplicates, non-finite and huge numbers), and on small schemas written for the edge cases
of each keyword (JSON equality 1 == 1.0 but True != 1; `re.search`; integral floats as integers; multipleOf on
floats; lengths in code points; ...).
"""

from __future__ import annotations

import copy
import json
import math
import os
import random
import subprocess
import sys
from decimal import Decimal
from fractions import Fraction

import jsonschema
import pytest
import yaml

from seqgen.load.yamlsrc import load_text
from seqgen.physics import atoms
from seqgen.physics.schemacheck import compile_schema

from .conftest import ROOT

V = jsonschema.Draft202012Validator
SCHEMAS = ROOT / "schemas"
SEED = 2020_12


def _outcome(check, x):
    try:
        return check(x)
    except Exception as exc:  # noqa: BLE001  (jsonschema's multipleOf raises on NaN and on infinity)
        return type(exc).__name__


def _agree(fast, plain, x):
    """jsonschema's answer, after asserting the compiled check's is the same; or one side raised where the
    other said invalid (keywords may run in another order, so one may stop at an error before reaching the
    value the other raises on)."""
    a, b = _outcome(fast, x), _outcome(plain, x)
    assert a == b or (isinstance(a, str) and b is False) or (isinstance(b, str) and a is False), x
    return b


# ---------------------------------------------------------------- mutated demo documents

def _documents():
    """(name, data, schema file): the demo sequences and rigs as seqgen loads them, and the atom data."""
    files = sorted(ROOT.glob("sequences/*.yaml")) + sorted(ROOT.glob("sequences/common/*.yaml")) + \
        sorted(ROOT.glob("sequences/rigs/*.yaml")) + sorted(ROOT.glob("sequences/good/*.yaml"))
    for path in files:
        data = load_text(path.read_text(encoding="utf-8"), path.name).data
        yield path.name, data, "rig.schema.json" if "seqgen_rig" in data else "sequence.schema.json"
    yield "atoms.yaml", yaml.safe_load(atoms.DATA_FILE.read_text(encoding="utf-8")), "atoms.schema.json"


def _paths(node, path=()):
    yield path, node
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, path + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, path + (i,))


def _words(schema) -> list:
    """Keys and enum texts the schema knows: mutations that are often valid."""
    out = set()
    for _, node in _paths(schema):
        if isinstance(node, dict):
            out.update(k for k in node.get("properties", {}) if isinstance(node.get("properties"), dict))
            out.update(e for e in node.get("enum", ()) if isinstance(e, str))
    return sorted(out)


_ODD_TEXTS = ["", " ", "1bad", "a b", "x\n", "b1\n", "Na23", "é", "😀", "2 ms", "2 ms\n", "-1 ms", "1e6", "linear",
              "a" * 65, "_x", "X-1"]
_ODD_NUMBERS = [0, -1, 1, 2, -0.0, 0.5, 1.0, 3.0, 2.5, 1e-300, 1e308, -1e308, 10 ** 30, 2 ** 63, math.inf,
                -math.inf, math.nan, True, False]
_OTHER_VALUES = [None, {}, [], [1], {"a": 1}, "x", 1, 1.5, True]


def _mutate(rng: random.Random, data, words: list):
    """One random mutation at one random place of a deep copy of `data`."""
    data = copy.deepcopy(data)
    places = list(_paths(data))[1:]
    if not places:
        return data
    path, node = rng.choice(places)
    parent = data
    for p in path[:-1]:
        parent = parent[p]
    key = path[-1]
    kind = rng.randrange(12)
    if kind == 0:  # another type
        parent[key] = copy.deepcopy(rng.choice(_OTHER_VALUES))
    elif kind == 1 and isinstance(node, (int, float)) and not isinstance(node, bool):  # a number turned
        parent[key] = rng.choice([True, False, float(node), node + 0.5, -node, str(node)]) \
            if not isinstance(node, float) or math.isfinite(node) else rng.choice(_ODD_NUMBERS)
    elif kind == 2 and isinstance(node, float) and math.isfinite(node) and node.is_integer():
        parent[key] = int(node)
    elif kind == 3:
        parent[key] = rng.choice(_ODD_NUMBERS)
    elif kind == 4 and isinstance(node, str):  # texts against patterns and enums
        parent[key] = rng.choice(_ODD_TEXTS + [node.upper(), node + " ", node[:-1], rng.choice(words)])
    elif kind == 5 and isinstance(node, dict):  # an unknown or known-elsewhere key
        node[rng.choice(["bogus", "chanel", rng.choice(words), rng.choice(words)])] = \
            copy.deepcopy(rng.choice(_OTHER_VALUES + list(node.values())[:1]))
    elif kind == 6 and isinstance(node, dict) and node:  # a missing key
        del node[rng.choice(list(node))]
    elif kind == 7 and isinstance(node, list):  # empty
        parent[key] = []
    elif kind == 8 and isinstance(node, list) and node:  # a duplicate
        node.append(copy.deepcopy(rng.choice(node)))
    elif kind == 9 and isinstance(parent, dict):  # the key renamed
        value = parent.pop(key)
        parent[rng.choice(words + ["bogus", str(key).upper()])] = value
    elif kind == 10 and isinstance(node, list) and len(node) > 1:  # one item dropped, or the list reversed
        parent[key] = node[1:] if rng.random() < 0.5 else node[::-1]
    else:  # the value of another place
        parent[key] = copy.deepcopy(rng.choice(places)[1])
    return data


@pytest.mark.parametrize("name,data,schema_name", list(_documents()), ids=lambda v: v if isinstance(v, str) else "")
def test_compiled_check_agrees_with_jsonschema_on_mutated_documents(name, data, schema_name):
    schema = json.loads((SCHEMAS / schema_name).read_text(encoding="utf-8"))
    plain, fast = V(schema), compile_schema(schema)
    assert fast is not None
    assert fast.is_valid(data) and plain.is_valid(data), name  # the documents themselves are right
    rng = random.Random(f"{SEED}:{name}")
    words = _words(schema)
    count = 120 if name == "atoms.yaml" else 250  # the atom data are large: each copy takes long
    valid = 0
    for n in range(count):
        mutant = data
        for _ in range(1 + (n % 3 == 0)):  # one mutation, or two
            mutant = _mutate(rng, mutant, words)
        valid += _agree(fast.is_valid, plain.is_valid, mutant) is True
    assert 5 < valid < count - 5, valid  # both answers were exercised


# ---------------------------------------------------------------- each keyword's edge cases

EDGE_CASES = [
    ({"type": "integer"}, [3, 3.0, 3.5, -0.0, True, False, "3", None, 10 ** 30, 1e300, math.inf, math.nan,
                           Decimal("3"), Fraction(3, 1)]),
    ({"type": "number"}, [True, 1, 1.0, math.nan, "1", Decimal("1.5"), Fraction(1, 2), None, [1]]),
    ({"type": ["boolean", "null"]}, [True, 0, None, "", [], {}]),
    ({"type": []}, [1, None, "a"]),
    ({"type": ["object", "array"]}, [{}, [], (), "ab", 1]),
    ({"enum": [1, "a", None, [1, 2], {"k": 1}, True]},
     [1.0, True, False, 0, [1.0, 2], [True, 2], {"k": 1.0}, {"k": True}, "1", None, "a", [1, 2, 3]]),
    ({"enum": ["linear", "smooth"]}, ["linear", "Linear", "linear ", 1, None, ["linear"]]),
    ({"enum": []}, [1, None]),
    ({"const": 1}, [1, 1.0, True, "1", [1]]),
    ({"const": True}, [True, 1, 1.0, False]),
    ({"const": 0}, [0, -0.0, False, None]),
    ({"const": [1, {"a": False}]}, [[1.0, {"a": False}], [1, {"a": 0}], [True, {"a": False}], [1]]),
    ({"const": {"a": 1}}, [{"a": 1.0}, {"a": 1, "b": 2}, {"a": True}, {}]),
    ({"const": None}, [None, 0, False, ""]),
    ({"pattern": "b"}, ["abc", "ABC", "", 1, None]),
    ({"pattern": "^a$"}, ["a", "a\n", "\na", "ab"]),  # Python's $ also matches before a final newline
    ({"pattern": "^[A-Za-z_][A-Za-z0-9_]*$"}, ["b1", "1b", "_", "é", "b1\n", "a-b", ""]),
    ({"pattern": "\\d"}, ["٣", "3", "x"]),  # Python's \d takes every Unicode digit
    ({"minLength": 2}, ["é", "e\u0301", "😀", "ab", ""]),  # code points, not UTF-16 units or bytes
    ({"maxLength": 1}, ["😀", "e\u0301", "", 12345]),
    ({"minimum": 5}, [5, 4.999, True, "9", math.nan, math.inf, -math.inf, 10 ** 400, Decimal("4.5")]),
    ({"maximum": 1.5}, [1.5, 1.5000001, 2, False, math.nan]),
    ({"exclusiveMinimum": 0}, [0, -0.0, 1e-300, False, 5e-324]),
    ({"exclusiveMaximum": 0}, [0, -0.0, -1e-300, math.inf]),
    ({"multipleOf": 0.1}, [0.3, 0.2, 1, 0, 1e308, 10 ** 400, math.nan, math.inf, True, "0.2"]),
    ({"multipleOf": 0.5}, [1.5, 1.25, 3, -2.5, 1e-300]),
    ({"multipleOf": 2}, [4, 4.0, 5, 4.5, True, math.inf, math.nan, 10 ** 30, -6]),
    ({"uniqueItems": True}, [[1, 1.0], [1, True], [0, False], [[1], [1.0]], [{"a": 1}, {"a": 1.0}],
                             [{"a": 1}, {"a": True}], ["a", "a"], [None, None], [1, "1"], [[1, True], [1, 1]],
                             [True, True], [{"a": [1]}, {"a": [True]}], [], [math.nan, math.nan], "aa"]),
    ({"uniqueItems": False}, [[1, 1]]),
    ({"minItems": 1}, [[], [None], "", {}]),
    ({"maxItems": 0}, [[], [1], {"a": 1}]),
    ({"minProperties": 1}, [{}, {"a": None}, []]),
    ({"maxProperties": 1}, [{"a": 1, "b": 2}, {"a": 1}, [1, 2]]),
    ({"required": ["a", "b"]}, [{"a": 1, "b": None}, {"a": 1}, [], "ab", None]),
    ({"dependentRequired": {"a": ["b", "c"]}}, [{"a": 1, "b": 2}, {"a": 1, "b": 2, "c": 3}, {"b": 1}, ["a"]]),
    ({"dependentSchemas": {"a": {"required": ["b"]}}}, [{"a": 1}, {"a": 1, "b": 1}, {"b": 1}, 7]),
    ({"properties": {"a": {"type": "integer"}}, "additionalProperties": False},
     [{"a": 1.0}, {"a": True}, {"b": 1}, {}, [1]]),
    ({"properties": {"a": {"type": "string"}}, "patternProperties": {"^x": {"type": "integer"}},
      "additionalProperties": {"type": "string"}},
     [{"a": "s", "x1": 2}, {"x1": "s"}, {"y": "s"}, {"y": 1}, {"a": 1}]),
    ({"patternProperties": {"(a)\\1": {}, "(b)\\1": {}}, "additionalProperties": False},  # joined with '|'
     [{"aa": 1}, {"bb": 1}, {"cc": 1}]),
    ({"patternProperties": {"^a": {"minimum": 2}, "b$": {"maximum": 1}}}, [{"ab": 1.5}, {"ab": 2}, {"a": 3}]),
    ({"additionalProperties": 0}, [{}, {"a": 1}]),  # a falsy value closes the object, as False does
    ({"propertyNames": {"maxLength": 2}}, [{"ab": 1}, {"abc": 1}, {}]),
    ({"propertyNames": False}, [{}, {"a": 1}, "a"]),
    ({"items": {"type": "integer"}}, [[1, 2.0], [1, 2.5], [], "ab"]),
    ({"prefixItems": [{"type": "string"}, {"type": "integer"}], "items": False},
     [["a", 1], ["a", 1, 2], ["a"], [1], []]),
    ({"prefixItems": [{"const": 1}], "items": {"type": "string"}}, [[1, "a"], [1, 2], [True, "a"]]),
    ({"contains": {"type": "string"}}, [[1, "a"], [1], [], "a"]),
    ({"contains": {"type": "integer"}, "minContains": 2, "maxContains": 3},
     [[1], [1, 2], [1, 2, 3, 4], [1.0, 2.0, "a"], [True, False]]),
    ({"contains": {"const": 0}, "minContains": 0}, [[], [1]]),
    ({"allOf": []}, [1, None]),
    ({"anyOf": []}, [1, None]),
    ({"oneOf": []}, [1, None]),
    ({"oneOf": [{"type": "integer"}, {"minimum": 2}]}, [1, 3, 2.5, "a"]),
    ({"anyOf": [{"type": "string"}, {"minimum": 2}]}, [1, 3, "a", None]),
    ({"not": {"type": "string"}}, ["a", 1]),
    ({"if": {"required": ["a"]}, "then": {"required": ["b"]}, "else": {"required": ["c"]}},
     [{"a": 1}, {"a": 1, "b": 1}, {"c": 1}, {}, 1]),
    ({"then": {"type": "string"}}, [1]),  # then without if: ignored
    ({"minContains": 5}, [[1]]),  # without contains: ignored
    ({"format": "date", "type": "string"}, ["not-a-date", "2020-02-30"]),  # an annotation only
    ({"foo": 1, "minimum": 2}, [1, 3]),  # unknown keywords are ignored
    ({"$ref": "#/$defs/a~1b", "$defs": {"a/b": {"type": "string"}}}, ["a", 1]),
    ({"$ref": "#/$defs/a%20b", "$defs": {"a b": {"minimum": 1}}}, [0, 1]),
    ({"type": ["array", "integer"], "items": {"$ref": "#"}}, [[1, [2, [3]]], [1, [2, ["x"]]], 1.5]),
    ({"$schema": "https://json-schema.org/draft/2020-12/schema", "$id": "https://example.org/s.json",
      "properties": {"a": {"$ref": "#/$defs/n"}}, "$defs": {"n": {"type": "number"}}}, [{"a": 1}, {"a": "1"}]),
]


@pytest.mark.parametrize("schema,instances", EDGE_CASES, ids=lambda v: json.dumps(v)[:60] if isinstance(v, dict) else "")
def test_each_keyword_edge_case_agrees_with_jsonschema(schema, instances):
    plain, fast = V(schema), compile_schema(schema)
    assert fast is not None, schema
    for x in instances:
        # one keyword (or one object pass): the same answer, and the same exception where jsonschema raises
        assert _outcome(fast.is_valid, x) == _outcome(plain.is_valid, x), (schema, x)


def test_what_is_not_compiled_is_left_to_jsonschema():
    assert compile_schema({"$schema": "http://json-schema.org/draft-07/schema#"}) is None  # another dialect
    assert compile_schema({"type": "fraction"}) is None  # jsonschema raises on an unknown type name
    assert compile_schema({"pattern": "("}) is None  # and on a pattern Python cannot compile
    assert compile_schema({"$ref": "#/$defs/missing"}) is None
    assert compile_schema({"$ref": "#name", "$defs": {"n": {"$anchor": "name"}}}) is None
    assert compile_schema({"items": [{"type": "string"}]}) is None  # an earlier draft's form
    assert compile_schema({"minItems": 1.5}) is None
    # a pointer through a list: jsonschema fails on the list as a resource
    assert compile_schema({"$ref": "#/$defs/list/1", "$defs": {"list": [{"type": "string"}, {}]}}) is None
    assert compile_schema({"unevaluatedItems": False}) is None


def test_random_small_schemas_agree_with_jsonschema():
    """Schemas drawn from the edge cases above, combined under allOf / anyOf / oneOf / not / properties /
    items, on the instances of every case."""
    rng = random.Random(SEED)
    pool = [x for _, xs in EDGE_CASES for x in xs]
    leaves = [s for s, _ in EDGE_CASES if "$ref" not in json.dumps(s)]
    for _ in range(400):
        a, b = rng.choice(leaves), rng.choice(leaves)
        schema = rng.choice([{"allOf": [a, b]}, {"anyOf": [a, b]}, {"oneOf": [a, b]}, {"not": a},
                             {"properties": {"a": a, "b": b}}, {"items": a, "contains": b},
                             {"if": a, "then": b}, {"additionalProperties": a, "propertyNames": {"pattern": "^a"}},
                             {**a, **b}])
        plain, fast = V(schema), compile_schema(schema)
        if fast is None:  # {**a, **b} may hold a keyword without the one it needs
            continue
        for x in rng.sample(pool, 25) + [{"a": rng.choice(pool), "b": rng.choice(pool)}, rng.sample(pool, 3)]:
            _agree(fast.is_valid, plain.is_valid, x)


# ---------------------------------------------------------------- the atom data check

def test_wrong_atom_data_is_worded_by_jsonschema(tmp_path):
    data = yaml.safe_load(atoms.DATA_FILE.read_text(encoding="utf-8"))
    data["species"]["Rb87"]["nuclear_spin"]["value"] = 1.25  # not a multiple of 1/2
    bad = tmp_path / "atoms.yaml"
    bad.write_text(yaml.safe_dump(data), encoding="utf-8")
    first = next(V(atoms.load_schema()).iter_errors(data))  # jsonschema's own message for it
    code = f"""
import json, sys
from pathlib import Path
from seqgen.physics import atoms
atoms.DATA_FILE = Path({str(bad)!r})
try:
    atoms.known_species()
    print(json.dumps(None))
except ValueError as exc:
    print(json.dumps(str(exc)))"""
    done = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120,
                          env=dict(os.environ, PYTHONPATH=str(ROOT), XDG_CACHE_HOME=str(tmp_path / "cache")))
    assert done.returncode == 0, done.stderr
    message = json.loads(done.stdout.splitlines()[-1])
    assert message is not None and first.message in message and "species/Rb87/nuclear_spin/value" in message
