"""Writers of the findings model: each turns a list of file reports into text for one format."""
from __future__ import annotations

import importlib
from typing import Callable

from condhint.findings import FileReport

Writer = Callable[[list[FileReport], dict], str]

# Format name -> "module:function"; imported only when used.
WRITERS: dict[str, str] = {
    "text": "condhint.outputs.text:write",
    "json": "condhint.outputs.json_out:write",
    "sarif": "condhint.outputs.sarif:write",
    "markdown": "condhint.outputs.markdown:write",
}


def writer(name: str) -> Writer:
    module, func = WRITERS[name].split(":")
    return getattr(importlib.import_module(module), func)
