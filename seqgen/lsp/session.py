"""The language server's state: open documents, the latest analysis of each, which files each analysis read.

No LSP here: documents are keyed by resolved path, and `analyse` is a plain function of a path, its text and
the texts of the other open documents (unsaved buffers win over the files on disk), run by the server on
one worker thread. What is kept warm between checks is the process itself: the loaded modules, pint's
registry, species data and the content-keyed caches of `seqgen.pipeline.clear_shared_caches`, so a check
after a one-character edit costs about one resolve, check and compile of the shot.

A sequence file is checked as `seqgen check FILE` checks it: while typing, a scan's base shot (each scanned
param at its `value:`, as `check --watch` and `show` do) and the scan's expansion findings; on open and save
also its other shots (a scan of at most EVERY_SHOT_LIMIT shots), a finding only they raise named with the
shot's values. A rig file on its own is checked as `seqgen check RIG` does.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Mapping

from ..findings import sort_findings
from ..load.yamlsrc import Document, LoadError
from ..pipeline import Result, preflight
from ..resolve.sources import Sources, check_rig_document, is_rig_document, load_sources
from ..scan.plan import has_scans, plan_scan, values_text
from ..scan.run import run_scan
from .diagnostics import Diagnostic, mirrored, to_diagnostics


EVERY_SHOT_LIMIT = 16  # on open and save a scan of at most this many shots is checked shot by shot


def display(path: Path) -> str:
    """A file as findings name it: relative to the working folder when inside it (as `seqgen check` does)."""
    try:
        return str(path.resolve().relative_to(Path.cwd().resolve()))
    except (ValueError, RuntimeError, OSError):
        return str(path)


def file_of(name: str) -> Path:
    """The resolved path of a file a finding names (`display` the other way)."""
    p = Path(name)
    try:
        return (p if p.is_absolute() else Path.cwd() / p).resolve()
    except (RuntimeError, OSError):
        return Path(os.path.abspath(p))


@dataclass(frozen=True)
class Analysis:
    """One check of one document: its Result, the files it read besides itself, and its diagnostics by file."""
    path: Path
    version: int
    result: Result
    reads: frozenset  # resolved paths of the use: files and the rig
    diagnostics: Mapping  # resolved path -> tuple of Diagnostic


@dataclass
class OpenDocument:
    path: Path
    uri: str
    text: str
    version: int = 0


@dataclass
class Session:
    """Open documents and what their last checks found; the server owns one."""
    docs: dict = field(default_factory=dict)  # resolved path -> OpenDocument
    analyses: dict = field(default_factory=dict)  # resolved path -> latest Analysis
    results: dict = field(default_factory=dict)  # resolved path -> latest Result that has a shot

    def open(self, path: Path, uri: str, text: str, version: int = 0) -> None:
        self.docs[path] = OpenDocument(path, uri, text, version)

    def change(self, path: Path, text: str, version: int) -> None:
        doc = self.docs.get(path)
        if doc is not None:
            doc.text, doc.version = text, version

    def close(self, path: Path) -> None:
        self.docs.pop(path, None)
        self.analyses.pop(path, None)
        self.results.pop(path, None)

    def texts(self) -> dict:
        """Resolved path -> text of every open document (what the loader reads instead of the file)."""
        return {p: d.text for p, d in self.docs.items()}

    def store(self, analysis: Analysis) -> bool:
        """Keep an analysis unless the document closed or changed since it was taken (False: dropped)."""
        doc = self.docs.get(analysis.path)
        if doc is None or doc.version != analysis.version:
            return False
        self.analyses[analysis.path] = analysis
        if analysis.result.shot is not None or analysis.path not in self.results:
            self.results[analysis.path] = analysis.result
        return True

    def users_of(self, path: Path) -> list:
        """The open documents whose last check read `path` (a sequence using a rig or a `use:` file)."""
        return [p for p, a in self.analyses.items() if path in a.reads and p != path and p in self.docs]

    def diagnostics_for(self, target: Path) -> list:
        """What every open document's last check shows in `target` (each shown once)."""
        seen, out = set(), []
        for a in self.analyses.values():
            for d in a.diagnostics.get(target, ()):
                key = (d.line, d.start, d.code, d.message)
                if key not in seen:
                    seen.add(key)
                    out.append(d)
        return out

    def targets(self) -> set:
        return {t for a in self.analyses.values() for t in a.diagnostics}


def latest_result(session: Session, path: Path) -> Result | None:
    """The Result of the document's latest check that resolved a shot (else its latest check), or None."""
    return session.results.get(path)


