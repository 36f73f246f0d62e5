"""Typed configuration: defaults for every option, read from `[tool.condhint]`, the command line or the editor.

Invalid settings produce one clear message each and fall back to the default.
"""
from __future__ import annotations

import fnmatch
import math
import re
import sys
from dataclasses import dataclass, fields, replace
from pathlib import Path
from typing import Any, Mapping

from condhint.numeric.formats import Format, format_named

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

SEVERITIES = ("info", "warning", "error")


@dataclass(frozen=True)
class Thresholds:
    """Digits lost (or at risk) from which a finding has each severity."""

    info: float = 2.0
    warning: float = 4.0
    error: float = 8.0

    def severity(self, digits: float) -> str | None:
        if digits >= self.error:
            return "error"
        if digits >= self.warning:
            return "warning"
        if digits >= self.info:
            return "info"
        return None


@dataclass(frozen=True)
class Config:
    thresholds: Thresholds = Thresholds()
    # Inputs without a declared range are sampled on [low, high] (log-uniformly): magnitudes from a
    # millionth to a million cover ordinary quantities in ordinary units (see docs/configuration.md).
    default_range: tuple[float, float] = (1e-6, 1e6)
    # Arrays without a declared length (`len(x) in [lo, hi]`) have lengths in this range (numeric/array_sampling.py).
    array_length: tuple[float, float] = (2.0, 1000.0)
    samples: int = 256  # binary64 samples per site
    reference_samples: int = 40  # of which this many are re-evaluated in mpmath when a site looks suspicious
    # The format of values whose type the code does not show (parameters, results of unknown calls): "float64"
    # means Python floats; "float32" suits code whose arrays come typed from elsewhere (tensors of another library).
    float_format: str = "float64"
    include: tuple[str, ...] = ("*.py", "*.ipynb")
    exclude: tuple[str, ...] = ()
    min_severity: str = "info"  # findings below this are not reported at all
    fail_on: str = "warning"  # the exit status is 1 when a finding reaches this severity
    min_fraction: float = 0.02  # on default ranges a finding must affect this fraction of the samples
    site_budget: float = 2.0  # seconds of numeric analysis per site
    file_budget: float = 60.0  # seconds of numeric analysis per file (per definition in the server); inf: none
    formula_budget: float = 2.0  # seconds for the symbolic κ formula of a site
    max_site_nodes: int = 400
    kappa_formula: bool = True
    fixes: bool = True
    inlay_hints: bool = False
    debounce_ms: int = 50
    fix_wait_ms: int = 3000  # how long a code-action request waits for the fix search before saying it is running
    per_path: tuple[tuple[str, Mapping[str, Any]], ...] = ()

    def for_path(self, path: str) -> "Config":
        cfg = self
        for pattern, overrides in self.per_path:
            if fnmatch.fnmatch(path, pattern) or fnmatch.fnmatch(Path(path).name, pattern):
                cfg, _ = apply_settings(cfg, overrides)
        return cfg

    @property
    def format(self) -> Format:
        return format_named(self.float_format)

    @property
    def unit_roundoff(self) -> float:
        return self.format.unit_roundoff


def _snake(key: str) -> str:
    return re.sub(r"(?<!^)(?=[A-Z])", "_", key).lower().replace("-", "_")


