import hashlib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SEQUENCES = ROOT / "sequences"


def readme_shuffled_order(seed, n: int) -> list:
    """The README's rule for `order: shuffled`, written out independently of seqgen: written positions 0..n-1
    sorted by sha256("seqgen-order:<seed>:<i>") (hashlib, FIPS 180-4 SHA-256)."""
    return sorted(range(n), key=lambda i: hashlib.sha256(f"seqgen-order:{seed}:{i}".encode()).digest())


@pytest.fixture(autouse=True)
def _run_from_repo_root(monkeypatch):
    # file paths in findings are shown relative to the working folder
    monkeypatch.chdir(ROOT)
    yield


@pytest.fixture
def project(tmp_path, monkeypatch):
    """A copy of the demo sequences; the working folder is the project root, as for `seqgen check`."""
    import shutil

    shutil.copytree(SEQUENCES, tmp_path / "sequences")
    (tmp_path / "seqgen.toml").write_text("", encoding="utf-8")  # marks the project root
    monkeypatch.chdir(tmp_path)
    return tmp_path


try:  # the language-server tests' client (the test extras install pytest-lsp and pytest-asyncio)
    import pytest_asyncio
except ImportError:  # pragma: no cover
    pytest_asyncio = None

if pytest_asyncio is not None:
    @pytest_asyncio.fixture
    async def client(project):
        """An LSP client and a fresh `seqgen language-server` in a copy of the demos; stopped after the test."""
        from .lsp_client import start, stop

        c = await start(project)
        yield c
        await stop(c)
