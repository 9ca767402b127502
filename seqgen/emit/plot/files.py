"""Rendering and saving figures: deterministic bytes (no dates, fixed SVG ids), atomic writes."""

from __future__ import annotations

import io
import os
import tempfile
from pathlib import Path

from ..claim import claimed
from .layout import PlotError


FORMATS = ("png", "svg", "pdf")


class OutputExists(Exception):
    pass


def figure_bytes(fig, fmt: str, salt: str = "seqgen") -> bytes:
    """Render a figure; the bytes depend only on the figure (no dates, SVG ids fixed by `salt`)."""
    import matplotlib

    fmt = fmt.lower()
    if fmt not in FORMATS:
        raise PlotError(f"cannot write '.{fmt}' pictures; use one of " + ", ".join("." + f for f in FORMATS))
    meta = {"png": {"Software": None}, "svg": {"Date": None}, "pdf": {"CreationDate": None, "Producer": None}}[fmt]
    buf = io.BytesIO()
    with matplotlib.rc_context({"svg.hashsalt": salt, "svg.fonttype": "path", "pdf.fonttype": 42}):
        fig.savefig(buf, format=fmt, metadata=meta)
    return buf.getvalue()


def svg_text(fig, prefix: str = "") -> str:
    """The figure as an SVG element (no XML prolog), for inlining in HTML. With `prefix`, every id of the SVG
    and every reference to one (href="#id", url(#id)) is prefixed, so several figures on one page keep their
    ids unique."""
    import re

    text = figure_bytes(fig, "svg", prefix or "seqgen").decode("utf-8")
    start = text.find("<svg")
    text = text[start:] if start >= 0 else text
    if prefix:
        text = re.sub(r'\bid="([^"]+)"', lambda m: f'id="{prefix}{m.group(1)}"', text)
        text = re.sub(r'(href)="#([^"]+)"', lambda m: f'{m.group(1)}="#{prefix}{m.group(2)}"', text)
        text = re.sub(r"url\(#([^)]+)\)", lambda m: f"url(#{prefix}{m.group(1)})", text)
    return text


def write_atomic(path: str | Path, data: bytes, *, force: bool = False) -> Path:
    """Write bytes to a temporary file beside `path`, then rename it into place, holding the claim on `path`
    (seqgen/emit/claim.py) from the check to the rename: of two processes writing it at once one writes, the
    other gets OutputExists, or OutputBusy while the first still writes (with `force`: waits, then replaces)."""
    path = Path(path)
    _refuse(path, force)  # the quick answer; asked again under the claim
    path.parent.mkdir(parents=True, exist_ok=True)
    with claimed(path, wait=force):
        _refuse(path, force)
        return _replace_with(path, data)


def _refuse(path: Path, force: bool) -> None:
    if path.exists() and not force:
        raise OutputExists(f"{path} exists; use --force to replace it")
    if path.exists() and path.is_dir():
        raise OutputExists(f"{path} is a folder; give a file name")


def _replace_with(path: Path, data: bytes) -> Path:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(tmp, 0o666 & ~mask)
        os.replace(tmp, path)
    except BaseException:
        try:
            os.unlink(tmp)
        except OSError:
            pass
        raise
    return path


def format_of(path: str | Path) -> str:
    ext = Path(path).suffix.lower().lstrip(".")
    if ext not in FORMATS:
        raise PlotError(f"'{path}': give a file ending in " + ", ".join("." + f for f in FORMATS))
    return ext


def save_figure(fig, path: str | Path, *, force: bool = False) -> Path:
    return write_atomic(path, figure_bytes(fig, format_of(path)), force=force)

