"""A compiled yes/no check of data against a JSON Schema (draft 2020-12), without the jsonschema package.

`compile_schema(schema)` turns a schema (parsed JSON) into nested Python closures that answer one question: is
this instance valid? The answer is that of `jsonschema.Draft202012Validator(schema).is_valid(instance)` for a
validator built without a format checker, as seqgen builds its validators (the tests compare the two). Every
keyword is implemented here with jsonschema's own semantics (its type checker: bool is not a number, 3.0 is an
integer; its equality for enum, const and uniqueItems: 1 == 1.0 but True != 1; `re.search` for pattern;
multipleOf as it computes it for floats; lengths in code points), so a valid document needs neither jsonschema
nor its dependencies, whose import costs a cold start tens of milliseconds. It builds no error objects, evolves
no validators and resolves every `$ref` once, at compile time.

It never words a message: when it says "invalid", the caller asks jsonschema itself for the errors, so every
finding is worded and placed exactly as jsonschema reports it. What it does not implement (embedded resources:
`$id` below the root, `$anchor`, dynamic references, another dialect's `$schema`; `unevaluated*`; references
to other files; a keyword value of a form the specification does not allow) is not compiled at all:
`compile_schema` returns None and the caller uses jsonschema.

A predicate raises where jsonschema's own keyword raises on the same value (NaN under a float multipleOf);
keywords may run in another order than jsonschema's, so it may also raise where jsonschema stops at an earlier
error. `holds` (and `FastSchema.accepts`) count an exception as "not known valid": jsonschema then decides.

It lives in seqgen.physics because the atom data are checked with it and physics imports nothing else of
seqgen; seqgen.validate checks documents with it.
"""

from __future__ import annotations

import numbers
import re
from collections.abc import Mapping, Sequence
from typing import Callable
from urllib.parse import unquote

Pred = Callable[[object], bool]

# the dialect jsonschema's Draft202012Validator implements, as a root `$schema` names it
_DIALECTS = frozenset({"https://json-schema.org/draft/2020-12/schema",
                       "https://json-schema.org/draft/2020-12/schema#"})
# the keywords of jsonschema's Draft202012Validator (its VALIDATORS); it ignores every other key of a schema
_KEYWORDS = frozenset({"$dynamicRef", "$ref", "additionalProperties", "allOf", "anyOf", "const", "contains",
                       "dependentRequired", "dependentSchemas", "enum", "exclusiveMaximum", "exclusiveMinimum",
                       "format", "if", "items", "maxItems", "maxLength", "maxProperties", "maximum", "minItems",
                       "minLength", "minProperties", "minimum", "multipleOf", "not", "oneOf", "pattern",
                       "patternProperties", "prefixItems", "properties", "propertyNames", "required", "type",
                       "unevaluatedItems", "unevaluatedProperties", "uniqueItems"})
# anything that changes how references resolve, or depends on what other keywords evaluated: not compiled
_REFUSE = frozenset({"$id", "$schema", "$anchor", "$dynamicAnchor", "$dynamicRef", "$recursiveRef",
                     "$recursiveAnchor", "unevaluatedProperties", "unevaluatedItems"})
# checked together in one pass over an object's keys
_OBJECT_KEYS = frozenset({"properties", "patternProperties", "additionalProperties"})

_JSON_TYPES = frozenset({"array", "boolean", "integer", "null", "number", "object", "string"})
_NONE = type(None)
# JSON type names of the plain Python types a YAML or JSON document holds
_EXACT_TYPES = {dict: ("object",), list: ("array",), str: ("string",), bool: ("boolean",), _NONE: ("null",),
                int: ("integer", "number")}


def _always(x) -> bool:
    return True


def _never(x) -> bool:
    return False


class _Unsupported(Exception):
    pass


def is_type(x, name: str) -> bool:
    """jsonschema's draft 2020-12 type checker (draft 6 on): bool is no number, an integral float an integer."""
    if name == "object":
        return isinstance(x, dict)
    if name == "array":
        return isinstance(x, list)
    if name == "string":
        return isinstance(x, str)
    if name == "boolean":
        return isinstance(x, bool)
    if name == "null":
        return x is None
    if isinstance(x, bool):
        return False
    if name == "number":
        return isinstance(x, numbers.Number)
    return isinstance(x, int) or (isinstance(x, float) and x.is_integer())


_TRUE, _FALSE = object(), object()


def _unbool(x):
    """True and False apart from 1 and 0 (jsonschema's `unbool`)."""
    return _TRUE if x is True else _FALSE if x is False else x


