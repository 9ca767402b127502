"""seqgen's language server (`seqgen language-server`, stdio; needs the extra `seqgen[lsp]`: pygls).

`session` (open documents, checks, which files each check read), `diagnostics` (findings -> diagnostics) and
`actions` (code actions) are plain Python; only `server` imports pygls.
"""

INSTALL = "pip install 'seqgen[lsp]'"
