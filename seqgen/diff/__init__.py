"""Semantic diff of two versions of a sequence (`seqgen diff OLD NEW`).

Inputs are sequence files, git revisions (`REV:PATH`) or build folders. The
diff runs the pipeline on both versions and compares four levels:

- preflight: findings introduced, resolved, unchanged (matched by code + block);
- output: per output, the time windows where the compiled channel tables differ
  by at least one output code, with the maximum deviation in output and
  physical units; outputs and devices added or removed; duration; rows;
- resolved: params (old -> new, with units), blocks added / removed / renamed,
  block shifts with their cause along the anchor chain, changed writes and
  physics-level actions;
- rig: calibration, limits, latency, ranges, devices, geometry, with the
  outputs each change affects.

Two scan build folders (scan.json) are compared through their scans and their
shots, matched by param values (`scanbuild.py`).

Only resolved values are compared, so whitespace, comments, key order and
equivalent units make no difference.
"""

import sys
import types

from .core import diff_paths, diff_versions
from .inputs import DiffInputError, load_build, load_version
from .model import LEVELS, Change, DiffReport, Version
from .report import to_dict, to_json, to_text

__all__ = ["diff", "diff_paths", "diff_versions", "load_version", "load_build", "DiffInputError", "Change", "DiffReport",
           "Version", "LEVELS", "to_dict", "to_json", "to_text"]


def diff(old: str, new: str) -> DiffReport:
    """Compare two versions (sequence files, `REV:PATH` git revisions or build folders); as `seqgen diff OLD NEW`."""
    return diff_paths(old, new)


class _DiffPackage(types.ModuleType):
    """`seqgen.diff` is both this package and, called, the comparison: `seqgen.diff(old, new)`."""

    def __call__(self, old: str, new: str) -> DiffReport:
        return diff_paths(old, new)


sys.modules[__name__].__class__ = _DiffPackage
