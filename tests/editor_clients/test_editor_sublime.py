"""The Sublime Text LSP client block: strict JSON, the right command, selector and settings."""
import json

from editor_support import CLIENTS, CONTRACT_DEFAULTS, check_settings_shape

SUBLIME = CLIENTS / "sublime" / "LSP.sublime-settings"


def client() -> dict:
    return json.loads(SUBLIME.read_text(encoding="utf-8"))["clients"]["condhint"]


def test_command_and_selector() -> None:
    c = client()
    assert c["enabled"] is True
    assert c["command"] == ["condhint", "serve"]
    assert c["selector"] == "source.python"


def test_settings_section() -> None:
    # The LSP package answers workspace/configuration for section "condhint" from `settings`.
    settings = client()["settings"]
    assert list(settings) == ["condhint"]
    check_settings_shape(settings["condhint"])
    assert settings["condhint"] == CONTRACT_DEFAULTS
