"""Validate a loaded document against a JSON Schema (draft 2020-12).

Validator errors are turned into findings at the YAML line and column of the
offending key or value, with a "did you mean" for misspelt keys. Validators are
built once per schema and cached.

A valid document (the usual case) is recognised by a compiled yes/no check
(`seqgen.physics.schemacheck`) that gives the same answer as jsonschema's
`is_valid` without importing jsonschema. Only an invalid document (or one
against a schema the check does not compile) is walked by jsonschema's
`iter_errors`, so every finding comes from jsonschema's own errors; during that
walk each `$ref` whose target the compiled check accepts is skipped, since it
can yield no error.
"""

from __future__ import annotations

import difflib
import json
from functools import lru_cache
from pathlib import Path
from typing import TYPE_CHECKING

from ..findings import Finding, make
from ..load.yamlsrc import Document
from ..physics.schemacheck import FastSchema, compile_schema, holds
from ..codes import BAD_VALUE, MISSING_KEY, UNKNOWN_KEY, WRONG_TYPE

if TYPE_CHECKING:
    import jsonschema


MAX_REPORTED = 25


def schema_dir() -> Path:
    """The schemas folder: inside the package when installed, else the repo's."""
    here = Path(__file__).resolve().parent.parent
    for cand in (here / "_schemas", here.parent / "schemas"):
        if cand.is_dir():
            return cand
    raise FileNotFoundError("seqgen schemas folder not found")


@lru_cache(maxsize=None)
def load_schema(schema_name: str) -> dict:
    return json.loads((schema_dir() / schema_name).read_text(encoding="utf-8"))


@lru_cache(maxsize=None)
def _fast(schema_name: str) -> FastSchema | None:
    """The compiled check of a schema, or None when it does not compile (then jsonschema decides)."""
    return compile_schema(load_schema(schema_name))


@lru_cache(maxsize=None)
def _walker(schema_name: str) -> jsonschema.Draft202012Validator:
    """The validator that walks an invalid document for its errors; jsonschema is imported only here."""
    import jsonschema

    plain = jsonschema.Draft202012Validator(load_schema(schema_name))
    fast = _fast(schema_name)
    if fast is None:
        return plain
    base_ref = plain.VALIDATORS["$ref"]

    def ref(validator, ref, instance, schema):
        accept = fast.ref(ref)
        if accept is not None and holds(accept, instance):
            return  # the target accepts the instance: jsonschema would find no error in it
        yield from base_ref(validator, ref, instance, schema)

    walker = jsonschema.validators.extend(jsonschema.Draft202012Validator, {"$ref": ref})
    return walker(plain.schema)


def validate_document(doc: Document, schema_name: str) -> list[Finding]:
    fast = _fast(schema_name)
    if fast is not None and fast.accepts(doc.data):
        return []
    return findings_from_errors(_walker(schema_name).iter_errors(doc.data), doc)


def _unit_left_to_resolve(err) -> bool:
    """A bare number where a unit is needed: the schema refuses it for editors, and resolve reports it as
    schema.missing-unit with the unit to write (a better fix than a pattern mismatch)."""
    if isinstance(err.schema, dict) and str(err.schema.get("$comment", "")).startswith("dimensioned"):
        return isinstance(err.instance, (int, float, str)) and not isinstance(err.instance, bool)
    if err.validator not in ("oneOf", "anyOf") or not err.context:
        return False
    # a choice (a latency, or its rise and fall): dropped when one branch fails only for bare numbers
    branches: dict = {}
    for sub in err.context:
        branches.setdefault(sub.relative_schema_path[0], []).append(sub)
    return any(all(_unit_left_to_resolve(sub) for sub in subs) for subs in branches.values())


