"""Editor support: seqgen's language server (`seqgen language-server`, stdio; needs the extra `seqgen[lsp]`:
pygls) and the editor features it serves.

`session` (open documents, checks, which files each check read), `diagnostics` (findings -> diagnostics),
`actions` (code actions), `complete`, `hover` and `definition` (with `context`, where the cursor is, and
`features`, their result types) are plain Python; only `server` imports pygls.
"""

INSTALL = "pip install 'seqgen[lsp]'"
