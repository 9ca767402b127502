"""seqgen: author, preflight, compile and diff run sequences for cold-atom experiments.

The pipeline, one sub-package per stage: load -> validate -> resolve -> predict
-> check -> compile -> emit; scans, diff and the command line on top.

This module is the package's face for notebooks and scripts (see README,
"Python API")::

    import seqgen
    res = seqgen.preflight("sequences/na23_thermometry.yaml", overrides={"tof": "12 ms"})
    for f in res.findings: print(seqgen.format_text(f))

Names are loaded on first use, so `import seqgen` (and the command line) stays
quick; every name in `__all__` is a documented, stable entry point.
"""

from __future__ import annotations

import sys

from .version import __version__

__all__ = [
    # run the pipeline
    "preflight", "preflight_resolved", "Result", "load_sources", "resolve_shot", "compile_shot",
    # what comes out of it
    "Shot", "Compiled", "DeviceTable", "Finding", "format_text", "has_errors",
    # finding codes and rules
    "Code", "codes", "explain", "RULES", "Rule", "rule",
    # physics predictions of a shot
    "report_rows", "image_prediction", "cloud_at_image",
    # writing, pictures, scans, diff
    "write_build", "Writer", "available_writers", "timeline_figure", "diff_figure", "write_report",
    "plan_scan", "run_scan", "scan_summary", "ScanSummary", "diff", "diff_paths", "DiffInputError",
    # a build folder played back (the loader contract by example)
    "play", "Waveform",
    "CAUTION", "__version__",
    # predicted absorption images: the arrays of each image, and their figure
    "predicted_images", "images_figure",
]


def _pipeline():
    from .pipeline import preflight  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.pipeline"]


def _model():
    from .model import Shot  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.model"]


def _findings():
    from .findings import Finding  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.findings"]


def _codes():
    from .codes import ALL  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.codes"]


def _check():
    from .check import RULES  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.check"]


def _predict():
    from .predict import report_rows  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.predict"]


def _build():
    from .emit.build import write_build  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.emit.build"]


def _writers():
    from .emit.writers import Writer  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.emit.writers"]


def _plot():
    from .emit.plot import timeline_figure  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.emit.plot"]


def _images_plot():
    from .emit.plot.images import images_figure  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.emit.plot.images"]


def _report():
    from .emit.report import write_report  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.emit.report"]


def _scan_plan():
    from .scan.plan import plan_scan  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.scan.plan"]


def _scan_run():
    from .scan.run import run_scan  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.scan.run"]


def _scan_summary():
    from .scan.summary import scan_summary  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.scan.summary"]


def _diff():
    from .diff import diff_paths  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.diff"]


def _caution():
    from .caution import CAUTION  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.caution"]


def _player():
    from .player import play  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.player"]


def _compile():
    from .compile.tables import compile_shot  # noqa: F401  (a name, not the module: `from . import` would ask this face)
    return sys.modules[f"{__name__}.compile.tables"]


_WHERE = {
    "preflight": _pipeline, "preflight_resolved": _pipeline, "Result": _pipeline, "load_sources": _pipeline,
    "resolve_shot": _pipeline, "compile_shot": _compile,
    "Shot": _model, "Compiled": _model, "DeviceTable": _model,
    "Finding": _findings, "format_text": _findings, "has_errors": _findings,
    "Code": _codes, "explain": _codes, "RULES": _check, "Rule": _check, "rule": _check,
    "report_rows": _predict, "image_prediction": _predict, "cloud_at_image": _predict,
    "write_build": _build, "Writer": _writers, "available_writers": _writers,
    "timeline_figure": _plot, "diff_figure": _plot, "write_report": _report,
    "plan_scan": _scan_plan, "run_scan": _scan_run,
    "scan_summary": _scan_summary, "ScanSummary": _scan_summary, "diff_paths": _diff, "DiffInputError": _diff,
    "CAUTION": _caution, "play": _player, "Waveform": _player,
    "predicted_images": _predict, "images_figure": _images_plot,
}

# `resolve` is also the name of the resolve stage's package, which importing it binds on this module: the
# face's function is `resolve_shot`, so one name never means two things
_NAMED_THERE = {"resolve_shot": "resolve"}


def __getattr__(name: str):
    if name == "codes":
        return _codes()
    if name == "diff":  # the diff package; calling it compares two versions
        return _diff()
    loader = _WHERE.get(name)
    if loader is None:
        raise AttributeError(f"module 'seqgen' has no attribute {name!r}")
    value = getattr(loader(), _NAMED_THERE.get(name, name))
    globals()[name] = value  # later look-ups skip this function
    return value


def __dir__():
    return sorted(set(globals()) | set(__all__))