def _number(v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise ValueError("expected a finite number")
    return float(v)


def _check(cfg: Config, key: str, value: Any) -> Config:
    if key == "thresholds":
        if not isinstance(value, Mapping):
            raise ValueError("expected a table {info, warning, error}")
        t = cfg.thresholds
        vals = {f.name: getattr(t, f.name) for f in fields(Thresholds)}
        for k, v in value.items():
            if k not in vals:
                raise ValueError(f"unknown threshold {k!r}")
            vals[k] = _number(v)
        if not 0 <= vals["info"] <= vals["warning"] <= vals["error"]:
            raise ValueError("need 0 <= info <= warning <= error")
        return replace(cfg, thresholds=Thresholds(**vals))
    if key in ("default_range", "array_length"):
        if not isinstance(value, (list, tuple)) or len(value) != 2:
            raise ValueError("expected [low, high]")
        lo, hi = _number(value[0]), _number(value[1])
        if not lo < hi or (key == "array_length" and lo < 1):
            raise ValueError("need low < high" + (" and low >= 1" if key == "array_length" else ""))
        return replace(cfg, **{key: (lo, hi)})
    if key in ("samples", "reference_samples", "max_site_nodes", "debounce_ms", "fix_wait_ms"):
        if isinstance(value, bool) or not isinstance(value, int):
            raise ValueError("expected a whole number")
        lo = {"samples": 8, "reference_samples": 4, "max_site_nodes": 10, "debounce_ms": 0, "fix_wait_ms": 0}[key]
        if not lo <= value <= 100_000:
            raise ValueError(f"expected a whole number from {lo} to 100000")
        return replace(cfg, **{key: value})
    if key in ("min_fraction", "site_budget", "formula_budget", "file_budget"):
        v = math.inf if key == "file_budget" and value == math.inf else _number(value)
        if v < 0:
            raise ValueError("expected a non-negative number")
        return replace(cfg, **{key: v})
    if key in ("min_severity", "fail_on"):
        if value not in SEVERITIES:
            raise ValueError(f"expected one of {', '.join(SEVERITIES)}")
        return replace(cfg, **{key: value})
    if key == "float_format":
        return replace(cfg, float_format=_format_name(value))
    if key in ("include", "exclude"):
        if isinstance(value, str):
            value = [value]
        if not isinstance(value, (list, tuple)) or not all(isinstance(v, str) for v in value):
            raise ValueError("expected a list of glob patterns")
        return replace(cfg, **{key: tuple(value)})
    if key in ("kappa_formula", "fixes", "inlay_hints"):
        if not isinstance(value, bool):
            raise ValueError("expected true or false")
        return replace(cfg, **{key: value})
    if key == "per_path":
        if not isinstance(value, Mapping) or not all(isinstance(v, Mapping) for v in value.values()):
            raise ValueError("expected a table of glob = {settings}")
        return replace(cfg, per_path=tuple((k, dict(v)) for k, v in value.items()))
    raise ValueError("unknown setting")


def _format_name(value: Any) -> str:
    """A name of a number format record (`numeric.formats`): float64, float32, float16, bfloat16 or an alias."""
    if not isinstance(value, str):
        raise ValueError("expected a format name such as \"float64\"")
    format_named(value)  # raises with the known names
    return value


def apply_settings(cfg: Config, settings: Mapping[str, Any] | None, origin: str = "settings"
                   ) -> tuple[Config, list[str]]:
    """Merge settings over `cfg`; returns the new config and one message per rejected setting."""
    errors: list[str] = []
    for raw_key, value in (settings or {}).items():
        key = _snake(str(raw_key))
        if value is None:
            continue
        if key == "server" or key == "trace":
            continue  # the editor's own settings, not ours
        try:
            cfg = _check(cfg, key, value)
        except ValueError as exc:
            errors.append(f"{origin}: `{raw_key}`: {exc}; using the default")
    return cfg, errors


def find_pyproject(start: Path) -> Path | None:
    start = start.resolve()
    for d in [start, *start.parents] if start.is_dir() else [start.parent, *start.parent.parents]:
        p = d / "pyproject.toml"
        if p.is_file():
            return p
    return None


def load_pyproject(path: Path) -> tuple[dict[str, Any], list[str]]:
    """The `[tool.condhint]` table of a pyproject.toml, or a message saying why it could not be read."""
    try:
        data = tomllib.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError) as exc:
        return {}, [f"{path}: cannot read: {exc}"]
    table = data.get("tool", {}).get("condhint", {})
    if not isinstance(table, dict):
        return {}, [f"{path}: [tool.condhint] must be a table"]
    return table, []


def load_config(start: Path | None = None, explicit: Path | None = None,
                overrides: Mapping[str, Any] | None = None) -> tuple[Config, list[str], Path | None]:
    """Defaults < nearest pyproject.toml (or `explicit`) < overrides."""
    messages: list[str] = []
    path = explicit or (find_pyproject(start) if start is not None else None)
    cfg = Config()
    if path is not None:
        table, msgs = load_pyproject(path)
        messages += msgs
        cfg, msgs = apply_settings(cfg, table, origin=str(path))
        messages += msgs
    cfg, msgs = apply_settings(cfg, overrides)
    return cfg, messages + msgs, path
