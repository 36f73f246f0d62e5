"""What each client sends as the `condhint` section is accepted, value for value, by the
server's own settings parser (condhint.config.apply_settings), with no rejected key."""
from __future__ import annotations

import json
import tomllib

import pytest

from condhint.config import Config, apply_settings
from editor_support import CLIENTS, CONTRACT_DEFAULTS, require_program, run


def as_config_values(section: dict) -> dict:
    """The client's camelCase section in the server's snake_case field names."""
    return {"thresholds": tuple(float(section["thresholds"][k]) for k in ("info", "warning", "error")),
            "inlay_hints": section["inlayHints"], "default_range": tuple(section["defaultRange"]),
            "samples": section["samples"], "debounce_ms": section["debounceMs"],
            "min_severity": section["minSeverity"]}


def server_view(section: dict) -> dict:
    cfg, errors = apply_settings(Config(), section, origin="client")
    assert errors == []
    t = cfg.thresholds
    return {"thresholds": (t.info, t.warning, t.error), "inlay_hints": cfg.inlay_hints,
            "default_range": cfg.default_range, "samples": cfg.samples, "debounce_ms": cfg.debounce_ms,
            "min_severity": cfg.min_severity}


def helix_section() -> dict:
    with (CLIENTS / "helix" / "languages.toml").open("rb") as f:
        return tomllib.load(f)["language-server"]["condhint"]["config"]["condhint"]


def sublime_section() -> dict:
    return json.loads((CLIENTS / "sublime" / "LSP.sublime-settings").read_text())["clients"]["condhint"][
        "settings"]["condhint"]


def emacs_section() -> dict:
    emacs = require_program("emacs", "apt-get install -y emacs-nox elpa-eglot")
    proc = run([emacs, "--batch", "-L", str(CLIENTS / "emacs"), "-l", "condhint", "--eval",
                "(princ (json-serialize (condhint-settings) :false-object :json-false))"], timeout=60)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def vscode_section() -> dict:
    node = require_program("node", "apt-get install -y nodejs")
    script = ("const {buildServerSettings} = require('./src/config');"
              "process.stdout.write(JSON.stringify(buildServerSettings(() => undefined).settings));")
    proc = run([node, "-e", script], timeout=60, cwd=CLIENTS / "vscode")
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


@pytest.mark.parametrize("client", [helix_section, sublime_section, emacs_section, vscode_section],
                         ids=["helix", "sublime", "emacs", "vscode"])
def test_server_accepts_client_settings(client) -> None:
    section = client()
    assert set(section) == set(CONTRACT_DEFAULTS)
    assert server_view(section) == as_config_values(section)


def test_contract_defaults_are_the_server_defaults() -> None:
    assert server_view({}) == as_config_values(CONTRACT_DEFAULTS)
