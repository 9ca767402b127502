"""`seqgen language-server`: the pygls wiring of the language server (stdio).

Only protocol here (the safety caution goes to the client's log at start and rides in every diagnostic's
data): what a check finds is `session.analyse`, how it shows is `diagnostics`, what can be done
about it `actions`. Checks run on one worker thread, in order, so the event loop answers every request
meanwhile; typing is debounced (DEBOUNCE_S after the last change), a save checks at once. A check that
raises, or a request whose handler raises, is logged to the client (window/logMessage) and answered with
nothing rather than ending the server.

Completion, hover and definition are the plain functions of `complete`, `hover` and `definition`, called
with the open document's unsaved text; hover also gets the Result of the document's latest check when that
check read the text as it is now (`current_result`). Positions are converted between the client's code units
and the text's characters here, so those functions count characters of the line.
"""

from __future__ import annotations

import asyncio
import functools
import sys
import traceback
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

from lsprotocol import types as lsp
from pygls.lsp.server import LanguageServer
from pygls.uris import from_fs_path, to_fs_path

from ..caution import CAUTION
from ..pipeline import Result
from ..resolve.sources import is_rig_document
from ..version import __version__
from . import session as ses
from .actions import Action, actions_for
from .complete import completions
from .definition import definition
from .diagnostics import SOURCE, Diagnostic
from .features import Completion, Span
from .hover import hover

DEBOUNCE_S = 0.3  # after the last keystroke: a burst of typing is checked once
WATCHED = ("**/*.yaml", "**/*.yml")


class SeqgenServer(LanguageServer):
    """The server and its state: the session, the pending checks, the one checking thread."""

    def __init__(self) -> None:
        super().__init__("seqgen", __version__, text_document_sync_kind=lsp.TextDocumentSyncKind.Incremental)
        self.session = ses.Session()
        self.pending: dict = {}  # resolved path -> asyncio task of its next check
        self.worker = ThreadPoolExecutor(max_workers=1, thread_name_prefix="seqgen-check")
        self.published: set = set()  # resolved paths shown with diagnostics (cleared when they have none)


def path_of(uri: str) -> Path | None:
    fs = to_fs_path(uri)
    return ses.file_of(fs) if fs else None


def document(ls: SeqgenServer, uri: str) -> ses.OpenDocument | None:
    """The open document at `uri` (path, uri, text, version), or None."""
    p = path_of(uri)
    return ls.session.docs.get(p) if p is not None else None


def latest_result(ls: SeqgenServer, uri: str) -> Result | None:
    """The Result of the latest check of the document at `uri` that resolved a shot (else its latest), or None."""
    p = path_of(uri)
    return ses.latest_result(ls.session, p) if p is not None else None


def current_result(ls: SeqgenServer, uri: str) -> Result | None:
    """`latest_result` when its check read the document's text as it is now, else None (positions moved)."""
    doc = document(ls, uri)
    own = ls.session.analyses.get(doc.path) if doc is not None else None
    if own is None or own.version != doc.version:
        return None
    return latest_result(ls, uri)


def log(ls: SeqgenServer, message: str, kind: lsp.MessageType = lsp.MessageType.Error) -> None:
    try:
        ls.window_log_message(lsp.LogMessageParams(type=kind, message=message))
    except Exception:  # the client is gone: nothing to tell
        pass


def guarded(default=None):
    """Answer a request (or take a notification) without ever raising: an error is logged to the client."""
    def wrap(fn):
        @functools.wraps(fn)
        def run(ls, params):
            try:
                return fn(ls, params)
            except Exception:
                log(ls, f"seqgen: {fn.__name__} failed:\n{traceback.format_exc()}")
                return default
        return run
    return wrap


# ------------------------------------------------------------------------------------------------ checking


def schedule(ls: SeqgenServer, path: Path, delay: float = DEBOUNCE_S, every_shot: bool = False) -> None:
    """Check `path` after `delay` (a newer request for the same document replaces a pending one); `every_shot`:
    each shot of a scan (on open and save), else its base shot (while typing)."""
    old = ls.pending.pop(path, None)
    if old is not None and not old.done():
        old.cancel()
    ls.pending[path] = asyncio.get_running_loop().create_task(_check_later(ls, path, delay, every_shot))


