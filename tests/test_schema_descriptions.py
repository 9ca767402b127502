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


@pytest.mark.parametrize("name", ["sequence.schema.json", "rig.schema.json"])
def test_every_property_is_described(name):
    schema = json.loads((ROOT / "schemas" / name).read_text(encoding="utf-8"))
    props = [(p, s) for p, s in _properties(schema) if isinstance(s, dict)]  # `false`: a forbidden combination
    assert len(props) > 80
    bare = ["/".join(p) for p, s in props if not str(s.get("description", "")).strip()]
    assert not bare, bare


# --------------------------------------------------------------------------- units an editor can check
import jsonschema  # noqa: E402

from seqgen import preflight  # noqa: E402


def _validator(name):
    return jsonschema.Draft202012Validator(json.loads((ROOT / "schemas" / name).read_text(encoding="utf-8")))


def _hold(duration):
    return {"seqgen": 1, "rig": "r.yaml", "blocks": [{"name": "a", "actions": [{"hold": {"duration": duration}}]}]}


@pytest.mark.parametrize("value", [5, 0.001, "5", " 2.5e-3 ", "-1"])
def test_an_editor_using_the_schema_alone_refuses_a_bare_number_where_a_unit_is_needed(value):
    assert not _validator("sequence.schema.json").is_valid(_hold(value))


@pytest.mark.parametrize("value", ["5 ms", "2 * tof + 1 ms", "tof", 0, "1e-3 s"])
def test_the_schema_accepts_quantities_expressions_and_zero(value):
    assert _validator("sequence.schema.json").is_valid(_hold(value))


def test_the_rig_schema_refuses_a_bare_wavelength():
    rig = {"seqgen_rig": 1, "name": "r", "devices": {"ao": {"timebase": "1 MHz"}},
           "channels": {"p": {"device": "ao", "kind": "digital"}},
           "beams": {"b": {"wavelength": 1064, "waist": "50 um", "power_channel": "p"}}}
    assert not _validator("rig.schema.json").is_valid(rig)
    rig["beams"]["b"]["wavelength"] = "1064 nm"
    assert _validator("rig.schema.json").is_valid(rig)


def test_seqgen_still_reports_a_bare_number_as_a_missing_unit_with_the_unit_to_write(tmp_path):
    rig = (ROOT / "sequences" / "rigs" / "na23_demo_rig.yaml").read_text(encoding="utf-8")
    (tmp_path / "pyproject.toml").write_text("", encoding="utf-8")
    (tmp_path / "rig.yaml").write_text(rig, encoding="utf-8")
    seq = tmp_path / "s.yaml"
    seq.write_text("seqgen: 1\nrig: rig.yaml\nblocks:\n  - name: a\n    actions:\n      - hold: {duration: 5}\n",
                   encoding="utf-8")
    found = preflight(seq).findings
    assert [f.code for f in found] == ["schema.missing-unit"]
    assert "5 ms" in found[0].hint
