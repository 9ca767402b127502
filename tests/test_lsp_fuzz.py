"""The language server under random edits: 2 000 seeded insertions and deletions of characters and lines of the
barrier demo, sent as incremental didChange events in batches; after each batch a code-action request on a
random line must be answered, every few batches the diagnostics of the text as it then stands must arrive,
and at the end, with the demo's text restored, the diagnostics must be those of the untouched demo (the
server's copy of the text stayed in step through every edit)."""

from __future__ import annotations

import random
from pathlib import Path

import pytest

pytest.importorskip("pytest_lsp")

from lsprotocol import types as lsp  # noqa: E402

from .lsp_client import Doc, forget, wait_diagnostics  # noqa: E402

EDITS = 2000
BATCH = 50
SEED = 20261204
SCATTER = "sequences/na23_barrier_scatter.yaml"
# characters that matter to YAML and to seqgen's expressions, and plain ones (all in the BMP: one UTF-16 unit)
ALPHABET = list("abcxyz_019.:- {}[],#'\"&*!|>%@`\t\n+/()") + ["\u00b5", "\u00e9", "ms", "W", " s"]


def random_edit(rng: random.Random, text: str, pool: list) -> tuple:
    """One edit (start_line, start_char, end_line, end_char, new text) of `text`."""
    lines = text.split("\n")
    i = rng.randrange(len(lines))
    j = rng.randint(0, len(lines[i]))
    kind = rng.random()
    if kind < 0.45:  # insert characters
        return (i, j, i, j, "".join(rng.choice(ALPHABET) for _ in range(rng.randint(1, 3))))
    if kind < 0.75:  # delete a few characters, maybe across the line end
        if j == len(lines[i]) and i + 1 < len(lines):
            return (i, j, i + 1, 0, "")
        return (i, j, i, min(len(lines[i]), j + rng.randint(1, 4)), "")
    if kind < 0.85 and len(lines) > 1:  # delete a whole line
        return (i, 0, i + 1, 0, "") if i + 1 < len(lines) else (i - 1, len(lines[i - 1]), i, len(lines[i]), "")
    return (i, 0, i, 0, rng.choice(pool) + "\n")  # insert a line of the demo somewhere else


@pytest.mark.asyncio
async def test_random_edits_never_stop_the_server(client, project):
    rng = random.Random(SEED)
    doc = Doc(client, project / SCATTER)
    original = doc.text
    clean = await doc.open()
    pool = [x for x in original.split("\n") if x.strip()]
    sent = 0
    for batch in range(EDITS // BATCH):
        if batch % 10 == 9:  # now and then back to the demo, so edits keep landing in a sequence that resolves
            await doc.replace_all(original)
        if batch % 3 == 2:
            forget(client, doc.uri)
        for _ in range(BATCH):
            doc.send([random_edit(rng, doc.text, pool)])
            sent += 1
        line = rng.randrange(len(doc.text.split("\n")))
        answer = await client.text_document_code_action_async(lsp.CodeActionParams(
            text_document=lsp.TextDocumentIdentifier(uri=doc.uri),
            range=lsp.Range(start=lsp.Position(line=line, character=0), end=lsp.Position(line=line + 1, character=0)),
            context=lsp.CodeActionContext(diagnostics=[])))
        assert isinstance(answer, (list, tuple))  # answered (an empty answer arrives as a tuple)
        if batch % 3 == 2:  # the text as it stands is checked (debounced: once for the whole batch)
            await wait_diagnostics(client, doc.uri)
    assert sent >= 2000 and client.error is None
    final = await doc.replace_all(original)
    key = [(d.code, d.range.start.line, d.range.start.character, d.severity) for d in clean]
    # typing checks the scan's base shot; opening checked every shot: the same places for this demo
    assert sorted((d.code, d.range.start.line, d.range.start.character, d.severity) for d in final) == sorted(key)
    errors = [m.message for m in client.log_messages + client.messages if m.type == lsp.MessageType.Error]
    assert errors == []  # no handler and no check raised
    assert Path(project / SCATTER).read_text(encoding="utf-8") == original  # nothing was written to disk
