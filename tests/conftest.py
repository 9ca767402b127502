import os
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SEQUENCES = ROOT / "sequences"


@pytest.fixture(autouse=True)
def _run_from_repo_root(monkeypatch):
    # file paths in findings are shown relative to the working folder
    monkeypatch.chdir(ROOT)
    yield
