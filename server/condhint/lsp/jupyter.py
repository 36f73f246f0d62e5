"""The registration jupyter-lsp reads to start condhint for JupyterLab (entry point group `jupyter_lsp_spec_v1`,
declared in pyproject.toml): installing `condhint[jupyter]` is the whole set-up.

jupyter-lsp calls `spec(manager)` in the Jupyter server's own Python, which is the Python condhint is
installed in; the server is started as `<that python> -m condhint serve`.
"""
from __future__ import annotations

import sys
from typing import Any

KEY = "condhint"
SPEC_VERSION = 2  # jupyter-lsp's language-server spec schema version


def spec(manager: Any = None) -> dict[str, dict[str, Any]]:
    """{key: spec} as jupyter-lsp's spec finders return it (`manager` is jupyter-lsp's, unused)."""
    return {KEY: {
        "version": SPEC_VERSION,
        "display_name": "condhint",
        "argv": [sys.executable, "-m", "condhint", "serve"],
        "languages": ["python"],
        "mime_types": ["text/python", "text/x-ipython"],
        "requires_documents_on_disk": False,
        "env": {"PYTHONUNBUFFERED": "1"},
        "install": {"pip": "pip install 'condhint[jupyter]'"},
    }}
