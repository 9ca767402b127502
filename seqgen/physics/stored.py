"""Results kept on disk between runs, keyed by content: what a fresh process would otherwise compute again.

A value is stored as JSON (floats written with repr, so read back to the last bit) in a per-user cache folder
($XDG_CACHE_HOME, else ~/.cache; `seqgen/` in it), in a file named by the sha256 of its key; a folder keeps at
most MAX_FILES, the oldest are removed. A key holds everything the value depends on: the inputs (as their repr)
and the code (`code_stamp`: the bytes of every module of seqgen and of the physics data, numpy's, scipy's
and Python's versions: the computations stored are called from outside this package too, e.g. the trap
minimisation of seqgen.predict.traps), so changed code never reads an old value.
Files are written under a temporary name and renamed into place, so two processes starting at once never read
half a file; a file that cannot be read or parsed, or whose content names another key (a file renamed or copied
by hand), counts as missing. Without a writable folder nothing is stored and every value is computed, as before.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import tempfile
from functools import lru_cache
from pathlib import Path
from typing import Mapping

_HERE = Path(__file__).resolve().parent
MAX_FILES = 4096  # per folder: a few hundred kB of small JSON files


@lru_cache(maxsize=None)
def folder(name: str) -> Path | None:
    """The cache folder `seqgen/<name>`, made on first use; None when it cannot be written."""
    try:
        base = os.environ.get("XDG_CACHE_HOME", "")
        root = Path(base) if os.path.isabs(base) else Path.home() / ".cache"
        path = root / "seqgen" / name
        path.mkdir(parents=True, exist_ok=True)
    except (OSError, RuntimeError):  # RuntimeError: no home folder to be found
        return None
    return path if os.access(path, os.W_OK | os.X_OK) else None


@lru_cache(maxsize=1)
def code_stamp() -> str:
    """sha256 of what computed values depend on besides their inputs: every module of seqgen, the physics data
    files and the versions of Python, numpy and scipy."""
    import numpy
    import scipy

    h = hashlib.sha256(f"{sys.version}|{numpy.__version__}|{scipy.__version__}".encode())
    package = _HERE.parent
    for path in sorted([*package.rglob("*.py"), *(_HERE / "data").glob("*")]):
        h.update(path.relative_to(package).as_posix().encode() + b"\0" + path.read_bytes() + b"\0")
    return h.hexdigest()


def exact(value) -> str | None:
    """A text that tells apart any two different values (floats to the last bit, arrays by their bytes), for a
    key; None for a value of a kind it does not know (then nothing is stored for it)."""
    import dataclasses

    import numpy as np

    if value is None or isinstance(value, (bool, int, str)):
        return repr(value)
    if isinstance(value, (float, np.floating)):
        return f"{type(value).__name__}:{float(value).hex()}"
    if isinstance(value, np.ndarray):
        return f"ndarray:{value.dtype.str}:{value.shape}:{np.ascontiguousarray(value).tobytes().hex()}"
    if isinstance(value, (tuple, list)):
        parts = [exact(v) for v in value]
        return None if None in parts else f"{type(value).__name__}({','.join(parts)})"
    if isinstance(value, Mapping):
        parts = [(exact(k), exact(v)) for k, v in value.items()]
        if any(k is None or v is None for k, v in parts):
            return None
        return "{" + ",".join(f"{k}:{v}" for k, v in parts) + "}"
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        parts = [exact(getattr(value, f.name)) for f in dataclasses.fields(value)]
        return None if None in parts else f"{type(value).__qualname__}({','.join(parts)})"
    return None


def _file(name: str, key: str) -> Path | None:
    where = folder(name)
    if where is None:
        return None
    return where / (hashlib.sha256(key.encode()).hexdigest() + ".json")


def read(name: str, key: str):
    """The value stored under `key` in folder `name`, or None."""
    path = _file(name, key)
    if path is None:
        return None
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    # the file names its own key (a file moved or copied under another name is not another key's value)
    if not isinstance(doc, dict) or doc.get("key") != path.stem:
        return None
    return doc.get("value")


def replace_json(path: Path, doc) -> bool:
    """Write `doc` as JSON to `path` under a temporary name and rename it into place (atomic: a reader sees the
    old file, no file, or the whole new one); False, leaving nothing behind, when it cannot be written."""
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-", suffix=".json")
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            json.dump(doc, fh)
        os.replace(tmp, path)
    except OSError:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
        return False
    return True


def write(name: str, key: str, value, keep: int = MAX_FILES) -> None:
    """Store `value` (JSON data) under `key`; silently nothing when the folder cannot be written. A folder of at
    most `keep` files under MAX_FILES is looked at on every write, others about one write in 256."""
    path = _file(name, key)
    if path is None or not replace_json(path, {"key": path.stem, "value": value}):
        return
    if keep < MAX_FILES or path.name.startswith("00"):  # about one write in 256 looks at the folder's size
        prune(path.parent, keep)


def prune(where: Path, keep: int = MAX_FILES, pattern: str = "*.json") -> None:
    """Remove the least recently written files (matching `pattern`) of a folder beyond `keep` (down to three
    quarters of it), so a long scan or editing session cannot fill the disk; another process removing the same
    files is harmless."""
    try:
        files = [(p.stat().st_mtime_ns, p) for p in where.glob(pattern) if not p.name.startswith(".tmp-")]
    except OSError:
        return
    if len(files) <= keep:
        return
    files.sort()
    for _, p in files[:len(files) - keep * 3 // 4]:
        try:
            p.unlink()
        except OSError:
            pass
