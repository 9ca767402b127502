"""A compiled yes/no check of a document against a JSON Schema (draft 2020-12).

`compile_schema(validator)` turns the schema of a jsonschema validator into
nested Python closures that answer one question: is this instance valid? It
gives the same answer as `validator.is_valid(instance)` (the tests compare the
two), about thirty times faster, because it builds no error objects, evolves no
validators and resolves every `$ref` once, at compile time.

It never produces a message: when it says "invalid", the caller asks
jsonschema itself for the errors, so every finding is worded and placed exactly
as jsonschema reports it. Keywords it does not implement are handed to
jsonschema: a keyword that does not descend is called through the validator's
own keyword function, and a subschema using any other keyword is checked with
`is_valid` on that subschema. Schemas that embed other resources (`$id` below the
root, `$anchor`, dynamic references) or use `unevaluated*` are not compiled at
all (`compile_schema` returns None).
"""

from __future__ import annotations

import re
from typing import Callable
from urllib.parse import unquote

Pred = Callable[[object], bool]

# keywords whose jsonschema function never descends: safe to call with the root validator
_LEAF = frozenset({"const", "enum", "dependentRequired", "exclusiveMaximum", "exclusiveMinimum", "format",
                   "maxItems", "maxLength", "maxProperties", "maximum", "minItems", "minLength", "minProperties",
                   "minimum", "multipleOf", "pattern", "required", "type", "uniqueItems"})
# applicators implemented here
_APPLICATORS = frozenset({"$ref", "additionalProperties", "allOf", "anyOf", "oneOf", "not", "if", "items",
                          "properties", "propertyNames", "dependentSchemas"})
# anything below the root that changes how references resolve: not compiled
_REFUSE = frozenset({"$id", "$anchor", "$dynamicAnchor", "$dynamicRef", "$recursiveRef", "$recursiveAnchor",
                     "unevaluatedProperties", "unevaluatedItems"})

_JSON_TYPES = frozenset({"array", "boolean", "integer", "null", "number", "object", "string"})
_NONE = type(None)
# JSON type names of the plain Python types a YAML document holds (draft 2020-12 type checker:
# bool is not a number, a float with an integral value is an integer)
_EXACT_TYPES = {dict: ("object",), list: ("array",), str: ("string",), bool: ("boolean",), _NONE: ("null",),
                int: ("integer", "number")}


def _always(x) -> bool:
    return True


def _never(x) -> bool:
    return False


class _Unsupported(Exception):
    pass


class FastSchema:
    """`is_valid(instance)` equal to the validator's own; `ref(text)` the same for a `$ref` target."""

    def __init__(self, compiler: "_Compiler"):
        self._compiler = compiler
        self.is_valid: Pred = compiler.root()

    def ref(self, ref: str) -> Pred | None:
        """Predicate for the target of a `$ref` written in the root resource, or None."""
        try:
            return self._compiler.ref(ref)
        except _Unsupported:
            return None


def compile_schema(validator) -> FastSchema | None:
    """Compile a draft 2020-12 validator's schema, or None when it is outside what this compiles."""
    import jsonschema

    if type(validator) is not jsonschema.Draft202012Validator:
        return None  # other drafts (and extended validators) give keywords other meanings
    try:
        return FastSchema(_Compiler(validator))
    except _Unsupported:
        return None


