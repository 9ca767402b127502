"""Registry of finding codes and of the checks that raise them.

Every code seqgen can emit is declared here with its default severity, the
source it relies on and a docstring that `seqgen explain CODE` prints. Stage
diagnostics (schema, resolve, compile) are declared with `declare`; preflight
checks register themselves with the `check` decorator.
"""

from __future__ import annotations

import inspect
from dataclasses import dataclass
from typing import Callable

from .findings import SEVERITIES


@dataclass(frozen=True)
class CodeInfo:
    code: str
    severity: str
    source: str
    doc: str
    stage: str  # "load", "schema", "resolve", "timeline", "tables", "physics"


@dataclass(frozen=True)
class CheckSpec:
    info: CodeInfo
    func: Callable
    codes: tuple[str, ...]  # every code the function may raise (first is its own)


CODES: dict[str, CodeInfo] = {}
CHECKS: list[CheckSpec] = []


def declare(code: str, severity: str, doc: str, source: str = "seqgen's own rule", stage: str = "resolve") -> str:
    if severity not in SEVERITIES:
        raise ValueError(f"bad severity {severity!r} for {code}")
    if code in CODES:
        raise ValueError(f"finding code {code} declared twice")
    CODES[code] = CodeInfo(code, severity, source, inspect.cleandoc(doc), stage)
    return code


def check(code: str, severity: str, source: str, stage: str = "timeline", also: tuple[str, ...] = ()):
    """Register a preflight check function.

    `stage` says what the function receives: "timeline" -> (shot), "tables" ->
    (shot, compiled). The docstring documents the check for `seqgen explain`.
    Extra codes the function raises are listed in `also` (declare them first).
    """

    def wrap(func: Callable) -> Callable:
        info = CodeInfo(code, severity, source, inspect.cleandoc(func.__doc__ or ""), stage)
        if code in CODES:
            raise ValueError(f"finding code {code} declared twice")
        CODES[code] = info
        CHECKS.append(CheckSpec(info, func, (code,) + tuple(also)))
        return func

    return wrap


def default_severity(code: str) -> str:
    info = CODES.get(code)
    return info.severity if info else "error"


def explain(code: str) -> str | None:
    _load_all()
    info = CODES.get(code)
    if info is None:
        return None
    return (f"{info.code}  (default severity: {info.severity}; stage: {info.stage})\n\n{info.doc}\n\n"
            f"Source: {info.source}")


SUMMARY_WIDTH = 100  # characters of a one-line summary in `seqgen explain all`


def summary_line(code: str, width: int = SUMMARY_WIDTH) -> str:
    """The first sentence of a code's doc on one line; a longer one is cut at a word boundary, with an ellipsis."""
    import re

    info = CODES.get(code)
    if info is None or not info.doc:
        return ""
    para = " ".join(info.doc.split("\n\n")[0].split())
    # a sentence ends at '.', '!' or '?' before a space and a capital, backquote or opening bracket
    m = re.search(r"[.!?](?=\s+[A-Z`(\[])", para)
    first = para[:m.end()] if m else para
    if len(first) <= width:
        return first
    cut = first[:width - 3].rstrip()
    space = cut.rfind(" ")
    if space > width // 2:
        cut = cut[:space]
    if cut.count("`") % 2:  # never leave a `code` span open
        cut = cut[:cut.rfind("`")]
    return cut.rstrip(" ,;:-([{") + "..."


def close_codes(code: str) -> list[str]:
    import difflib

    _load_all()
    return difflib.get_close_matches(code, list(CODES), n=3, cutoff=0.5)


def _load_all() -> None:
    """Import every module that declares codes, so the registry is complete."""
    from . import check as _check  # noqa: F401  (registers checks)
    from .load import yamlsrc  # noqa: F401
    from . import batch  # noqa: F401  (scan codes)
    from .compile import tables  # noqa: F401
    from .resolve import errors  # noqa: F401
    from .validate import schema  # noqa: F401
