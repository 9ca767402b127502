"""The catalogue of finding codes: every code seqgen can report, as a value.

A leaf: it imports nothing from the rest of seqgen. Rules and stages import the
codes they report by name (``from ..codes import PULSE_DETUNED``), so a
misspelt code fails at import, and a code's severity never depends on which
module happened to be imported first. `seqgen explain`, the SARIF rule
metadata, the report and diff read `ALL`.
"""

from __future__ import annotations

import difflib
import re

from . import hardware, physics, safety, schema, timing
from ._code import SEVERITIES, Code
from .hardware import *  # noqa: F401,F403  (the names are the catalogue)
from .physics import *  # noqa: F401,F403
from .safety import *  # noqa: F401,F403
from .schema import *  # noqa: F401,F403
from .timing import *  # noqa: F401,F403

_FAMILIES = (schema, timing, hardware, safety, physics)

ALL: dict[str, Code] = {code.slug: code for family in _FAMILIES
                        for code in vars(family).values() if isinstance(code, Code)}

SUMMARY_WIDTH = 100  # characters of a one-line summary in `seqgen explain all`


def lookup(slug: str) -> Code | None:
    """The code of a slug, or None (e.g. a code of a newer seqgen read back from a JSON file)."""
    return ALL.get(slug)


def explain(slug: str) -> str | None:
    """What a code means, its default severity, stage and source (as `seqgen explain CODE`); `"all"` lists every
    code with its one-line summary; None for a slug that is no code (`close_codes` suggests near ones)."""
    if slug == "all":
        return "\n".join(f"{s:<36} {ALL[s].severity:<8} {summary_line(s)}" for s in sorted(ALL))
    code = ALL.get(slug) if isinstance(slug, str) else None
    if code is None:
        return None
    return (f"{code.slug}  (default severity: {code.severity}; stage: {code.stage})\n\n{code.doc}\n\n"
            f"Source: {code.source}")


def summary_line(slug: str, width: int = SUMMARY_WIDTH) -> str:
    """The first sentence of a code's doc on one line; a longer one is cut at a word boundary, with an ellipsis."""
    code = ALL.get(slug)
    if code is None or not code.doc:
        return ""
    para = " ".join(code.doc.split("\n\n")[0].split())
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


def close_codes(slug: str) -> list[str]:
    return difflib.get_close_matches(slug, list(ALL), n=3, cutoff=0.5)
