"""The shared tables of a scan build: each distinct table file stored once, by its content.

Layout: `OUT/tables/<sha256><suffix>` (e.g. `tables/3f...9a.npz`, `tables/c4...e0.csv.gz`), the name being the
sha256 of the file's bytes; a shot folder holds only its `manifest.json`, whose table entries point there
(`"path": "../tables/<sha256><suffix>"`, relative to the shot folder, with the same `sha256`). A table that is
the same in several shots (a device the scanned params do not touch) is stored once.

Files arrive complete: a writer writes into the shot's temporary folder, and the file is moved into place by
one rename (of two workers writing the same table at once, either rename leaves the same bytes). The scan holds
its claim on OUT (seqgen/emit/claim.py) all the while, so no other process writes here. On a resume, files
whose bytes no longer match their name are removed first (`clean`), so the shots that need them are rebuilt
and write them again; at the end of a run, files no shot lists any more are removed (`collect`).
"""

from __future__ import annotations

import os
import re
import shutil
from pathlib import Path

from ..emit.writers import file_sha256

FOLDER = "tables"
_NAME = re.compile(r"([0-9a-f]{64})(\.[A-Za-z0-9][A-Za-z0-9._-]{0,31})")


class TableStore:
    """`store(written_file, sha256, suffix) -> manifest entry`, as seqgen.emit.build.write_build takes it."""

    def __init__(self, out: str | Path):
        self.folder = Path(out) / FOLDER

    def __call__(self, path: Path, sha: str, suffix: str) -> dict:
        self.folder.mkdir(exist_ok=True)
        name = f"{sha}{suffix}"
        target = self.folder / name
        if target.is_file() and not target.is_symlink():
            os.unlink(path)  # stored already (by this run, or kept from a previous one and checked by `clean`)
        else:
            with open(path, "rb") as fh:
                os.fsync(fh.fileno())
            os.replace(path, target)
        return {"path": f"../{FOLDER}/{name}", "sha256": sha}


def is_shared(entry_path: str) -> bool:
    return entry_path.startswith(f"../{FOLDER}/")


def clean(out: Path) -> dict:
    """Remove from OUT/tables what is not a complete stored table (leftovers, damaged files); {path: sha256}
    of the intact ones (their names are their hashes)."""
    folder = Path(out) / FOLDER
    intact: dict = {}
    if folder.is_symlink() or (folder.exists() and not folder.is_dir()):
        folder.unlink()
        return intact
    if not folder.is_dir():
        return intact
    for p in folder.iterdir():
        m = _NAME.fullmatch(p.name)
        ok = m is not None and p.is_file() and not p.is_symlink()
        if ok:
            try:
                ok = file_sha256(p) == m.group(1)
            except OSError:
                ok = False
        if ok:
            intact[str(p.resolve())] = m.group(1)
        else:
            _remove(p)
    return intact


def collect(out: Path, listed: set) -> None:
    """Remove the stored tables whose sha256 is not in `listed` (no shot of the scan lists them any more)."""
    folder = Path(out) / FOLDER
    if not folder.is_dir():
        return
    for p in folder.iterdir():
        m = _NAME.fullmatch(p.name)
        if m is None or m.group(1) not in listed:
            _remove(p)
    try:
        folder.rmdir()  # only when empty
    except OSError:
        pass


def _remove(p: Path) -> None:
    try:
        if p.is_dir() and not p.is_symlink():
            shutil.rmtree(p, ignore_errors=True)
        else:
            p.unlink()
    except OSError:
        pass