def schedule_with_users(ls: SeqgenServer, path: Path, delay: float = DEBOUNCE_S, every_shot: bool = False) -> None:
    """Check `path` (when open) and every open sequence whose last check read it (its rig, a `use:` file)."""
    if path in ls.session.docs:
        schedule(ls, path, delay, every_shot)
    for user in ls.session.users_of(path):
        schedule(ls, user, delay, every_shot)


async def _check_later(ls: SeqgenServer, path: Path, delay: float, every_shot: bool) -> None:
    try:
        if delay:
            await asyncio.sleep(delay)
        doc = ls.session.docs.get(path)
        if doc is None:
            return
        texts = ls.session.texts()
        loop = asyncio.get_running_loop()
        analysis = await loop.run_in_executor(ls.worker, ses.analyse, path, doc.text, doc.version, texts, every_shot)
        before = ls.session.analyses.get(path)
        if ls.session.store(analysis):
            publish(ls, set(analysis.diagnostics) | set(before.diagnostics if before else ()) | {path})
    except asyncio.CancelledError:
        pass
    except Exception:
        log(ls, f"seqgen: checking {path} failed:\n{traceback.format_exc()}")
    finally:
        if ls.pending.get(path) is asyncio.current_task():
            del ls.pending[path]


def _lines(ls: SeqgenServer, path: Path) -> list:
    doc = ls.session.docs.get(path)
    if doc is not None:
        return doc.text.split("\n")
    try:
        return path.read_text(encoding="utf-8").split("\n")
    except (OSError, UnicodeDecodeError):
        return []


def _position(ls: SeqgenServer, lines: list, line: int, char: int) -> lsp.Position:
    if 0 <= line < len(lines):
        return ls.workspace.position_codec.position_to_client_units(lines, lsp.Position(line=line, character=char))
    return lsp.Position(line=max(line, 0), character=0)


def _range(ls: SeqgenServer, lines: list, line: int, start: int, end: int, end_line: int | None = None) -> lsp.Range:
    return lsp.Range(start=_position(ls, lines, line, start),
                     end=_position(ls, lines, line if end_line is None else end_line, end))


def to_lsp(ls: SeqgenServer, d: Diagnostic, lines: list) -> lsp.Diagnostic:
    related = []
    for r in d.related:
        p = ses.file_of(r.file)
        rl = lines if p == ses.file_of(d.file) else _lines(ls, p)
        related.append(lsp.DiagnosticRelatedInformation(
            location=lsp.Location(uri=from_fs_path(str(p)), range=_range(ls, rl, r.line, r.character, r.character)),
            message=r.message))
    data = {"finding": d.finding.to_dict(), "caution": CAUTION} if d.finding is not None else {"caution": CAUTION}
    return lsp.Diagnostic(range=_range(ls, lines, d.line, d.start, d.end), message=d.message,
                          severity=lsp.DiagnosticSeverity(d.severity), code=d.code, source=SOURCE,
                          related_information=related or None, data=data)


def publish(ls: SeqgenServer, targets) -> None:
    """Send the diagnostics every open document's last check shows in each of `targets` (none: cleared)."""
    for target in targets:
        found = ls.session.diagnostics_for(target)
        if not found and target not in ls.published and target not in ls.session.docs:
            continue  # nothing was ever shown there
        lines = _lines(ls, target)
        diags = [to_lsp(ls, d, lines) for d in found]
        doc = ls.session.docs.get(target)
        ls.text_document_publish_diagnostics(lsp.PublishDiagnosticsParams(
            uri=doc.uri if doc is not None else from_fs_path(str(target)), diagnostics=diags,
            version=doc.version if doc is not None else None))
        (ls.published.add if diags else ls.published.discard)(target)


# ------------------------------------------------------------------------------------------------ features