class _Compiler:
    def __init__(self, validator):
        self.validator = validator
        self.schema = validator.schema
        self.keywords = validator.VALIDATORS
        self.done: dict[int, Pred] = {}
        self.keep: list = []  # subschemas referenced by id() stay alive
        self.refs: dict[str, Pred] = {}
        _scan(self.schema, True)

    def root(self) -> Pred:
        return self.compile(self.schema)

    def ref(self, ref: str) -> Pred | None:
        """Predicate of a `$ref` written in the root resource ("#" or "#/json/pointer"), else None."""
        if ref in self.refs:
            return self.refs[ref]
        if not isinstance(ref, str) or not ref.startswith("#"):
            return None
        pointer = unquote(ref[1:])
        if pointer and not pointer.startswith("/"):
            return None
        node = self.schema
        try:
            for part in pointer.split("/")[1:]:
                part = part.replace("~1", "/").replace("~0", "~")
                node = node[int(part)] if isinstance(node, list) else node[part]
        except (KeyError, IndexError, ValueError, TypeError):
            return None
        pred = self.compile(node)
        self.refs[ref] = pred
        return pred

    def delegate(self, schema) -> Pred:
        sub = self.validator.evolve(schema=schema)
        return sub.is_valid

    def compile(self, schema) -> Pred:
        if schema is True:
            return _always
        if schema is False:
            return _never
        if not isinstance(schema, dict):
            return self.delegate(schema)  # jsonschema decides what a malformed schema means
        key = id(schema)
        if key in self.done:
            return self.done[key]
        body: list = []

        def trampoline(x, body=body):  # for recursive references: filled in below
            return body[0](x)

        self.done[key] = trampoline
        self.keep.append(schema)
        pred = self._build(schema)
        body.append(pred)
        self.done[key] = pred
        return pred

    def _build(self, s: dict) -> Pred:
        known = [k for k in s if k in self.keywords]
        if any(k not in _LEAF and k not in _APPLICATORS for k in known):
            return self.delegate(s)
        if "patternProperties" in s or "prefixItems" in s:  # change what additionalProperties / items cover
            return self.delegate(s)
        checks: list[Pred] = []
        for k in known:
            v = s[k]
            if k == "properties" and isinstance(v, dict):
                continue  # joined with additionalProperties below
            if k == "additionalProperties" and (v is False or v is True or isinstance(v, dict)):
                continue
            fn = getattr(self, "_kw_" + k.lstrip("$"), None)
            pred = fn(v, s) if fn is not None else None
            if pred is None:
                pred = self._leaf(k, v, s) if k in _LEAF else self.delegate(s)
                if k not in _LEAF:
                    return pred
            checks.append(pred)
        props = s.get("properties") if isinstance(s.get("properties"), dict) else None
        addl = s.get("additionalProperties", True)
        if "additionalProperties" in s and not (addl is False or addl is True or isinstance(addl, dict)):
            return self.delegate(s)
        if props is not None or addl is not True:
            checks.insert(0, self._object(props or {}, addl))
        if not checks:
            return _always
        if len(checks) == 1:
            return checks[0]
        checks = tuple(checks)

        def all_of(x, checks=checks):
            for c in checks:
                if not c(x):
                    return False
            return True

        return all_of

    # ---- leaf keywords

    def _leaf(self, k, v, s) -> Pred:
        fn = self.keywords[k]
        validator = self.validator

        def leaf(x):
            errors = fn(validator, v, x, s)
            return errors is None or next(iter(errors), None) is None

        return leaf

    def _kw_type(self, v, s):
        names = (v,) if isinstance(v, str) else tuple(v) if isinstance(v, list) else None
        if names is None or not all(n in _JSON_TYPES for n in names):
            return None  # jsonschema's own keyword function decides (an unknown type name raises there)
        wanted = frozenset(names)
        fits = {t: any(n in wanted for n in ns) for t, ns in _EXACT_TYPES.items()}
        float_num = "number" in wanted
        float_int = "integer" in wanted
        is_type = self.validator.is_type

        def type_(x):
            t = type(x)
            ok = fits.get(t)
            if ok is not None:
                return ok
            if t is float:
                return float_num or (float_int and x.is_integer())
            return any(is_type(x, n) for n in names)  # anything else: jsonschema's own type checker

        return type_

    def _kw_enum(self, v, s):
        if not isinstance(v, list) or not v or not all(type(e) is str for e in v):
            return None
        allowed = frozenset(v)
        general = self._leaf("enum", v, s)

        def enum(x):
            if type(x) is str:
                return x in allowed
            return general(x)

        return enum

    def _kw_required(self, v, s):
        if not isinstance(v, list) or not all(type(r) is str for r in v):
            return None
        req = tuple(v)

        def required(x):
            if type(x) is not dict:
                return True if not isinstance(x, dict) else all(r in x for r in req)
            for r in req:
                if r not in x:
                    return False
            return True

        return required

    def _kw_pattern(self, v, s):
        if not isinstance(v, str):
            return None
        try:
            search = re.compile(v).search
        except re.error:
            return None
        general = self._leaf("pattern", v, s)

        def pattern(x):
            if type(x) is str:
                return search(x) is not None
            return general(x)

        return pattern

    def _number_bound(self, k, v, s, op):
        if type(v) not in (int, float):
            return None
        general = self._leaf(k, v, s)

        def bound(x):
            t = type(x)
            if t is int or t is float:
                return op(x, v)
            return general(x)

        return bound

    def _kw_minimum(self, v, s):
        return self._number_bound("minimum", v, s, lambda x, m: not x < m)

    def _kw_maximum(self, v, s):
        return self._number_bound("maximum", v, s, lambda x, m: not x > m)

    def _kw_exclusiveMinimum(self, v, s):
        return self._number_bound("exclusiveMinimum", v, s, lambda x, m: not x <= m)

    def _kw_exclusiveMaximum(self, v, s):
        return self._number_bound("exclusiveMaximum", v, s, lambda x, m: not x >= m)

    def _size(self, k, v, s, kind, op):
        if type(v) is not int:
            return None
        general = self._leaf(k, v, s)

        def size(x):
            if type(x) is kind:
                return op(len(x), v)
            return general(x)

        return size

    def _kw_minItems(self, v, s):
        return self._size("minItems", v, s, list, lambda n, m: not n < m)

    def _kw_maxItems(self, v, s):
        return self._size("maxItems", v, s, list, lambda n, m: not n > m)

    def _kw_minProperties(self, v, s):
        return self._size("minProperties", v, s, dict, lambda n, m: not n < m)

    def _kw_maxProperties(self, v, s):
        return self._size("maxProperties", v, s, dict, lambda n, m: not n > m)

    # ---- applicators

    def _object(self, props: dict, addl) -> Pred:
        """`properties` and `additionalProperties` together, in one pass over the instance's keys."""
        table = {k: self.compile(sub) for k, sub in props.items()}
        extra = None if addl is False else (None if addl is True else self.compile(addl))
        closed = addl is False

        def obj(x):
            if type(x) is not dict:
                if isinstance(x, dict):  # a dict subclass: still an object to jsonschema
                    x = dict(x)
                else:
                    return True
            for k, val in x.items():
                p = table.get(k)
                if p is None:
                    if closed:
                        return False
                    if extra is not None and not extra(val):
                        return False
                elif not p(val):
                    return False
            return True

        return obj

    def _kw_ref(self, v, s):
        return self.ref(v)  # a trampoline while the target is still compiling (recursive schemas)

    def _kw_items(self, v, s):
        if not (v is True or v is False or isinstance(v, dict)):
            return None
        item = self.compile(v)

        def items(x):
            if type(x) is not list:
                return True if not isinstance(x, list) else all(item(e) for e in x)
            for e in x:
                if not item(e):
                    return False
            return True

        return items

    def _kw_propertyNames(self, v, s):
        name = self.compile(v)

        def property_names(x):
            if not isinstance(x, dict):
                return True
            for k in x:
                if not name(k):
                    return False
            return True

        return property_names

    def _kw_dependentSchemas(self, v, s):
        if not isinstance(v, dict):
            return None
        deps = tuple((k, self.compile(sub)) for k, sub in v.items())

        def dependent(x):
            if not isinstance(x, dict):
                return True
            for k, p in deps:
                if k in x and not p(x):
                    return False
            return True

        return dependent

    def _subs(self, v):
        if not isinstance(v, list) or not v:
            return None
        return tuple(self.compile(sub) for sub in v)

    def _kw_allOf(self, v, s):
        subs = self._subs(v)
        return None if subs is None else (lambda x: all(p(x) for p in subs))

    def _kw_anyOf(self, v, s):
        subs = self._subs(v)
        return None if subs is None else (lambda x: any(p(x) for p in subs))

    def _kw_oneOf(self, v, s):
        subs = self._subs(v)
        if subs is None:
            return None

        def one_of(x):
            found = 0
            for p in subs:
                if p(x):
                    found += 1
                    if found > 1:
                        return False
            return found == 1

        return one_of

    def _kw_not(self, v, s):
        sub = self.compile(v)
        return lambda x: not sub(x)

    def _kw_if(self, v, s):
        cond = self.compile(v)
        then = self.compile(s["then"]) if "then" in s else _always
        else_ = self.compile(s["else"]) if "else" in s else _always
        return lambda x: then(x) if cond(x) else else_(x)


def _scan(schema, top: bool) -> None:
    """Refuse schemas with embedded resources or keywords whose meaning depends on evaluation order."""
    stack = [(schema, top)]
    while stack:
        node, is_top = stack.pop()
        if isinstance(node, dict):
            for k, v in node.items():
                if k in _REFUSE and not (is_top and k == "$id"):
                    raise _Unsupported(k)
                if k == "$ref" and not (isinstance(v, str) and v.startswith("#")):
                    raise _Unsupported(k)  # another resource: its own '#' references mean something else
                if isinstance(v, (dict, list)):  # values of enum / const too: a false refusal is only slower
                    stack.append((v, False))
        elif isinstance(node, list):
            stack.extend((v, False) for v in node)