def findings_from_errors(errors, doc: Document) -> list[Finding]:
    """Findings for jsonschema's errors on `doc`, in path order, at most MAX_REPORTED."""
    errors = sorted((e for e in errors if not _unit_left_to_resolve(e)),
                    key=lambda e: (list(map(str, e.absolute_path)), e.validator))
    # the allowed values at each path, for a const: that names one of them (a former name and its new one)
    enums = {tuple(e.absolute_path): e.validator_value for e in errors if e.validator == "enum"}
    findings: list[Finding] = []
    seen_paths = set()
    for err in errors:
        for f in _to_findings(err, doc, enums):
            key = (f.line, f.column, f.code)
            if key in seen_paths:
                continue
            seen_paths.add(key)
            findings.append(f)
        if len(findings) >= MAX_REPORTED:
            break
    return findings


def _where(path) -> str:
    out = ""
    for p in path:
        out += f"[{p}]" if isinstance(p, int) else (f".{p}" if out else str(p))
    return out or "top level"


def _to_findings(err: jsonschema.ValidationError, doc: Document, enums: dict | None = None) -> list[Finding]:
    path = tuple(err.absolute_path)
    where = _where(path)
    v = err.validator
    if v == "additionalProperties":
        allowed = list((err.schema.get("properties") or {}).keys())
        extra = [k for k in (err.instance or {}) if k not in allowed] if isinstance(err.instance, dict) else []
        out = []
        for key in extra:
            close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
            hint = f"did you mean '{close[0]}'?" if close else ("known keys: " + ", ".join(allowed) if allowed else "remove it")
            out.append(make(UNKNOWN_KEY, f"unknown key '{key}' in {where}", doc.pos(path + (key,)), hint=hint))
        return out
    if v == "required":
        missing = [k for k in err.validator_value if isinstance(err.instance, dict) and k not in err.instance]
        return [make(MISSING_KEY, f"{where} needs '{k}'", doc.pos(path), hint=f"add '{k}:'") for k in missing]
    if v == "type":
        want = err.validator_value if isinstance(err.validator_value, str) else " or ".join(err.validator_value)
        got = type(err.instance).__name__.replace("dict", "mapping").replace("list", "list").replace("str", "text")
        hint = "write it as a mapping 'key: value'" if want == "object" else f"give {_article(want)} {want}"
        if want in ("string or number", "string") and isinstance(err.instance, (dict, list)):
            hint = "give a single quantity such as '2 ms'"
        return [make(WRONG_TYPE, f"{where} must be {want}, not {got}", doc.pos(path), hint=hint)]
    if v in ("minProperties", "maxProperties") and isinstance(err.instance, dict) and path and isinstance(path[-1], int):
        return [make(BAD_VALUE, f"{where}: an action must have exactly one key naming its kind, found {len(err.instance)}",
                     doc.pos(path), hint="split it into one list item per action")]
    if err.schema is False:
        node = doc.data
        for p in path:
            node = node[p]
        key = next((k for k in ("with", "after") if isinstance(node, dict) and k in node), None)
        if key is not None:
            return [make(BAD_VALUE, f"{where} has more than one anchor (at / after / with)", doc.pos(path + (key,)),
                         hint="keep exactly one of at:, after:, with:")]
    if v == "anyOf" and isinstance(err.schema, dict) and str(err.schema.get("$comment", "")).startswith("dimensioned"):
        got = ("a mapping" if isinstance(err.instance, dict) else "a list" if isinstance(err.instance, list) else
               "a yes/no value" if isinstance(err.instance, bool) else repr(err.instance))
        return [make(WRONG_TYPE, f"{where} must be a quantity with its unit, not {got}", doc.pos(path),
                     hint="give a single quantity such as '2 ms'")]
    if v in ("oneOf", "anyOf"):
        from jsonschema.exceptions import best_match  # loaded already: err is one of its errors

        best = best_match(err.context) if err.context else None
        if best is not None and best.validator not in ("oneOf", "anyOf"):
            return _to_findings(best, doc, enums)
    if v == "enum":
        close = _closest_choice(str(err.instance), [str(x) for x in err.validator_value])
        hint = f"did you mean '{close}'?" if close else "choose one of: " + ", ".join(map(str, err.validator_value))
        return [make(BAD_VALUE, f"{where}: '{err.instance}' is not allowed", doc.pos(path), hint=hint)]
    if v == "const" and isinstance(err.schema, dict) and err.schema.get("description"):
        # an if/then that refuses a former name: the then: branch's description says so
        others = [x for x in (enums or {}).get(path, ()) if x != err.validator_value]
        alt = f" (or {' or '.join(repr(x) for x in others)})" if others else ""
        return [make(BAD_VALUE, f"{where}: {err.schema['description']}", doc.pos(path),
                     hint=f"write {err.validator_value!r}{alt}")]
    if v == "const":
        return [make(BAD_VALUE, f"{where} must be {err.validator_value!r}, not {err.instance!r}", doc.pos(path),
                     hint=f"write {err.validator_value!r}")]
    if v == "dependentRequired" and isinstance(err.instance, dict):
        out = []
        for key, needs in (err.validator_value or {}).items():
            for need in needs:
                if key in err.instance and need not in err.instance:
                    out.append(make(MISSING_KEY, f"{where}: '{key}' needs '{need}' beside it", doc.pos(path + (key,)),
                                    hint=f"add '{need}:', or remove '{key}:'"))
        if out:
            return out
    if v == "pattern":
        return [make(BAD_VALUE, f"{where}: '{err.instance}' is not a valid name", doc.pos(path),
                     hint="names are letters, digits and underscores, starting with a letter")]
    return [make(BAD_VALUE, f"{where}: {_shorten(err.message, err.instance)}", doc.pos(path),
                 hint=_bound_hint(v, err.validator_value, path))]