def create_server() -> SeqgenServer:
    server = SeqgenServer()

    @server.feature(lsp.INITIALIZED)
    async def initialized(ls: SeqgenServer, params: lsp.InitializedParams) -> None:
        log(ls, f"seqgen {__version__} language server; caution: {CAUTION}", lsp.MessageType.Info)
        caps = ls.client_capabilities.workspace
        watched = caps.did_change_watched_files if caps is not None else None
        if watched is None or not watched.dynamic_registration:
            return
        try:  # sequences see a rig or use: file saved by another program
            await ls.client_register_capability_async(lsp.RegistrationParams(registrations=[lsp.Registration(
                id="seqgen-watch", method=lsp.WORKSPACE_DID_CHANGE_WATCHED_FILES,
                register_options=lsp.DidChangeWatchedFilesRegistrationOptions(
                    watchers=[lsp.FileSystemWatcher(glob_pattern=g) for g in WATCHED]))]))
        except Exception:
            log(ls, f"seqgen: could not watch files:\n{traceback.format_exc()}", lsp.MessageType.Warning)

    @server.feature(lsp.TEXT_DOCUMENT_DID_OPEN)
    @guarded()
    def did_open(ls: SeqgenServer, params: lsp.DidOpenTextDocumentParams) -> None:
        p = path_of(params.text_document.uri)
        if p is None:
            return
        ls.session.open(p, params.text_document.uri, params.text_document.text, params.text_document.version)
        schedule(ls, p, 0.0, every_shot=True)

    @server.feature(lsp.TEXT_DOCUMENT_DID_CHANGE)
    @guarded()
    def did_change(ls: SeqgenServer, params: lsp.DidChangeTextDocumentParams) -> None:
        p = path_of(params.text_document.uri)
        if p is None:
            return
        text = ls.workspace.get_text_document(params.text_document.uri).source
        ls.session.change(p, text, params.text_document.version)
        schedule_with_users(ls, p)

    @server.feature(lsp.TEXT_DOCUMENT_DID_SAVE)
    @guarded()
    def did_save(ls: SeqgenServer, params: lsp.DidSaveTextDocumentParams) -> None:
        p = path_of(params.text_document.uri)
        if p is not None:
            schedule_with_users(ls, p, 0.0, every_shot=True)

    @server.feature(lsp.TEXT_DOCUMENT_DID_CLOSE)
    @guarded()
    def did_close(ls: SeqgenServer, params: lsp.DidCloseTextDocumentParams) -> None:
        p = path_of(params.text_document.uri)
        if p is None:
            return
        old = ls.session.analyses.get(p)
        task = ls.pending.pop(p, None)
        if task is not None:
            task.cancel()
        ls.session.close(p)
        publish(ls, (set(old.diagnostics) if old else set()) | {p})
        for user in ls.session.users_of(p):  # they read the file from disk again
            schedule(ls, user, 0.0, every_shot=True)

    @server.feature(lsp.WORKSPACE_DID_CHANGE_WATCHED_FILES)
    @guarded()
    def did_change_watched(ls: SeqgenServer, params: lsp.DidChangeWatchedFilesParams) -> None:
        for change in params.changes:
            p = path_of(change.uri)
            if p is not None and p not in ls.session.docs:  # an open document's buffer wins over the file
                for user in ls.session.users_of(p):
                    schedule(ls, user, 0.0, every_shot=True)

    @server.feature(lsp.TEXT_DOCUMENT_CODE_ACTION,
                    lsp.CodeActionOptions(code_action_kinds=[lsp.CodeActionKind.QuickFix]))
    @guarded(default=[])
    def code_action(ls: SeqgenServer, params: lsp.CodeActionParams) -> list:
        p = path_of(params.text_document.uri)
        doc = ls.session.docs.get(p) if p is not None else None
        if doc is None:
            return []
        lo, hi = params.range.start.line, params.range.end.line
        shown = [d for d in ls.session.diagnostics_for(p) if lo <= d.line <= hi and d.finding is not None]
        own = ls.session.analyses.get(p)
        is_sequence = own is not None and own.result.sources is not None and not _is_rig(own.result)
        lines = doc.text.split("\n")
        out = []
        for d in shown:
            for a in actions_for([d.finding], lambda name: _lines(ls, ses.file_of(name)), ses.display(p), lines):
                if a.title.startswith("Accept") and not is_sequence:
                    continue
                out.append(_code_action(ls, a, to_lsp(ls, d, lines)))
        return out

    @server.feature(lsp.TEXT_DOCUMENT_COMPLETION,
                    lsp.CompletionOptions(trigger_characters=[":", " ", "[", ",", "{", "(", "+", "-", "*", "/"]))
    @guarded(default=None)
    def completion(ls: SeqgenServer, params: lsp.CompletionParams):
        doc = document(ls, params.text_document.uri)
        if doc is None:
            return None
        lines = doc.text.split("\n")
        pos = _from_client(ls, lines, params.position)
        items = [_completion_item(c) for c in completions(doc.text, doc.path, pos.line, pos.character)]
        return lsp.CompletionList(is_incomplete=False, items=items)

    @server.feature(lsp.TEXT_DOCUMENT_HOVER)
    @guarded(default=None)
    def on_hover(ls: SeqgenServer, params: lsp.HoverParams):
        doc = document(ls, params.text_document.uri)
        if doc is None:
            return None
        lines = doc.text.split("\n")
        pos = _from_client(ls, lines, params.position)
        found = hover(doc.text, doc.path, pos.line, pos.character, current_result(ls, params.text_document.uri))
        if found is None:
            return None
        # a hover is an output like any other: it carries the safety caution
        text = f"{found.markdown}\n\n---\n*Caution: {CAUTION}*"
        return lsp.Hover(contents=lsp.MarkupContent(kind=lsp.MarkupKind.Markdown, value=text),
                         range=_span(ls, lines, found.span) if found.span is not None else None)

    @server.feature(lsp.TEXT_DOCUMENT_DEFINITION)
    @guarded(default=None)
    def on_definition(ls: SeqgenServer, params: lsp.DefinitionParams):
        doc = document(ls, params.text_document.uri)
        if doc is None:
            return None
        pos = _from_client(ls, doc.text.split("\n"), params.position)
        out = []
        for t in definition(doc.text, doc.path, pos.line, pos.character):
            p = ses.file_of(t.path)
            other = ls.session.docs.get(p)
            out.append(lsp.Location(uri=other.uri if other is not None else from_fs_path(str(p)),
                                    range=_span(ls, _lines(ls, p), t.span)))
        return out or None

    return server


