"""The bad-input corpus: every file under sequences/faults/ whose first line is
'# expect: CODE [@ LINE]' must raise that finding (at that line), never a
traceback."""

import re

import pytest

from seqgen.pipeline import preflight

from .conftest import SEQUENCES

_EXPECT = re.compile(r"^#\s*expect:\s*([a-z]+\.[a-z0-9-]+)(?:\s*@\s*(\d+))?")


def _corpus():
    out = []
    for path in sorted((SEQUENCES / "faults").glob("*.yaml")):
        m = _EXPECT.match(path.read_text(encoding="utf-8").splitlines()[0])
        if m:
            out.append(pytest.param(path, m.group(1), int(m.group(2)) if m.group(2) else None, id=path.stem))
    return out


CORPUS = _corpus()


def test_corpus_is_large_enough():
    codes = {p.values[1] for p in CORPUS}
    assert len(CORPUS) >= 25 and len(codes) >= 25


@pytest.mark.parametrize("path,code,line", CORPUS)
def test_fault_raises_its_finding(path, code, line):
    res = preflight(path)
    hits = [f for f in res.findings if f.code == code]
    assert hits, f"{path.name}: expected {code}, got {[(f.code, f.line) for f in res.findings]}"
    hit = hits[0]
    assert hit.file  # may be the rig or a used file when that is where the mistake is
    if line is not None:
        assert any(h.line == line for h in hits), f"{code} at lines {[h.line for h in hits]}, expected {line}"
    assert hit.message and hit.severity in ("error", "warning", "note")
    if hit.severity == "error":
        assert not res.ok
