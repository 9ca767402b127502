"""The editor features on ~500 randomly edited versions of the demos: never an exception, always the right
types; and each call fast once the rig and schema are read (seeded, so a failure replays)."""

from __future__ import annotations

import random
import statistics
import time
from pathlib import Path

from seqgen.lsp.complete import completions
from seqgen.lsp.definition import definition
from seqgen.lsp.features import Completion, HoverText, Span, Target
from seqgen.lsp.hover import hover

ROOT = Path(__file__).resolve().parent.parent
DEMOS = [ROOT / "sequences" / "na23_barrier_scatter.yaml", ROOT / "sequences" / "na23_thermometry.yaml",
         ROOT / "sequences" / "rigs" / "na23_demo_rig.yaml"]
PIECES = ["\t", ":", ": ", "- ", "-", "{", "}", "[", "]", ",", "#", "'", '"', "\n", "  ", "&a", "*a", "!!str ",
          "\x00", "\ufffd", "é", "after: ", "channel: ", "+ 5 ms", "0 W", "1e999", "---\n", "|", ">", "?", "%"]


def mutate(text: str, rng: random.Random) -> str:
    for _ in range(rng.randint(1, 4)):
        op = rng.randrange(6)
        i = rng.randint(0, len(text))
        if op == 0:  # delete a stretch
            text = text[:i] + text[i + rng.randint(1, 40):]
        elif op == 1:  # insert a piece of YAML syntax
            text = text[:i] + rng.choice(PIECES) + text[i:]
        elif op == 2:  # cut the file short (typing at the end)
            text = text[:i]
        elif op == 3:  # duplicate or move a line
            lines = text.splitlines(keepends=True)
            if lines:
                k = rng.randrange(len(lines))
                lines.insert(rng.randrange(len(lines) + 1), lines[k])
                text = "".join(lines)
        elif op == 4:  # random bytes read as text
            text = text[:i] + bytes(rng.randrange(256) for _ in range(rng.randint(1, 8))).decode("latin-1") + text[i:]
        else:  # re-indent a line
            lines = text.splitlines(keepends=True)
            if lines:
                k = rng.randrange(len(lines))
                lines[k] = " " * rng.randint(0, 9) + lines[k].lstrip(" ")
                text = "".join(lines)
    return text


def _positions(text: str, rng: random.Random):
    lines = text.splitlines() or [""]
    for _ in range(3):
        line = rng.randint(0, len(lines))  # one past the end too
        ch = rng.randint(0, len(lines[line]) + 2) if line < len(lines) else rng.randint(0, 3)
        yield line, ch


def _check(text: str, path: Path, line: int, ch: int) -> None:
    found = completions(text, path, line, ch)
    assert isinstance(found, tuple) and all(isinstance(c, Completion) and isinstance(c.label, str) for c in found)
    h = hover(text, path, line, ch)
    assert h is None or (isinstance(h, HoverText) and isinstance(h.markdown, str) and h.markdown
                         and (h.span is None or isinstance(h.span, Span)))
    targets = definition(text, path, line, ch)
    assert isinstance(targets, tuple) and all(isinstance(t, Target) and isinstance(t.path, Path) for t in targets)


def test_random_edits_of_the_demos_never_raise():
    rng = random.Random(20261204)
    texts = {p: p.read_text(encoding="utf-8") for p in DEMOS}
    for n in range(510):
        path = DEMOS[n % len(DEMOS)]
        text = mutate(texts[path], rng)
        for line, ch in _positions(text, rng):
            try:
                _check(text, path, line, ch)
            except Exception as exc:  # name the edit that broke it, so that it replays
                raise AssertionError(f"edit {n} of {path.name} at {line}:{ch}: {exc!r}\n{text!r}") from exc


def test_each_call_is_fast_once_warm():
    path = DEMOS[0]
    text = path.read_text(encoding="utf-8")
    lines = text.splitlines()
    spots = [(n, len(line) // 2) for n, line in enumerate(lines) if line.strip()]
    for line, ch in spots:  # warm: rig, schema, units, the resolve of this text
        _check(text, path, line, ch)
    times = {"completions": [], "hover": [], "definition": []}
    for line, ch in spots:
        for name, fn in (("completions", completions), ("hover", hover), ("definition", definition)):
            t0 = time.perf_counter()
            fn(text, path, line, ch)
            times[name].append(time.perf_counter() - t0)
    for name, ts in times.items():
        assert statistics.median(ts) < 0.1 and max(ts) < 1.0, (name, statistics.median(ts), max(ts))
