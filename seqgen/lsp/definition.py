"""Go to definition for sequence and rig files: a block name (in `after:` / `with:` / `accept:`) to its
`name:` line, a param in an expression to its line under `params:`, a `use:` or `rig:` path to the file, and a
rig name (output, beam, coil, drive, imaging setup, device) to its line in the rig file."""

from __future__ import annotations

from pathlib import Path

from .context import Place, cursor_at, names, rig_info, subject
from .features import Span, Target


def _target(place: Place) -> Target:
    return Target(place.file, Span(place.line, place.col, place.line, place.end))


def definition(text: str, path: Path, line: int, character: int) -> tuple[Target, ...]:
    """Where the name under the cursor (0-based line and character) is defined; () when it is nowhere."""
    cur = cursor_at(text, line, character)
    if cur is None or not cur.word:
        return ()
    path = Path(path)
    what = subject(cur, text, path)
    kind = what[0]
    if kind == "file":
        file = what[1]
        return (Target(file, Span(0, 0, 0, 0)),) if file.is_file() else ()
    if kind in ("block", "param"):
        world = names(text, path)
        place = (world.blocks if kind == "block" else world.params).get(what[1])
        if place is None or (place.file == path and place.line == line):  # the definition itself
            return ()
        return (_target(place),)
    if kind == "rig":
        info = rig_info(text, path)
        section, name = what[1], what[2]
        place = info.names.get(section, {}).get(name.split(".")[0]) if info is not None else None
        if place is None or (place.file == path and place.line == line):
            return ()
        return (_target(place),)
    return ()
