"""The good corpus: every sequence under sequences/good/ is right, so preflight must stay quiet on it: no error
and no physics warning (a false alarm blocks a right table, which costs the user's trust as much as a missed
fault). Each file is checked through `seqgen check FILE --json`, as a user would."""

import pytest

from .conftest import SEQUENCES
from .test_faults import check

GOOD = sorted(p for p in (SEQUENCES / "good").glob("*.yaml") if not p.name.startswith("rig_"))


def test_corpus_is_not_empty():
    assert GOOD


@pytest.mark.parametrize("path", GOOD, ids=[p.stem for p in GOOD])
def test_good_sequence_stays_quiet(path):
    exit_code, found, _ = check(path)
    loud = [(f.code, f.line, f.message) for f in found
            if f.severity == "error" or (f.severity == "warning" and f.code.startswith("physics."))]
    assert not loud, f"{path.name}: {loud}"
    assert exit_code == 0
