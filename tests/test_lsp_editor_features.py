"""Completion, hover and go to definition end to end: a real LSP client (pytest-lsp) over stdio against
`python -m seqgen language-server`, on the thermometry demo. Expected names and times come from the files
themselves (read with PyYAML) and from `seqgen show --json`, not from the server."""

from __future__ import annotations

import io
import json
from contextlib import redirect_stdout

import pytest

pytest.importorskip("pytest_lsp")

import yaml  # noqa: E402
from lsprotocol import types as lsp  # noqa: E402

from seqgen.cli import main  # noqa: E402

from .lsp_client import Doc, uri_of  # noqa: E402

THERMO = "sequences/na23_thermometry.yaml"
RIG = "sequences/rigs/na23_demo_rig.yaml"


def _show(path) -> list:
    out = io.StringIO()
    with redirect_stdout(out):
        main(["show", str(path), "--json"])
    return json.loads(out.getvalue())["timeline"]


def _at(text: str, needle: str, offset: int = 0) -> lsp.Position:
    """The position of `needle` (its first character, plus `offset`) in `text`."""
    for i, line in enumerate(text.split("\n")):
        j = line.find(needle)
        if j >= 0:
            return lsp.Position(line=i, character=j + offset)
    raise AssertionError(needle)


def _id(uri: str) -> lsp.TextDocumentIdentifier:
    return lsp.TextDocumentIdentifier(uri=uri)


@pytest.mark.asyncio
async def test_completion_offers_the_rigs_channels_and_the_files_blocks(client, project):
    rig = yaml.safe_load((project / RIG).read_text(encoding="utf-8"))
    doc = Doc(client, project / THERMO)
    await doc.open()
    # a channel name after `channel: ` inside a set
    await doc.edit("      - set: {channel: probe_shutter, value: 0}", "      - set: {channel: , value: 0}")
    pos = _at(doc.text, "{channel: , value: 0}", len("{channel: "))
    got = await client.text_document_completion_async(lsp.CompletionParams(text_document=_id(doc.uri), position=pos))
    labels = {i.label for i in (got.items if isinstance(got, lsp.CompletionList) else got)}
    assert {"probe_shutter", "camera", "cross_a_power"} <= labels and set(rig["channels"]) & labels
    # a block name after `after:`
    await doc.edit("    after: release + tof", "    after: ")
    line = doc.text.split("\n").index("    after: ")  # the image block's anchor, now empty
    pos = lsp.Position(line=line, character=len("    after: "))
    got = await client.text_document_completion_async(lsp.CompletionParams(text_document=_id(doc.uri), position=pos))
    labels = {i.label for i in (got.items if isinstance(got, lsp.CompletionList) else got)}
    seq = yaml.safe_load((project / THERMO).read_text(encoding="utf-8"))
    assert {b["name"] for b in seq["blocks"]} - {"image"} <= labels


@pytest.mark.asyncio
async def test_hover_on_a_block_shows_its_resolved_start(client, project):
    doc = Doc(client, project / THERMO)
    await doc.open()
    starts = [row["start"] for row in _show(project / THERMO) if row["block"] == "image"]
    pos = _at(doc.text, "name: image", len("name: ") + 1)
    got = await client.text_document_hover_async(lsp.HoverParams(text_document=_id(doc.uri), position=pos))
    assert got is not None and starts and starts[0] in got.contents.value


@pytest.mark.asyncio
async def test_definition_of_an_anchor_and_of_the_rig_path(client, project):
    doc = Doc(client, project / THERMO)
    await doc.open()
    pos = _at(doc.text, "after: release + tof", len("after: ") + 2)
    got = await client.text_document_definition_async(lsp.DefinitionParams(text_document=_id(doc.uri), position=pos))
    assert got and got[0].uri == doc.uri
    assert got[0].range.start.line == _at(doc.text, "- name: release").line
    pos = _at(doc.text, "rig: rigs/", len("rig: ") + 3)
    got = await client.text_document_definition_async(lsp.DefinitionParams(text_document=_id(doc.uri), position=pos))
    assert got and got[0].uri == uri_of(project / RIG)


@pytest.mark.asyncio
async def test_requests_on_a_broken_document_are_answered(client, project):
    doc = Doc(client, project / THERMO)
    await doc.open()
    await doc.replace_all("blocks:\n  - name: [\n\t- :\n")
    for line in range(4):
        for char in range(6):
            pos = lsp.Position(line=line, character=char)
            await client.text_document_completion_async(lsp.CompletionParams(text_document=_id(doc.uri), position=pos))
            await client.text_document_hover_async(lsp.HoverParams(text_document=_id(doc.uri), position=pos))
            await client.text_document_definition_async(lsp.DefinitionParams(text_document=_id(doc.uri), position=pos))
    # and the server still works on a sound text
    diags = await doc.replace_all((project / THERMO).read_text(encoding="utf-8"))
    assert not [d for d in diags if d.severity == lsp.DiagnosticSeverity.Error]