def json_equal(one, two) -> bool:
    """JSON equality as jsonschema computes it: 1 == 1.0, True != 1, sequences and mappings element-wise."""
    if one is two:
        return True
    if isinstance(one, str) or isinstance(two, str):
        return one == two
    if isinstance(one, Sequence) and isinstance(two, Sequence):
        return len(one) == len(two) and all(json_equal(i, j) for i, j in zip(one, two))
    if isinstance(one, Mapping) and isinstance(two, Mapping):
        return len(one) == len(two) and all(k in two and json_equal(v, two[k]) for k, v in one.items())
    return _unbool(one) == _unbool(two)


def json_unique(items) -> bool:
    """No two items JSON-equal (jsonschema's `uniq`: neighbours after sorting, else every pair)."""
    try:
        ordered = sorted(_unbool(i) for i in items)
        for i, j in zip(ordered, ordered[1:]):
            if json_equal(i, j):
                return False
    except (NotImplementedError, TypeError):
        seen: list = []
        for e in items:
            e = _unbool(e)
            for i in seen:
                if json_equal(i, e):
                    return False
            seen.append(e)
    return True


def holds(pred: Pred, instance) -> bool:
    """`pred(instance)`, an exception counting as False: the value is not known valid and jsonschema decides
    (it raises there too, or finds an error it reaches first)."""
    try:
        return pred(instance)
    except Exception:  # noqa: BLE001  (see the module's docstring)
        return False


class FastSchema:
    """`is_valid(instance)` equal to jsonschema's own; `ref(text)` the same for a `$ref` target."""

    def __init__(self, compiler: "_Compiler"):
        self._compiler = compiler
        self.is_valid: Pred = compiler.compile(compiler.schema)

    def accepts(self, instance) -> bool:
        """True only when the instance is valid (an exception is no answer: False)."""
        return holds(self.is_valid, instance)

    def ref(self, ref: str) -> Pred | None:
        """Predicate for the target of a `$ref` written in the root resource, or None."""
        try:
            return self._compiler.ref(ref)
        except _Unsupported:
            return None


def compile_schema(schema) -> FastSchema | None:
    """Compile a draft 2020-12 schema (the parsed JSON), or None when it is outside what this compiles."""
    if isinstance(schema, dict) and "$schema" in schema and schema["$schema"] not in _DIALECTS:
        return None  # another draft: its keywords mean other things
    try:
        _scan(schema)
        return FastSchema(_Compiler(schema))
    except _Unsupported:
        return None


def _regex(pattern) -> Callable:
    if not isinstance(pattern, str):
        raise _Unsupported(pattern)
    try:
        return re.compile(pattern).search  # jsonschema calls re.search(pattern, ...): the same compiled pattern
    except re.error:
        raise _Unsupported(pattern) from None


def _int(v) -> int:
    if type(v) is not int:
        raise _Unsupported(v)
    return v


def _all(checks: tuple) -> Pred:
    if not checks:
        return _always
    if len(checks) == 1:
        return checks[0]

    def all_of(x):
        for c in checks:
            if not c(x):
                return False
        return True

    return all_of


