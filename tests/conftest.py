"""Shared test helpers: analyse source text in one line."""
from __future__ import annotations

import textwrap

import pytest

from condhint.config import Config, apply_settings
from condhint.engine import analyse_module
from condhint.findings import Finding


def findings(source: str, min_severity: str = "info", **settings) -> list[Finding]:
    cfg, errors = apply_settings(Config(min_severity=min_severity), settings)
    assert not errors, errors
    return analyse_module(textwrap.dedent(source), "t.py", cfg, cache=None).report.findings


def codes(source: str, **settings) -> list[str]:
    return [f.code for f in findings(source, **settings)]


@pytest.fixture
def analyse_src():
    def run(source: str, **settings):
        cfg, errors = apply_settings(Config(), settings)
        assert not errors
        return analyse_module(textwrap.dedent(source), "t.py", cfg, cache=None)

    return run