def _lines(name: str, texts: Mapping[Path, str], cache: dict) -> list | None:
    if name not in cache:
        p = file_of(name)
        text = texts.get(p)
        if text is None:
            try:
                text = p.read_text(encoding="utf-8")
            except (OSError, UnicodeDecodeError):
                text = None
        cache[name] = text.split("\n") if text is not None else None
    return cache[name]


def _check(path: Path, text: str, texts: Mapping[Path, str], every_shot: bool) -> tuple[Result, Sources | None]:
    name = display(path)
    try:
        src = load_sources(path, text=text, display=name, texts=texts)
    except LoadError as exc:
        return Result(findings=[exc.finding]), None
    if is_rig_document(src.main):  # a rig on its own
        return Result(findings=sort_findings(check_rig_document(src.main)), sources=src), src
    res = preflight(path, sources=src)
    if has_scans(src):  # the base shot above; the scan's expansion findings (and its other shots) here
        scan = plan_scan(path, sources=src)
        extra = list(scan.findings)
        if every_shot and scan.plan is not None and len(scan.plan) <= EVERY_SHOT_LIMIT:
            extra += _other_shots(run_scan(scan, jobs=1), res.findings)
        if extra:
            res = Result(res.shot, res.compiled, sort_findings(list(res.findings) + extra), src)
    return res, src


def _other_shots(scan, base: list) -> list:
    """Findings of the scan's shots at places where the base shot has none of that code, each once, saying
    which shot (its values) raised it."""
    seen = {(f.code, f.file, f.line, f.column) for f in base}
    out = []
    for shot in scan.shots:
        for f in shot.findings:
            key = (f.code, f.file, f.line, f.column)
            if key not in seen:
                seen.add(key)
                values = values_text(scan.plan.names, shot.values)
                out.append(replace(f, message=f"shot {shot.index} ({values}): {f.message}"))
    return out


def _anchors(src: Sources | None, path: Path) -> dict:
    """Display name of each file the sequence reads -> the place of the `rig:` / `use:` key that leads to it."""
    if src is None or not isinstance(src.main.data, dict):
        return {}
    main = src.main
    out = {}
    rig = main.data.get("rig")
    if isinstance(rig, str):
        out[display(path.parent / rig)] = main.pos(("rig",))
    uses = main.data.get("use")
    for i, entry in enumerate(uses if isinstance(uses, list) else ()):
        if isinstance(entry, dict) and isinstance(entry.get("file"), str):
            out[display(path.parent / entry["file"])] = main.pos(("use", i, "file"))
    for _ in range(len(src.used)):  # nested uses lead back through the file that uses them
        for used, _entry, parent, _p in src.used:
            if used.file not in out and parent.file in out:
                out[used.file] = out[parent.file]
    return out


def _names(src: Sources | None) -> dict:
    """Block, param and rig device name -> its place, for the members of a cycle and "both" findings."""
    if src is None:
        return {}
    docs: list[Document] = [src.main] + [d for d, *_ in src.used] + ([src.rig] if src.rig is not None else [])
    out = {}
    for doc in docs:
        data = doc.data if isinstance(doc.data, dict) else {}
        for i, b in enumerate(data.get("blocks") if isinstance(data.get("blocks"), list) else ()):
            if isinstance(b, dict) and isinstance(b.get("name"), str):
                out.setdefault(b["name"], doc.pos(("blocks", i, "name")))
        for key in ("params", "devices"):
            for name in (data.get(key) if isinstance(data.get(key), dict) else {}):
                out.setdefault(str(name), doc.pos((key, name)))
    return out


def analyse(path: Path, text: str, version: int, texts: Mapping[Path, str], every_shot: bool = False) -> Analysis:
    """Check the document `path` as written in `text` (the other open documents' texts in `texts`); a scan's
    base shot, or with `every_shot` each of its shots (up to EVERY_SHOT_LIMIT), as `seqgen check` does."""
    res, src = _check(path, text, texts, every_shot)
    reads = set()
    if src is not None:
        reads |= {file_of(d.file) for d, *_ in src.used}
        if src.rig is not None:
            reads.add(file_of(src.rig.file))
    anchors = _anchors(src, path)
    reads |= {file_of(name) for name in anchors}
    own = display(path)
    cache = {own: text.split("\n")}
    by_file: dict[Path, list[Diagnostic]] = {}
    for d in to_diagnostics(res.findings, lambda name: _lines(name, texts, cache), _names(src)):
        target = path if d.file in (own, "") else file_of(d.file)
        by_file.setdefault(target, []).append(d)
        at = anchors.get(d.file) if target != path else None
        if at is not None:
            by_file.setdefault(path, []).append(mirrored(d, own, at.line, at.column, cache[own]))
    return Analysis(path, version, res, frozenset(reads), {k: tuple(v) for k, v in by_file.items()})