class _Compiler:
    def __init__(self, schema):
        self.schema = schema
        self.done: dict[int, Pred] = {}
        self.keep: list = []  # subschemas referenced by id() stay alive
        self.refs: dict[str, Pred] = {}

    def ref(self, ref) -> Pred:
        """Predicate of a `$ref` written in the root resource ("#" or "#/json/pointer"), as referencing
        resolves it (the pointer percent-decoded, then split, '~1' and '~0' unescaped). A pointer through a
        list is not compiled: jsonschema fails on the list as a resource."""
        if not isinstance(ref, str) or not ref.startswith("#"):
            raise _Unsupported(ref)
        if ref in self.refs:
            return self.refs[ref]
        fragment = ref[1:]
        node = self.schema
        if fragment:
            if not fragment.startswith("/"):
                raise _Unsupported(ref)  # a plain-name anchor
            try:
                for part in unquote(fragment[1:]).split("/"):
                    if isinstance(node, dict):
                        node = node[part.replace("~1", "/").replace("~0", "~")]
                    else:
                        raise _Unsupported(ref)
            except LookupError:
                raise _Unsupported(ref) from None
        pred = self.compile(node)
        self.refs[ref] = pred
        return pred

    def compile(self, schema) -> Pred:
        if schema is True:
            return _always
        if schema is False:
            return _never
        if not isinstance(schema, dict):
            raise _Unsupported(schema)  # jsonschema fails on such a schema when it reaches it
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
        checks: list[Pred] = []
        object_done = False
        for k, v in s.items():  # in the schema's order, as jsonschema runs them
            if k not in _KEYWORDS or k == "format":  # format: an annotation, without a format checker
                continue
            if k in _OBJECT_KEYS:
                if not object_done:
                    object_done = True
                    checks.append(self._object(s))
                continue
            fn = getattr(self, "_kw_" + k.lstrip("$"), None)
            if fn is None:
                raise _Unsupported(k)
            checks.append(fn(v, s))
        return _all(tuple(c for c in checks if c is not _always))

    # ---- keywords that do not descend

    def _kw_type(self, v, s):
        names = (v,) if isinstance(v, str) else tuple(v) if isinstance(v, list) else None
        if names is None or not all(isinstance(n, str) and n in _JSON_TYPES for n in names):
            raise _Unsupported(v)  # jsonschema raises on an unknown type name
        wanted = frozenset(names)
        fits = {t: any(n in wanted for n in ns) for t, ns in _EXACT_TYPES.items()}
        float_num = "number" in wanted
        float_int = "integer" in wanted

        def type_(x):
            t = type(x)
            ok = fits.get(t)
            if ok is not None:
                return ok
            if t is float:
                return float_num or (float_int and x.is_integer())
            return any(is_type(x, n) for n in names)

        return type_

    def _kw_enum(self, v, s):
        if not isinstance(v, list):
            raise _Unsupported(v)
        allowed = tuple(v)
        if allowed and all(type(e) is str for e in allowed):
            words = frozenset(allowed)

            def enum_words(x):
                if type(x) is str:
                    return x in words
                return any(json_equal(e, x) for e in allowed)

            return enum_words
        return lambda x: any(json_equal(e, x) for e in allowed)

    def _kw_const(self, v, s):
        return lambda x: json_equal(x, v)

    def _kw_required(self, v, s):
        if not isinstance(v, list) or not all(type(r) is str for r in v):
            raise _Unsupported(v)
        req = tuple(v)
        if not req:
            return _always

        def required(x):
            if not isinstance(x, dict):
                return True
            for r in req:
                if r not in x:
                    return False
            return True

        return required

    def _kw_dependentRequired(self, v, s):
        if not isinstance(v, dict) or not all(isinstance(d, list) and all(type(r) is str for r in d)
                                              for d in v.values()):
            raise _Unsupported(v)
        deps = tuple((k, tuple(d)) for k, d in v.items())

        def dependent_required(x):
            if not isinstance(x, dict):
                return True
            for k, needs in deps:
                if k in x:
                    for n in needs:
                        if n not in x:
                            return False
            return True

        return dependent_required

    def _kw_pattern(self, v, s):
        search = _regex(v)
        return lambda x: not isinstance(x, str) or search(x) is not None

    def _number_bound(self, v, op):
        if type(v) not in (int, float):
            raise _Unsupported(v)

        def bound(x):
            t = type(x)
            if t is int or t is float:
                return op(x, v)
            return not is_type(x, "number") or op(x, v)

        return bound

    def _kw_minimum(self, v, s):
        return self._number_bound(v, lambda x, m: not x < m)

    def _kw_maximum(self, v, s):
        return self._number_bound(v, lambda x, m: not x > m)

    def _kw_exclusiveMinimum(self, v, s):
        return self._number_bound(v, lambda x, m: not x <= m)

    def _kw_exclusiveMaximum(self, v, s):
        return self._number_bound(v, lambda x, m: not x >= m)

    def _kw_multipleOf(self, v, s):
        if type(v) not in (int, float):
            raise _Unsupported(v)

        def multiple_of(x):
            if not is_type(x, "number"):
                return True
            if isinstance(v, float):  # as jsonschema: the float quotient, exact fractions when it overflows
                quotient = x / v
                try:
                    failed = int(quotient) != quotient
                except OverflowError:
                    from fractions import Fraction

                    failed = (Fraction(x) / Fraction(v)).denominator != 1
            else:
                failed = x % v
            return not failed

        return multiple_of

    def _size(self, v, kind, op):
        v = _int(v)

        def size(x):
            return not isinstance(x, kind) or op(len(x), v)  # len: code points of a text

        return size

    def _kw_minItems(self, v, s):
        return self._size(v, list, lambda n, m: not n < m)

    def _kw_maxItems(self, v, s):
        return self._size(v, list, lambda n, m: not n > m)

    def _kw_minLength(self, v, s):
        return self._size(v, str, lambda n, m: not n < m)

    def _kw_maxLength(self, v, s):
        return self._size(v, str, lambda n, m: not n > m)

    def _kw_minProperties(self, v, s):
        return self._size(v, dict, lambda n, m: not n < m)

    def _kw_maxProperties(self, v, s):
        return self._size(v, dict, lambda n, m: not n > m)

    def _kw_uniqueItems(self, v, s):
        if not v:
            return _always
        return lambda x: not isinstance(x, list) or json_unique(x)

    # ---- applicators

    def _object(self, s: dict) -> Pred:
        """`properties`, `patternProperties` and `additionalProperties` together, in one pass over the keys."""
        props, pats = s.get("properties", {}), s.get("patternProperties", {})
        if not isinstance(props, dict) or not isinstance(pats, dict):
            raise _Unsupported(s)
        table = {k: self.compile(sub) for k, sub in props.items()}
        patterns = tuple((_regex(p), self.compile(sub)) for p, sub in pats.items())
        extra, closed, joined = None, False, None
        if "additionalProperties" in s:
            addl = s["additionalProperties"]
            if isinstance(addl, dict):
                extra = self.compile(addl)
            elif not addl:
                closed = True
            # jsonschema: a key is additional unless in properties or matched by the patterns joined with '|'
            names = "|".join(pats)
            joined = _regex(names) if names else None
        checks_extra = closed or extra is not None

        if not patterns and joined is None:
            def obj(x):
                if not isinstance(x, dict):
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

        def obj_patterns(x):
            if not isinstance(x, dict):
                return True
            for k, val in x.items():
                p = table.get(k)
                if p is not None and not p(val):
                    return False
                for search, sub in patterns:
                    if search(k) and not sub(val):
                        return False
                if p is None and checks_extra and not (joined is not None and joined(k)):
                    if closed or not extra(val):
                        return False
            return True

        return obj_patterns

    def _kw_ref(self, v, s):
        return self.ref(v)  # a trampoline while the target is still compiling (recursive schemas)

    def _kw_items(self, v, s):
        prefix = s.get("prefixItems", [])
        if not isinstance(prefix, list):
            raise _Unsupported(prefix)
        start = len(prefix)
        if v is False:
            return lambda x: not isinstance(x, list) or len(x) <= start
        item = self.compile(v)
        if item is _always:
            return _always

        def items(x):
            if not isinstance(x, list):
                return True
            for e in (x if not start else x[start:]):
                if not item(e):
                    return False
            return True

        return items

    def _kw_prefixItems(self, v, s):
        if not isinstance(v, list):
            raise _Unsupported(v)
        subs = tuple(self.compile(sub) for sub in v)
        return lambda x: not isinstance(x, list) or all(p(e) for e, p in zip(x, subs))

    def _kw_contains(self, v, s):
        sub = self.compile(v)
        least = _int(s.get("minContains", 1))
        most = _int(s["maxContains"]) if "maxContains" in s else None

        def contains(x):
            if not isinstance(x, list):
                return True
            top = len(x) if most is None else most
            found = 0
            for e in x:
                if sub(e):
                    found += 1
                    if found > top:
                        return False
            return found >= least

        return contains

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
            raise _Unsupported(v)
        deps = tuple((k, self.compile(sub)) for k, sub in v.items())

        def dependent(x):
            if not isinstance(x, dict):
                return True
            for k, p in deps:
                if k in x and not p(x):
                    return False
            return True

        return dependent

    def _subs(self, v) -> tuple:
        if not isinstance(v, list):
            raise _Unsupported(v)
        return tuple(self.compile(sub) for sub in v)

    def _kw_allOf(self, v, s):
        return _all(self._subs(v))

    def _kw_anyOf(self, v, s):
        subs = self._subs(v)
        return lambda x: any(p(x) for p in subs)

    def _kw_oneOf(self, v, s):
        subs = self._subs(v)

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


def _scan(schema) -> None:
    """Refuse schemas with embedded resources, references to other files or keywords whose meaning depends on
    what other keywords evaluated."""
    stack = [(schema, True)]
    while stack:
        node, is_top = stack.pop()
        if isinstance(node, dict):
            for k, v in node.items():
                if k in _REFUSE and not (is_top and k in ("$id", "$schema")):
                    raise _Unsupported(k)
                if k == "$ref" and not (isinstance(v, str) and v.startswith("#")):
                    raise _Unsupported(k)  # another resource: its own '#' references mean something else
                if isinstance(v, (dict, list)):  # values of enum / const too: a false refusal is only slower
                    stack.append((v, False))
        elif isinstance(node, list):
            stack.extend((v, False) for v in node)
