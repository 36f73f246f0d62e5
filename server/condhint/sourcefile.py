"""Reading files from disk: encodings (PEP 263 cookies, BOM), line endings, and clear messages for bad files."""
from __future__ import annotations

import io
import json
import os
import tokenize
from dataclasses import dataclass
from pathlib import Path


@dataclass(frozen=True)
class SourceFile:
    path: Path
    text: str  # decoded, line endings as in the file
    encoding: str  # as detected ("utf-8-sig" when the file starts with a BOM)
    newline: str  # the file's dominant line ending
    mtime_ns: int
    size: int
    raw: bytes


class UnreadableFile(Exception):
    """A file that cannot be read as Python source; the message says why."""


def dominant_newline(text: str) -> str:
    crlf = text.count("\r\n")
    lf = text.count("\n") - crlf
    cr = text.count("\r") - crlf
    return max((("\n", lf), ("\r\n", crlf), ("\r", cr)), key=lambda kv: kv[1])[0] if (lf or crlf or cr) else "\n"


def decode(raw: bytes, name: str = "<bytes>") -> tuple[str, str]:
    try:
        encoding, _ = tokenize.detect_encoding(io.BytesIO(raw).readline)
    except SyntaxError as exc:
        if "encoding declaration" in str(exc):
            raise UnreadableFile(f"{name}: not valid utf-8 text and no encoding declared; declare it with a "
                                 "`# -*- coding: … -*-` line") from None
        raise UnreadableFile(f"{name}: cannot determine the encoding: {exc}") from None
    try:
        text = raw.decode(encoding)
    except (UnicodeDecodeError, LookupError) as exc:
        raise UnreadableFile(
            f"{name}: not valid {encoding} text ({exc.__class__.__name__} at byte "
            f"{getattr(exc, 'start', '?')}); declare the encoding with a `# -*- coding: … -*-` line") from None
    if text.startswith("\ufeff"):
        text = text[1:]
    return text, encoding


def read_source(path: Path) -> SourceFile:
    try:
        st = os.stat(path)
        raw = path.read_bytes()
    except OSError as exc:
        raise UnreadableFile(f"{path}: cannot read: {exc.strerror or exc}") from None
    text, encoding = decode(raw, str(path))
    return SourceFile(path, text, encoding, dominant_newline(text), st.st_mtime_ns, st.st_size, raw)


def read_json(path: Path) -> object:
    """A JSON document from disk; UnreadableFile says why it could not be read ("no such file", …)."""
    try:
        return json.loads(Path(path).read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise UnreadableFile("no such file") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise UnreadableFile(f"cannot read: {exc}") from None
