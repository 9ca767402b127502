"""YAML loading: positions, duplicate keys, unsafe tags, alias bombs (YAML 1.2 spec: keys are unique)."""

import resource

import pytest

from seqgen.load.yamlsrc import LoadError, load_file, load_text
from seqgen.resolve.sources import check_rig_document, is_rig_document, load_sources

from .conftest import SEQUENCES


def test_positions_of_keys_and_items():
    doc = load_text("a: 1\nb:\n  - x: 2 ms\n", "f.yaml")
    assert doc.pos(("b", 0, "x")).line == 3
    assert doc.pos(("b", 0, "x", "missing")).line == 3  # falls back to the deepest known prefix


def test_duplicate_key_is_an_error():
    with pytest.raises(LoadError) as exc:
        load_text("a: 1\nb: 2\na: 3\n", "f.yaml")
    assert exc.value.finding.code == "schema.duplicate-key" and exc.value.finding.line == 3


def test_python_tags_refused():
    with pytest.raises(LoadError) as exc:
        load_text("a: !!python/object/apply:os.system ['true']\n", "f.yaml")
    assert exc.value.finding.code == "schema.yaml-unsupported"


def test_exponent_without_sign_is_a_number():
    # YAML 1.1 resolvers read 1.2e5 as text; seqgen reads it as the number people mean
    assert load_text("n: 1.2e5\nm: '1.2e5'\n").data == {"n": 1.2e5, "m": "1.2e5"}


def test_alias_bomb_refused_quickly():
    lines = ['a0: &a0 ["x","x","x","x","x","x","x","x","x","x"]']
    for i in range(1, 10):
        prev = f"*a{i - 1}"
        lines.append(f"a{i}: &a{i} [{','.join([prev] * 10)}]")
    text = "\n".join(lines) + "\n"  # expands to 10^10 nodes
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    with pytest.raises(LoadError) as exc:
        load_text(text, "bomb.yaml")
    grown_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before
    assert exc.value.finding.code == "schema.yaml-too-complex"
    # refused before the 10^10 nodes are built: well under 200 MB (its time: tests/benchmarks/bench_hostile.py)
    assert grown_kb < 200 * 1024


def test_a_rig_file_is_recognised_and_checked_as_a_rig():
    # README "Commands": a rig file (seqgen_rig: 1) where a sequence is expected says so, at its version key
    rig = SEQUENCES / "rigs" / "na23_demo_rig.yaml"
    version_line = next(i + 1 for i, ln in enumerate(rig.read_text(encoding="utf-8").splitlines())
                        if ln.startswith("seqgen_rig:"))
    src = load_sources(rig)
    (f,) = src.findings
    assert f.code == "schema.version" and f.line == version_line and "rig file" in f.message
    assert "add 'seqgen: 1'" not in f.hint and "rig: PATH" in f.hint
    doc = load_file(rig, "rig.yaml")
    assert is_rig_document(doc) and [g.code for g in check_rig_document(doc)] == ["schema.rig-file"]
    assert not is_rig_document(load_text("seqgen: 1\nseqgen_rig: 1\n"))
