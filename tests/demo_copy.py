"""Shared by the tests that apply proposed fixes: check a copy of the demos and edit it in place; read the
number a fix proposes and write it at a key of a sequence or rig file."""

import io
import json
import re
from contextlib import redirect_stderr, redirect_stdout
from dataclasses import dataclass
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


# ------------------------------------------------------------------ the number a fix proposes, and where it goes

_NUM = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_UNIT = r"(?:[GMkmunp]?(?:s|Hz|V|A|W|m|G|K)(?:/(?:cm|s))?)"
_PROPOSAL = re.compile(rf"(?<![\w.+-])(?:x(?P<x>{_NUM})(?![\w.])|(?P<n>{_NUM})(?:(?P<times> times\b)|"
                       rf" (?P<unit>{_UNIT})(?![\w/])|(?![\w.%])))")
# SI scale of the units the fixes write (SI Brochure, 9th ed. (2019), prefixes)
_PREFIX = {"G": 1e9, "M": 1e6, "k": 1e3, "": 1.0, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12}


@dataclass(frozen=True)
class Proposal:
    """The first number a fix names: a value with its unit (unit "" for a plain number), or a factor
    ('x1.34', '13.1 times longer') to apply to what the file writes."""
    number: float
    text: str
    unit: str
    factor: bool

    @property
    def quantity(self) -> str:
        return f"{self.text} {self.unit}".strip()


def proposal(hint: str) -> Proposal:
    """The first number the fix `hint` proposes (alternatives after it are ignored)."""
    m = _PROPOSAL.search(hint or "")
    assert m, f"the fix names no number: {hint!r}"
    if m.group("x") is not None:
        return Proposal(float(m.group("x")), m.group("x"), "", True)
    return Proposal(float(m.group("n")), m.group("n"), m.group("unit") or "", bool(m.group("times")))


def si(text: str) -> float:
    """'15.23 ms' -> 0.01523 (a plain number is itself)."""
    number, _, unit = text.strip().partition(" ")
    if not unit:
        return float(number)
    base = re.fullmatch(r"([GMkmunp]?)(s|Hz|V|A|W|m|G|K)(?:/(cm|s))?", unit)
    assert base, unit
    scale = _PREFIX[base.group(1)]
    if base.group(3) == "cm":
        scale /= 1e-2
    return float(number) * scale


def quantity_text(value_si: float, unit: str) -> str:
    """`value_si` written in `unit` (the unit of the text it replaces), to 10 significant digits."""
    return f"{value_si / si('1 ' + unit):.10g} {unit}" if unit else f"{value_si:.10g}"


def _item_span(lines: list, line: int) -> range:
    """The lines (0-based) of the list item or mapping entry written at `line` (1-based): it and the deeper
    lines under it."""
    def indent(text):
        return len(text) - len(text.lstrip(" "))

    end = line
    while end < len(lines) and (not lines[end].strip() or lines[end].lstrip().startswith("#")
                                or indent(lines[end]) > indent(lines[line - 1])):
        end += 1
    return range(line - 1, end)


def scalar_end(line: str, start: int) -> int:
    """Where the YAML scalar that starts at `start` of `line` ends (a quoted string, or up to , } ] or a comment)."""
    if line[start] in "'\"":
        return line.index(line[start], start + 1) + 1
    end = start
    while end < len(line) and line[end] not in ",}]" and not line.startswith(" #", end):
        end += 1
    while end > start and line[end - 1] == " ":
        end -= 1
    return end


def _key_rx(key: str):
    return re.compile(rf"(?<![\w.])({re.escape(key)}):[ \t]*(?=\S)(?!\{{|\[)")


def read_key(path, line: int, key: str) -> str | None:
    """The scalar written for `key` in the entry at `line` of `path` (its deeper lines included), or None."""
    lines = Path(path).read_text(encoding="utf-8").split("\n")
    for i in _item_span(lines, line):
        m = _key_rx(key).search(lines[i].split(" #")[0])
        if m:
            return lines[i][m.end():scalar_end(lines[i], m.end())]
    return None


def write_key(path, line: int, key: str, text: str) -> None:
    """Write `text` as the value of `key` in the entry at `line` of `path` (the first `key:` in it or its
    deeper lines); absent, add `key: text` to the flow mapping on that line."""
    p = Path(path)
    lines = p.read_text(encoding="utf-8").split("\n")
    for i in _item_span(lines, line):
        m = _key_rx(key).search(lines[i].split(" #")[0])
        if m:
            lines[i] = lines[i][:m.end()] + text + lines[i][scalar_end(lines[i], m.end()):]
            break
    else:
        at = lines[line - 1].split(" #")[0].rindex("}")
        lines[line - 1] = lines[line - 1][:at] + f", {key}: {text}" + lines[line - 1][at:]
    p.write_text("\n".join(lines), encoding="utf-8")


def scale_key(path, line: int, key: str, factor: float) -> str:
    """Multiply the quantity written for `key` at `line` by `factor`, in the unit it is written in."""
    old = read_key(path, line, key)
    assert old, (key, line)
    number, _, unit = old.partition(" ")
    new = f"{float(number) * factor:.6g} {unit}".strip()
    write_key(path, line, key, new)
    return new


def rig_of(path) -> Path:
    """The rig file a sequence names (`rig:`), as a path from the working folder."""
    m = re.search(r"^rig:\s*(\S+)", Path(path).read_text(encoding="utf-8"), re.M)
    assert m, path
    return Path(path).parent / m.group(1)


def rig_line(rig, name: str) -> int:
    """The line (1-based) of the rig entry `name:` (a beam, a channel, a coil)."""
    for i, line in enumerate(Path(rig).read_text(encoding="utf-8").split("\n"), 1):
        if re.match(rf"\s+{re.escape(name)}:", line):
            return i
    raise AssertionError(f"no entry {name!r} in {rig}")


def block_line(path, line: int) -> int:
    """The line (1-based) of the `- name:` of the block that holds `line`."""
    lines = Path(path).read_text(encoding="utf-8").split("\n")
    for i in range(line - 1, -1, -1):
        if re.match(r"\s*- name:", lines[i]):
            return i + 1
    raise AssertionError(f"line {line} of {path} is in no block")


def shift_block(path, line: int, delta_s: float) -> str:
    """Move the block that holds `line` by `delta_s` (its `at:` or the offset of its `after: other + offset`)."""
    start = block_line(path, line)
    p = Path(path)
    lines = p.read_text(encoding="utf-8").split("\n")
    for i in range(start - 1, len(lines)):
        m = re.match(rf"(\s*(?:- )?(?:at: |after: \w+ \+ ))({_NUM}) (\w+)\s*$", lines[i])
        if m:
            new = quantity_text(si(f"{m.group(2)} {m.group(3)}") + delta_s, m.group(3))
            lines[i] = m.group(1) + new
            p.write_text("\n".join(lines), encoding="utf-8")
            return new
    raise AssertionError(f"the block at line {start} of {path} has no at: or after: with an offset")
