"""What the editor features answer: small frozen types, free of any protocol library.

Lines and characters are 0-based, as the Language Server Protocol counts them (a character is taken as one
code unit of the line's text, exact for ASCII files)."""

from __future__ import annotations

import pathlib
from dataclasses import dataclass

KINDS = ("key", "action", "rig-name", "block", "param", "function", "unit", "value")


@dataclass(frozen=True)
class Completion:
    """One completion item; `kind` is one of KINDS."""

    label: str
    kind: str
    detail: str = ""
    documentation: str = ""
    insert_text: str | None = None


@dataclass(frozen=True)
class Span:
    line: int
    character: int
    end_line: int
    end_character: int


@dataclass(frozen=True)
class HoverText:
    markdown: str
    span: Span | None


@dataclass(frozen=True)
class Target:
    path: pathlib.Path
    span: Span
