"""Schemas a YAML editor can use on its own: every property of the sequence schema says what it is for (an
editor shows the description on hover and in completion)."""

import json

import pytest

from .conftest import ROOT


def _properties(node, path=()):
    if isinstance(node, dict):
        props = node.get("properties")
        if isinstance(props, dict):
            for key, sub in props.items():
                yield path + (key,), sub
        for key, sub in node.items():
            yield from _properties(sub, path + ((key,) if key != "properties" else ()))
    elif isinstance(node, list):
        for i, sub in enumerate(node):
            yield from _properties(sub, path + (str(i),))


@pytest.mark.parametrize("name", ["sequence.schema.json"])
def test_every_property_is_described(name):
    schema = json.loads((ROOT / "schemas" / name).read_text(encoding="utf-8"))
    props = [(p, s) for p, s in _properties(schema) if isinstance(s, dict)]  # `false`: a forbidden combination
    assert len(props) > 150
    bare = ["/".join(p) for p, s in props if not str(s.get("description", "")).strip()]
    assert not bare, bare
