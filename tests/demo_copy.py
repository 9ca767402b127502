"""Shared by the tests that apply proposed fixes: check a copy of the demos and edit it in place."""

import io
import json
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path
from types import SimpleNamespace

from seqgen.cli import main


def check(path):
    """`seqgen check PATH --json --jobs 1`: the findings of the file and of every shot."""
    out, err = io.StringIO(), io.StringIO()
    with redirect_stdout(out), redirect_stderr(err):
        main(["check", str(path), "--json", "--jobs", "1"])
    assert "Traceback" not in err.getvalue()
    doc = json.loads(out.getvalue())
    found = list(doc["findings"]) + [f for shot in doc.get("shots", []) for f in shot["findings"]]
    return [SimpleNamespace(**f) for f in found]


def errors(findings):
    return [f for f in findings if f.severity == "error"]


def edit(path, old, new):
    """Change the one place of `path` that holds `old`."""
    p = Path(path)
    text = p.read_text(encoding="utf-8")
    assert text.count(old) == 1, old
    p.write_text(text.replace(old, new), encoding="utf-8")