_KIND = {"key": lsp.CompletionItemKind.Property, "action": lsp.CompletionItemKind.Function,
         "rig-name": lsp.CompletionItemKind.Reference, "block": lsp.CompletionItemKind.Module,
         "param": lsp.CompletionItemKind.Variable, "function": lsp.CompletionItemKind.Function,
         "unit": lsp.CompletionItemKind.Unit, "value": lsp.CompletionItemKind.EnumMember}


def _completion_item(c: Completion) -> lsp.CompletionItem:
    doc = lsp.MarkupContent(kind=lsp.MarkupKind.Markdown, value=c.documentation) if c.documentation else None
    return lsp.CompletionItem(label=c.label, kind=_KIND.get(c.kind, lsp.CompletionItemKind.Text),
                              detail=c.detail or None, documentation=doc, insert_text=c.insert_text)


def _from_client(ls: SeqgenServer, lines: list, position: lsp.Position) -> lsp.Position:
    """A client position (its code units) as a line and a character index of the text."""
    if 0 <= position.line < len(lines):
        return ls.workspace.position_codec.position_from_client_units(lines, position)
    return position


def _span(ls: SeqgenServer, lines: list, span: Span) -> lsp.Range:
    return _range(ls, lines, span.line, span.character, span.end_character, span.end_line)


def _is_rig(result: Result) -> bool:
    return is_rig_document(result.sources.main)


def _code_action(ls: SeqgenServer, a: Action, diag: lsp.Diagnostic) -> lsp.CodeAction:
    changes: dict = {}
    for e in a.edits:
        p = ses.file_of(e.file)
        lines = _lines(ls, p)
        doc = ls.session.docs.get(p)
        uri = doc.uri if doc is not None else from_fs_path(str(p))
        changes.setdefault(uri, []).append(lsp.TextEdit(
            range=_range(ls, lines, e.start_line, e.start_char, e.end_char, e.end_line), new_text=e.text))
    return lsp.CodeAction(title=a.title, kind=lsp.CodeActionKind.QuickFix, diagnostics=[diag],
                          edit=lsp.WorkspaceEdit(changes=changes), is_preferred=a.preferred or None)


def main() -> int:
    """Serve over stdio until the client says exit. stdout carries the protocol alone: anything printed
    meanwhile goes to stderr, which editors show as the server's log."""
    stdin, stdout = sys.stdin.buffer, sys.stdout.buffer
    sys.stdout = sys.stderr
    create_server().start_io(stdin, stdout)
    return 0
