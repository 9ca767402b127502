"""`seqgen diff --git`: git's external diff driver for sequence files.

Git calls the driver with PATH OLD-FILE OLD-HEX OLD-MODE NEW-FILE NEW-HEX
NEW-MODE (two more arguments for a rename). The old blob arrives as a temporary
file somewhere else, so both texts are resolved as if they stood at PATH in the
working tree: relative `rig:` and `use:` paths resolve against the working
tree. When a version does not resolve (a used file without `rig:`, a YAML
error), the report is followed by a plain line diff. Git stops at a non-zero
exit status from an external diff, so the driver exits 0 whenever it printed
something and 2 only for a wrong call.
"""

from __future__ import annotations

import difflib
import subprocess
import sys
from pathlib import Path

from ..caution import CAUTION
from .core import diff_versions
from .inputs import DiffInputError, load_version
from .report import to_json, to_text

_NULL = ("/dev/null", "nul", "NUL")


def _working_path(path: str) -> str:
    if Path(path).exists() or Path(path).parent.is_dir():
        return path
    try:
        top = subprocess.run(["git", "rev-parse", "--show-toplevel"], capture_output=True, text=True, timeout=30)
        if top.returncode == 0:
            cand = Path(top.stdout.strip()) / path
            if cand.parent.is_dir():
                return str(cand)
    except (OSError, subprocess.TimeoutExpired):
        pass
    return path


def _read(file: str) -> str | None:
    if file in _NULL:
        return None
    return Path(file).read_text(encoding="utf-8")


def git_external_diff(argv: list, *, as_json: bool = False, out=None) -> int:
    out = out or sys.stdout
    if len(argv) not in (7, 9):
        print("seqgen: diff --git expects the 7 (or 9) arguments git passes to an external diff driver: "
              "PATH OLD-FILE OLD-HEX OLD-MODE NEW-FILE NEW-HEX NEW-MODE", file=sys.stderr)
        return 2
    path, old_file, old_hex, _, new_file, new_hex, _ = argv[:7]
    new_path = argv[7] if len(argv) == 9 else path
    try:
        old_text, new_text = _read(old_file), _read(new_file)
    except (OSError, UnicodeDecodeError) as exc:
        print(f"seqgen: cannot read the versions of {path}: {exc}", file=sys.stderr)
        return 2
    la, lb = f"a/{path}", f"b/{new_path}"
    if old_text is None or new_text is None:
        out.write(f"seqgen diff {la} -> {lb}: " + ("new file" if old_text is None else "deleted file") + "\n")
        return 0
    try:
        va = load_version(la, text=old_text, path=_working_path(path), label=la)
        vb = load_version(lb, text=new_text, path=_working_path(new_path), label=lb)
    except DiffInputError as exc:
        out.write(f"seqgen diff {la} -> {lb}: cannot compare ({exc}); line diff:\n")
        out.writelines(_line_diff(old_text, new_text, la, lb))
        return 0
    rep = diff_versions(va, vb)
    if as_json:
        out.write(to_json(rep) + "\n")
        return 0
    out.write(to_text(rep))
    if va.shot is None or vb.shot is None:
        out.write("line diff (a version does not resolve on its own, e.g. a file other sequences use):\n")
        out.writelines(_line_diff(old_text, new_text, la, lb))
    elif rep.identical and old_text != new_text:
        out.write("note: the text changed only in layout, comments, key order or equivalent units\n")
    out.write(f"caution: {CAUTION}\n")
    return 0


def _line_diff(a: str, b: str, la: str, lb: str):
    lines = difflib.unified_diff(a.splitlines(keepends=True), b.splitlines(keepends=True), la, lb)
    for line in lines:
        yield line if line.endswith("\n") else line + "\n"
