"""Typed settings of the language server.

Precedence: defaults < `[tool.condhint]` of the workspace's pyproject.toml < initializationOptions <
`workspace/configuration` (section `condhint`). Invalid values are reported in one message and fall back.
No protocol types here: parsed and tested without a server.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Mapping

from condhint.config import Config, apply_settings, load_config

SECTION = "condhint"


@dataclass(frozen=True)
class Settings:
    config: Config
    problems: tuple[str, ...] = ()
    pyproject: Path | None = None

    @property
    def debounce(self) -> float:
        """Seconds to wait after the last change before analysing."""
        return self.config.debounce_ms / 1000.0

    @property
    def inlay_hints(self) -> bool:
        return self.config.inlay_hints

    @property
    def analysis_config(self) -> Config:
        """The configuration analyses run with: the κ formula is derived in the background, not inline."""
        return replace(self.config, kappa_formula=False)

    def message(self) -> str | None:
        """One message for the user about every rejected setting, or None."""
        if not self.problems:
            return None
        return "condhint: some settings were not accepted and their defaults are used: " + "; ".join(self.problems)


def section_of(value: Any, origin: str, problems: list[str]) -> Mapping[str, Any] | None:
    """The `condhint` section of a settings object: `{"condhint": {...}}` or the section itself."""
    if value is None or value == []:  # Lua clients encode an empty table as a JSON array
        return None
    if not isinstance(value, Mapping):
        problems.append(f"{origin}: expected an object, got {type(value).__name__}")
        return None
    inner = value.get(SECTION)
    if inner is None:
        return value
    if inner == []:
        return None
    if not isinstance(inner, Mapping):
        problems.append(f"{origin}: `{SECTION}` must be an object")
        return None
    return inner


def resolve(root: Path | None, init_options: Any = None, workspace: Any = None) -> Settings:
    """Settings from the workspace's pyproject.toml, the client's initializationOptions and configuration."""
    problems: list[str] = []
    if root is not None and root.exists():
        cfg, msgs, path = load_config(root)
        problems += msgs
    else:
        cfg, path = Config(), None
    for origin, value in (("initializationOptions", init_options), ("workspace/configuration", workspace)):
        section = section_of(value, origin, problems)
        cfg, msgs = apply_settings(cfg, section, origin=origin)
        problems += msgs
    return Settings(cfg, tuple(problems), path)
