"""Shared by the language-server tests: a real LSP client (pytest-lsp) talking to `python -m seqgen
language-server` over stdio, started in a given working folder with this checkout first on PYTHONPATH, and
small helpers to open, edit and wait for diagnostics. Edits are applied to the text here, by LSP's rules
(0-based lines, UTF-16 characters; the demos are ASCII), not by seqgen code."""

from __future__ import annotations

import asyncio
import os
import sys
from pathlib import Path

from lsprotocol import types as lsp
from pygls.uris import from_fs_path
from pytest_lsp import make_test_lsp_client

from .conftest import ROOT

WAIT_S = 60.0


async def start(cwd: Path):
    """A client connected to a fresh server running in `cwd` (the project root, as for `seqgen check`)."""
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT)] + [p for p in os.environ.get("PYTHONPATH", "")
                                                                        .split(os.pathsep) if p]))
    client = make_test_lsp_client()
    await client.start_io(sys.executable, "-m", "seqgen", "language-server", env=env, cwd=str(cwd))
    await client.initialize_session(lsp.InitializeParams(capabilities=lsp.ClientCapabilities(),
                                                         root_uri=from_fs_path(str(cwd))))
    return client


async def stop(client) -> None:
    await client.shutdown_session()
    await client.stop()


def uri_of(path: Path) -> str:
    return from_fs_path(str(Path(path).resolve()))


async def wait_diagnostics(client, uri: str, timeout: float = WAIT_S) -> list:
    """The next diagnostics published for `uri` (call `forget(client, uri)` before the change that causes them)."""
    loop = asyncio.get_running_loop()
    end = loop.time() + timeout
    while uri not in client.diagnostics:
        if loop.time() > end:
            raise AssertionError(f"no diagnostics for {uri} within {timeout} s")
        await asyncio.sleep(0.02)
    return list(client.diagnostics[uri])


def forget(client, uri: str) -> None:
    client.diagnostics.pop(uri, None)


class Doc:
    """An open document: its text as the client holds it, and its version."""

    def __init__(self, client, path: Path, text: str | None = None):
        self.client, self.path, self.uri = client, Path(path), uri_of(path)
        self.text = Path(path).read_text(encoding="utf-8") if text is None else text
        self.version = 1

    async def open(self) -> list:
        forget(self.client, self.uri)
        self.client.text_document_did_open(lsp.DidOpenTextDocumentParams(text_document=lsp.TextDocumentItem(
            uri=self.uri, language_id="yaml", version=self.version, text=self.text)))
        return await wait_diagnostics(self.client, self.uri)

    def send(self, changes: list) -> None:
        """didChange with incremental `changes` [(start_line, start_char, end_line, end_char, text)], each
        applied to the text here too."""
        events = []
        for sl, sc, el, ec, new in changes:
            lines = self.text.split("\n")
            a = sum(len(x) + 1 for x in lines[:sl]) + sc
            b = sum(len(x) + 1 for x in lines[:el]) + ec
            self.text = self.text[:a] + new + self.text[b:]
            events.append(lsp.TextDocumentContentChangePartial(
                range=lsp.Range(start=lsp.Position(line=sl, character=sc), end=lsp.Position(line=el, character=ec)),
                text=new))
        self.version += 1
        self.client.text_document_did_change(lsp.DidChangeTextDocumentParams(
            text_document=lsp.VersionedTextDocumentIdentifier(uri=self.uri, version=self.version),
            content_changes=events))

    async def replace_all(self, text: str) -> list:
        """Send the whole new text as one change and wait for its diagnostics."""
        forget(self.client, self.uri)
        lines = self.text.split("\n")
        self.send([(0, 0, len(lines) - 1, len(lines[-1]), text)])
        return await wait_diagnostics(self.client, self.uri)

    async def edit(self, old: str, new: str) -> list:
        assert self.text.count(old) == 1, old
        return await self.replace_all(self.text.replace(old, new))

    def close(self) -> None:
        self.client.text_document_did_close(lsp.DidCloseTextDocumentParams(
            text_document=lsp.TextDocumentIdentifier(uri=self.uri)))


def apply_text_edits(text: str, edits) -> str:
    """`text` with LSP TextEdits applied (last first, so earlier offsets hold)."""
    def offset(pos):
        lines = text.split("\n")
        return sum(len(x) + 1 for x in lines[:pos.line]) + pos.character

    for e in sorted(edits, key=lambda e: (e.range.start.line, e.range.start.character), reverse=True):
        text = text[:offset(e.range.start)] + e.new_text + text[offset(e.range.end):]
    return text
