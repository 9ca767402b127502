"""YAML loading: positions, duplicate keys, unsafe tags, alias bombs (YAML 1.2 spec: keys are unique)."""

import resource
import time

import pytest

from seqgen.load.yamlsrc import LoadError, load_text


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
    t0 = time.perf_counter()
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    with pytest.raises(LoadError) as exc:
        load_text(text, "bomb.yaml")
    elapsed = time.perf_counter() - t0
    grown_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss - before
    assert exc.value.finding.code == "schema.yaml-too-complex"
    # bounds from issue: refused within 2 s and 200 MB (these are limits, not timing benchmarks)
    assert elapsed < 2.0 and grown_kb < 200 * 1024
