"""Editor support: the language server and the pure editor features it serves."""
