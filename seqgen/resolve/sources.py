"""The files of a sequence, read and validated: the `Sources` that resolve takes.

The sequence file, every file it `use`s (cycles reported) and its `rig:` file are
loaded and validated against their schemas here; `use:` and `rig:` may not leave
the project root unless allowed; an absolute path inside the project gets a
warning with its relative form. A rig file checked on its own is recognised and
checked here too. Nothing is resolved: params, blocks and times are the resolve
stage's job (`seqgen.resolve.sequence.resolve`).
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Mapping

from ..codes import (
    ABSOLUTE_PATH, EMPTY_SEQUENCE, FILE_MISSING, FRAGMENT, MISSING_KEY, RIG_FILE, RIG_OUTSIDE_ROOT, USE_CYCLE,
    USE_OUTSIDE_ROOT, VERSION, WRONG_TYPE,
)
from ..findings import Finding, make
from ..load.yamlsrc import Document, LoadError, load_file, load_text
from ..validate.schema import validate_document
from .rig import build_rig

SEQUENCE_SCHEMA = "sequence.schema.json"
RIG_SCHEMA = "rig.schema.json"
SUPPORTED_VERSIONS = (1,)


@dataclass
class Sources:
    """Every document a sequence needs, loaded and validated."""

    main: Document
    rig: Document | None
    used: list = field(default_factory=list)  # (Document, use-entry overrides dict, use Document, path) in order
    findings: list = field(default_factory=list)

    @property
    def hashes(self) -> dict:
        out = {self.main.file: self.main.text_sha256}
        for d, *_ in self.used:
            out[d.file] = d.text_sha256
        if self.rig is not None:
            out[self.rig.file] = self.rig.text_sha256
        return out


def _display(path: Path) -> str:
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except (ValueError, RuntimeError, OSError):  # outside the working folder, or a symlink loop
        return str(path)


def load_sources(path: str | Path, text: str | None = None, display: str | None = None, *,
                 allow_outside_root: bool | None = None, texts: Mapping[Path, str] | None = None) -> Sources:
    """Load and validate a sequence, the files it uses, and its rig.

    `text`: the sequence's text instead of the file's; `texts`: resolved path -> text read instead of that file
    for the `use:` and `rig:` files (an editor's unsaved buffers); `allow_outside_root`: let `use:` and `rig:`
    name files outside the project root (None: the SEQGEN_ALLOW_OUTSIDE environment variable decides)."""
    p = Path(path)
    # a file that cannot be read at all raises LoadError (carrying its finding)
    main = load_text(text, display or str(path)) if text is not None else load_file(p, display or _display(p))
    src = Sources(main, None)
    if not _check_top(main, src.findings, "seqgen", VERSION):
        return src
    src.findings += validate_document(main, SEQUENCE_SCHEMA)
    _load_uses(main, p.parent, [p.resolve()], src, allow_outside_root, texts or {})
    rig_text = main.data.get("rig")
    if isinstance(rig_text, str):
        rig_path = (p.parent / rig_text)
        refused = _rig_refused(main, rig_text, rig_path, p, allow_outside_root)
        if refused is not None:  # the use: root policy holds for the rig too
            src.findings.append(refused)
            return src
        src.findings += _absolute_path(main, ("rig",), rig_text, p.parent, p)
        try:
            rig = _read(rig_path, texts or {})
        except LoadError as exc:
            f = exc.finding
            if f.code == "schema.file-missing":
                f = make(FILE_MISSING, f"rig file '{rig_text}' not found (looked in {os.path.abspath(rig_path.parent)})",
                         main.pos(("rig",)), hint="rig paths are relative to the sequence file's folder")
            src.findings.append(f)
            return src
        if _check_top(rig, src.findings, "seqgen_rig", VERSION):
            src.findings += validate_document(rig, RIG_SCHEMA)
            src.rig = rig
    elif main.data.get("fragment") is True:
        src.findings.append(make(FRAGMENT, "fragment file: checked for syntax and schema; its params, blocks "
                                 "and physics are checked in the sequences that use it", main.pos(("fragment",))))
    elif "rig" not in main.data:
        src.findings.append(make(MISSING_KEY, "the sequence names no rig", main.pos(()),
                                 hint="add 'rig: rigs/<your rig>.yaml', or 'fragment: true' for a file of shared blocks"))
    return src

def _check_top(doc: Document, findings: list, key: str, code: str) -> bool:
    if doc.data is None:
        findings.append(make(EMPTY_SEQUENCE, "the file is empty", doc.pos(()), hint=f"start with '{key}: 1'"))
        return False
    if not isinstance(doc.data, dict):
        findings.append(make(WRONG_TYPE, "the file must be a YAML mapping", doc.pos(()), hint=f"start with '{key}: 1'"))
        return False
    if key not in doc.data:
        if key == "seqgen" and "seqgen_rig" in doc.data:  # a rig file where a sequence file is expected
            findings.append(make(code, "this is a rig file (seqgen_rig:), not a sequence file (seqgen:)",
                                 doc.pos(("seqgen_rig",)), hint="check a sequence file that names it ('rig: PATH'); "
                                 "'seqgen check' of the rig file itself validates it as a rig"))
            return False
        findings.append(make(code, f"missing '{key}:' version key", doc.pos(()), hint=f"add '{key}: 1' as the first line"))
        return False
    if doc.data[key] not in SUPPORTED_VERSIONS:
        findings.append(make(code, f"unsupported format version {key}: {doc.data[key]!r}", doc.pos((key,)),
                             hint=f"this seqgen reads version(s) {', '.join(map(str, SUPPORTED_VERSIONS))}"))
        return False
    return True


_ROOT_MARKERS = ("pyproject.toml", ".git", "seqgen.toml")


def project_root(top: Path) -> Path:
    """The nearest ancestor folder of the top-level sequence holding pyproject.toml, .git or seqgen.toml
    (else the sequence's own folder): `use:` may not leave it unless allowed."""
    for folder in top.parents:
        if any((folder / m).exists() for m in _ROOT_MARKERS):
            return folder
    return top.parent


def _outside_allowed(flag: bool | None) -> bool:
    if flag is not None:
        return bool(flag)
    return os.environ.get("SEQGEN_ALLOW_OUTSIDE", "").strip().lower() in ("1", "true", "yes")


def _rig_refused(main: Document, rig_text: str, rig_path: Path, top: Path,
                 allow_outside_root: bool | None) -> Finding | None:
    """The finding that refuses a `rig:` path outside the project root (or that cannot be resolved), else None."""
    if _outside_allowed(allow_outside_root):
        return None
    try:
        resolved, root = rig_path.resolve(), project_root(top.resolve())
    except (RuntimeError, OSError) as exc:  # a symlink loop (RuntimeError before Python 3.13)
        return make(FILE_MISSING, f"rig file '{rig_text}' cannot be read: {exc}", main.pos(("rig",)),
                    hint="the path is a symbolic link loop; fix the link")
    if resolved.is_relative_to(root):
        return None
    shown = _root_text(root)
    return make(RIG_OUTSIDE_ROOT, f"rig file '{rig_text}' is outside the project root {shown}", main.pos(("rig",)),
                hint="keep the rig file in the project (e.g. rigs/ beside the sequences), or allow it with "
                     "--allow-outside-root (or SEQGEN_ALLOW_OUTSIDE=1)")


def _absolute_path(doc: Document, path: tuple, text: str, folder: Path, top: Path) -> list[Finding]:
    """A warning for an absolute `rig:` / `use:` path inside the project, with its relative form.

    Outside the project an absolute path is refused (or explicitly allowed), so it is not repeated here."""
    if not os.path.isabs(text):
        return []
    try:
        if not Path(text).resolve().is_relative_to(project_root(Path(top).resolve())):
            return []
    except (RuntimeError, OSError):
        return []
    try:
        rel = os.path.relpath(text, folder)
    except ValueError:  # another drive (Windows): no relative form
        rel = None
    hint = f"write '{rel}' (relative to {_display(folder) or '.'})" if rel else "write the path relative to this file"
    return [make(ABSOLUTE_PATH, f"'{text}' is an absolute path: it works only where the project sits at this place",
                 doc.pos(path), hint=hint)]


def _root_text(root: Path) -> str:
    """The project root as a message names it: its path, and 'the current folder' when it is that."""
    shown = _display(root)
    text = f"'{root}' (the current folder)" if shown == "." else f"'{shown}'"
    if not any((root / m).exists() for m in _ROOT_MARKERS):
        text += " (the sequence's own folder: no folder above it holds a pyproject.toml, .git or seqgen.toml)"
    return text


def is_rig_document(doc: Document) -> bool:
    """A rig file (`seqgen_rig:` and no `seqgen:` key)."""
    return isinstance(doc.data, dict) and "seqgen_rig" in doc.data and "seqgen" not in doc.data


def check_rig_document(doc: Document) -> list[Finding]:
    """The findings of a rig file checked on its own: version, rig schema, then the rig builder; a note
    that says so (and how many devices and channels it has) when it builds."""
    findings: list[Finding] = []
    if not _check_top(doc, findings, "seqgen_rig", VERSION):
        return findings
    findings += validate_document(doc, RIG_SCHEMA)
    if any(f.severity == "error" for f in findings):
        return findings
    rig, rf = build_rig(doc)
    findings += rf
    if rig is not None and not any(f.severity == "error" for f in rf):
        findings.append(make(RIG_FILE, f"rig file checked on its own: {len(rig.devices)} device(s), "
                             f"{len(rig.channels)} channel(s), {len(rig.beams)} beam(s), {len(rig.coils)} coil(s)",
                             doc.pos(("seqgen_rig",)),
                             hint="check a sequence that names it ('rig: PATH') to preflight it with a timeline"))
    return findings


def _read(path: Path, texts: Mapping[Path, str]) -> Document:
    """The file at `path`, or the text given for it in `texts` (keyed by resolved path)."""
    if texts:
        try:
            given = texts.get(path.resolve())
        except (RuntimeError, OSError):  # a symlink loop: load_file says so
            given = None
        if given is not None:
            return load_text(given, _display(path))
    return load_file(path, _display(path))


def _load_uses(doc: Document, folder: Path, chain: list, src: Sources, allow_outside_root: bool | None = None,
               texts: Mapping[Path, str] | None = None) -> None:
    uses = doc.data.get("use") if isinstance(doc.data, dict) else None
    if not isinstance(uses, list):
        return
    root = project_root(chain[0])
    for i, entry in enumerate(uses):
        if not isinstance(entry, dict) or not isinstance(entry.get("file"), str):
            continue
        target = (folder / entry["file"])
        try:
            resolved = target.resolve()
        except (RuntimeError, OSError) as exc:  # a symlink loop (RuntimeError before Python 3.13)
            src.findings.append(make(FILE_MISSING, f"used file '{entry['file']}' cannot be read: {exc}",
                                     doc.pos(("use", i, "file")), hint="the path is a symbolic link loop; fix the link"))
            continue
        if not resolved.is_relative_to(root) and not _outside_allowed(allow_outside_root):
            shown = _root_text(root)
            src.findings.append(make(USE_OUTSIDE_ROOT, f"used file '{entry['file']}' is outside the project root {shown}",
                                     doc.pos(("use", i, "file")),
                                     hint="move the file into the project, or allow it with --allow-outside-root "
                                          "(or SEQGEN_ALLOW_OUTSIDE=1)"))
            continue
        src.findings += _absolute_path(doc, ("use", i, "file"), entry["file"], folder, chain[0])
        if resolved in chain:
            names = " -> ".join(_display(c) for c in chain + [resolved])
            src.findings.append(make(USE_CYCLE, f"use cycle: {names}", doc.pos(("use", i, "file")),
                                     hint="remove one of the use: entries in the chain"))
            continue
        try:
            used = _read(target, texts or {})
        except LoadError as exc:
            f = exc.finding
            if f.code == "schema.file-missing":
                f = make(FILE_MISSING, f"used file '{entry['file']}' not found (looked in "
                         f"{os.path.abspath(target.parent)})",
                         doc.pos(("use", i, "file")), hint="use: paths are relative to the folder of the file that "
                                                          "uses them")
            src.findings.append(f)
            continue
        if not _check_top(used, src.findings, "seqgen", VERSION):
            continue
        src.findings += validate_document(used, SEQUENCE_SCHEMA)
        _load_uses(used, target.parent, chain + [resolved], src, allow_outside_root, texts)
        src.used.append((used, entry, doc, ("use", i)))
