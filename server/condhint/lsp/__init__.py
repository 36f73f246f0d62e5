"""The language-server adapter: the only package that imports pygls and lsprotocol.

`create_server()` builds the server; `condhint serve` (commands/serve.py) picks the transport.
"""
from __future__ import annotations


def create_server():  # noqa: ANN201 - the pygls server (imported lazily: `condhint check` needs no pygls)
    from condhint.lsp.server import create_server as create

    return create()
