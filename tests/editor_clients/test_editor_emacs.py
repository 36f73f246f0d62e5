"""condhint.el: byte-compiles without warnings on Debian's Emacs + eglot, registers with eglot
(and lsp-mode when present), and maps the user options to the server's settings section."""
from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

from editor_support import CLIENTS, CONTRACT_DEFAULTS, require_program, run

EMACS_DIR = CLIENTS / "emacs"
INSTALL = "apt-get install -y emacs-nox elpa-eglot"


@pytest.fixture(scope="module")
def emacs() -> str:
    return require_program("emacs", INSTALL)


def batch(emacs: str, *forms: str, timeout: float = 60) -> str:
    """Load condhint.el in batch Emacs (site files on, so Debian's eglot is found), evaluate
    the forms, return stdout."""
    args = [emacs, "--batch", "-L", str(EMACS_DIR), "-l", "condhint"]
    for form in forms:
        args += ["--eval", form]
    proc = run(args, timeout=timeout)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout


def json_of(emacs: str, form: str, *setup: str) -> object:
    out = batch(emacs, *setup, f"(princ (json-serialize {form} :false-object :json-false :null-object nil))")
    return json.loads(out)


def test_byte_compiles_without_warnings(emacs: str, tmp_path: Path) -> None:
    source = tmp_path / "condhint.el"
    shutil.copy(EMACS_DIR / "condhint.el", source)
    proc = run([emacs, "--batch", "--eval", "(setq byte-compile-error-on-warn t)",
                "-f", "batch-byte-compile", str(source)], timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert "Warning" not in proc.stderr and "Error" not in proc.stderr, proc.stderr
    assert (tmp_path / "condhint.elc").is_file()


def test_default_settings_are_the_contract(emacs: str) -> None:
    assert json_of(emacs, "(condhint-settings)") == CONTRACT_DEFAULTS


def test_user_options_reach_the_settings(emacs: str) -> None:
    got = json_of(emacs, "(condhint-settings)",
                  "(setq condhint-threshold-info 1.5 condhint-threshold-error 12 condhint-inlay-hints t"
                  " condhint-default-range '(1e-3 1e3) condhint-samples 64 condhint-debounce-ms 0"
                  " condhint-min-severity 'warning)")
    assert got == {"thresholds": {"info": 1.5, "warning": 4, "error": 12}, "inlayHints": True,
                   "defaultRange": [1e-3, 1e3], "samples": 64, "debounceMs": 0, "minSeverity": "warning"}


def test_invalid_options_fall_back_one_by_one(emacs: str) -> None:
    setup = ("(setq condhint-samples 3 condhint-debounce-ms -1 condhint-min-severity 'hint"
             " condhint-default-range '(5 1) condhint-threshold-warning 9)")
    assert json_of(emacs, "(condhint-settings)", setup) == CONTRACT_DEFAULTS
    problems = json_of(emacs, "(vconcat (condhint--problems))", setup)
    assert isinstance(problems, list) and len(problems) == 5
    for name in ("condhint-samples", "condhint-debounce-ms", "condhint-min-severity",
                 "condhint-default-range", "info <= warning <= error"):
        assert any(name in p for p in problems), (name, problems)


def test_configuration_sections(emacs: str) -> None:
    got = json_of(emacs, '(vector (condhint--configuration-for "condhint")'
                         ' (condhint--configuration-for "condhint.thresholds.error")'
                         ' (condhint--configuration-for "condhint.nothing")'
                         ' (condhint--configuration-for "python"))')
    assert got == [CONTRACT_DEFAULTS, 8, None, None]


def test_eglot_registration(emacs: str) -> None:
    out = batch(emacs, "(let ((entry (assoc '(python-mode python-ts-mode) eglot-server-programs)))"
                       " (prin1 (list (car entry) (funcall (cdr entry) nil)"
                       "   (child-of-class-p 'condhint-eglot-server 'eglot-lsp-server))))")
    assert out == '((python-mode python-ts-mode) (condhint-eglot-server "condhint" "serve") t)'


def test_eglot_uses_the_configured_command(emacs: str) -> None:
    out = batch(emacs, "(setq condhint-server-command '(\"/venv/bin/python\" \"-m\" \"condhint\" \"serve\"))",
                "(prin1 (condhint-eglot-contact))")
    assert out == '(condhint-eglot-server "/venv/bin/python" "-m" "condhint" "serve")'


def test_lsp_mode_client_when_lsp_mode_is_installed(emacs: str) -> None:
    has_lsp = batch(emacs, "(princ (if (locate-library \"lsp-mode\") \"yes\" \"no\"))")
    if has_lsp != "yes":
        pytest.skip("lsp-mode is not installed (optional: apt-get install -y elpa-lsp-mode)")
    out = batch(emacs, "(require 'lsp-mode)",
                "(let ((c (gethash 'condhint lsp-clients)))"
                " (prin1 (list (lsp--client-add-on? c) (funcall (lsp--client-initialization-options c)))))")
    assert out.startswith("(t (:condhint (:thresholds (:info 2 :warning 4 :error 8)"), out