def _closest_choice(value: str, choices: list) -> str | None:
    """The one allowed value `value` most likely means, or None: a spelt-out sign ('sigma_plus' is 'sigma+'),
    else the closest by similarity unless two are equally close (then a guess could be the opposite one)."""
    def norm(x):
        return x.lower().replace("plus", "+").replace("minus", "-").replace("_", "").replace(" ", "")

    spelt = [c for c in choices if norm(c) == norm(value)]
    if len(spelt) == 1:
        return spelt[0]
    ranked = sorted(((difflib.SequenceMatcher(None, value, c).ratio(), c) for c in choices), reverse=True)
    if not ranked or ranked[0][0] < 0.6 or (len(ranked) > 1 and ranked[1][0] == ranked[0][0]):
        return None
    return ranked[0][1]


def _article(word: str) -> str:
    return "an" if word[:1].lower() in "aeiou" else "a"


_BOUND_WORDS = {"minimum": "{} or more", "maximum": "{} or less", "exclusiveMinimum": "more than {}",
                "exclusiveMaximum": "less than {}", "minItems": "at least {} item(s)", "maxItems": "at most {} item(s)",
                "minLength": "at least {} character(s)", "maxLength": "at most {} character(s)"}


def _bound_hint(validator: str, bound, path: tuple) -> str:
    """The fix for a value outside a schema bound: what to give instead ('' for other validators)."""
    words = _BOUND_WORDS.get(validator)
    if words is None:
        return ""
    key = path[-1] if path else None
    if key == "steps" and validator == "minimum":  # a scan range: how many values, ends included
        return "steps counts the values of the range, ends included: give 2 or more (steps: 1 only when from equals to)"
    if key in ("random", "max_shots") and validator == "minimum":
        return f"give {key}: {words.format(bound)} (how many shots)"
    return "give " + words.format(bound)


def _shorten(message: str, instance) -> str:
    """jsonschema repeats the offending value in full; a 400-digit number or a long list is cut to its start."""
    text = repr(instance)
    if len(text) <= 60 or text not in message:
        return message
    return message.replace(text, f"{text[:40]}... ({len(text)} characters)")
