"""JupyterLab for real: JupyterLab 4 + jupyterlab-lsp + jupyter-lsp find condhint through its `jupyter_lsp_spec_v1`
entry point (nothing is configured by hand) and show its diagnostics and hover in notebook cells, in headless
Chromium. IPython magics and shell escapes must never be reported."""
from __future__ import annotations

import json
import os
import re
import sys
import time
from importlib.metadata import entry_points
from pathlib import Path
from typing import Any, Iterator

import pytest

from browser_support import (chromium_page, free_port, process_group, record_timing, screenshot, server_env,
                             wait_http)
from editor_support import REPO, notebook, require, run

WAIT = 60_000  # ms
NOTEBOOK = notebook()
ENTRY_POINT = "condhint.lsp.jupyter:spec"


# ---- fast: the registration itself -------------------------------------------------------------------------
def test_pyproject_declares_the_jupyter_lsp_entry_point() -> None:
    import tomllib

    project = tomllib.loads((REPO / "pyproject.toml").read_text())["project"]
    assert project["entry-points"]["jupyter_lsp_spec_v1"] == {"condhint": ENTRY_POINT}
    assert {"jupyterlab", "jupyterlab-lsp", "jupyter-lsp"} <= {
        re.split(r"[<>=!~ \[]", r)[0] for r in project["optional-dependencies"]["jupyter"]}


def test_spec_is_valid_for_jupyter_lsp_and_starts_this_python() -> None:
    schema = pytest.importorskip("jupyter_lsp.schema", reason="jupyter-lsp is not installed (pip install 'condhint[jupyter]')")
    from condhint.lsp.jupyter import spec

    specs = spec()
    assert list(schema.LANGUAGE_SERVER_SPEC_MAP.iter_errors(specs)) == []
    assert specs["condhint"]["argv"] == [sys.executable, "-m", "condhint", "serve"]
    assert specs["condhint"]["languages"] == ["python"]


# ---- slow: JupyterLab in a browser -------------------------------------------------------------------------
def _registered(group_entries: Any) -> bool:
    return any(ep.name == "condhint" and ep.value == ENTRY_POINT for ep in group_entries)


@pytest.fixture(scope="module")
def registration_path(tmp_path_factory: pytest.TempPathFactory) -> str:
    """A PYTHONPATH entry holding an installed condhint with its entry point: none when the running environment
    has it (`pip install -e '.[test,jupyter]'`), else a wheel of this checkout installed into a private folder."""
    if _registered(entry_points(group="jupyter_lsp_spec_v1")):
        return ""
    target = tmp_path_factory.mktemp("installed")
    done = run([sys.executable, "-m", "pip", "install", "-q", "--no-deps", "--target",
                str(target), str(REPO)], timeout=300)
    assert done.returncode == 0, done.stdout[-3000:] + done.stderr[-3000:]
    return str(target)


class Lab:
    def __init__(self, url: str, work: Path, log: Path, config: Path) -> None:
        self.url, self.work, self.log, self.config = url, work, log, config


@pytest.fixture(scope="module")
def lab(registration_path: str, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Lab]:
    try:
        import jupyter_lsp  # noqa: F401
        import jupyterlab  # noqa: F401
        import jupyterlab_lsp  # noqa: F401
    except ImportError as exc:
        require(False, f"{exc.name} is missing; install it with: pip install 'condhint[jupyter]'")
    home = tmp_path_factory.mktemp("jupyterlab")
    work = home / "work"
    work.mkdir()
    (work / "roots.ipynb").write_text(json.dumps(NOTEBOOK, indent=1))
    env = server_env(home)
    if registration_path:
        env["PYTHONPATH"] = os.pathsep.join([env["PYTHONPATH"], registration_path])
    folders = {"JUPYTER_CONFIG_DIR": "config", "JUPYTER_DATA_DIR": "data", "JUPYTER_RUNTIME_DIR": "runtime",
               "JUPYTERLAB_SETTINGS_DIR": "settings", "JUPYTERLAB_WORKSPACES_DIR": "workspaces"}
    for var, name in folders.items():
        env[var] = str(home / name)
        (home / name).mkdir()
    news = home / "settings" / "@jupyterlab" / "apputils-extension" / "notification.jupyterlab-settings"
    news.parent.mkdir(parents=True)
    news.write_text(json.dumps({"fetchNews": "false", "checkForUpdates": False}))
    port = free_port()
    cmd = [sys.executable, "-m", "jupyterlab", "--allow-root", "--no-browser", "--ServerApp.ip=127.0.0.1",
           f"--ServerApp.port={port}", "--ServerApp.port_retries=0", "--IdentityProvider.token=",
           "--ServerApp.password=", f"--ServerApp.root_dir={work}"]
    log = home / "jupyterlab.log"
    with process_group(cmd, log, env=env, cwd=work) as proc:
        url = f"http://127.0.0.1:{port}"
        wait_http(url + "/api/status", proc, log)
        yield Lab(url, work, log, home / "config")


@pytest.fixture(scope="module")
def page(lab: Lab, tmp_path_factory: pytest.TempPathFactory) -> Iterator[Any]:
    with chromium_page(tmp_path_factory.mktemp("chromium")) as page:
        page.set_default_timeout(WAIT)
        yield page


def _lsp_status(lab: Lab) -> dict[str, Any]:
    import urllib.request

    with urllib.request.urlopen(lab.url + "/lsp/status", timeout=10) as reply:
        return json.load(reply)


def cell(page: Any, text: str) -> Any:
    return page.locator(".jp-Notebook .jp-Cell", has=page.locator(".cm-content", has_text=text)).first


def operator_point(page: Any, line: Any, needle: str) -> tuple[float, float]:
    """Viewport coordinates of the middle of `needle`'s operator character inside a CodeMirror line."""
    box = line.evaluate("""(el, needle) => {
        const walker = document.createTreeWalker(el, NodeFilter.SHOW_TEXT);
        let text = "", nodes = [];
        while (walker.nextNode()) { nodes.push([walker.currentNode, text.length]); text += walker.currentNode.data; }
        const at = text.indexOf(needle) + needle.indexOf("-");
        for (const [node, start] of nodes) {
            if (at >= start && at < start + node.data.length) {
                const r = document.createRange(); r.setStart(node, at - start); r.setEnd(node, at - start + 1);
                const b = r.getBoundingClientRect(); return [b.x + b.width / 2, b.y + b.height / 2];
            }
        }
        return null;
    }""", needle)
    assert box is not None, f"{needle!r} not found in the line"
    return box[0], box[1]


@pytest.mark.slow
def test_notebook_diagnostics_hover_and_magics(lab: Lab, page: Any, tmp_path: Path) -> None:
    opened = time.monotonic()
    page.goto(f"{lab.url}/lab/tree/roots.ipynb")
    gap = cell(page, "def gap")
    gap.wait_for()
    shown = time.monotonic()
    lint = gap.locator(".cm-editor .cm-lintRange")
    try:
        lint.first.wait_for()
    except Exception as exc:
        raise AssertionError(f"no diagnostic; /lsp/status: {_lsp_status(lab)}\n{lab.log.read_text()[-4000:]}") from exc
    diagnosed = time.monotonic()
    record_timing("JupyterLab", "roots.ipynb: page load -> cells shown (loads JupyterLab itself)", shown - opened)
    record_timing("JupyterLab", "roots.ipynb: cells shown -> first diagnostic (starts the server)", diagnosed - shown)

    # Found by its entry point: jupyter-lsp lists it with no configuration written by hand.
    status = _lsp_status(lab)
    assert "condhint" in status["sessions"], status
    assert list(lab.config.rglob("*.json")) == []

    # On the right cell and line: line 2 of the gap cell, over the cancelling subtraction.
    lines = gap.locator(".cm-line")
    assert lines.nth(1).locator(".cm-lintRange").count() > 0
    assert lines.nth(0).locator(".cm-lintRange").count() == 0
    flagged = "".join(lint.all_inner_texts())
    assert "math.sqrt(x + 1) - math.sqrt(x)" in flagged, flagged
    # %timeit, !ls and %%time are not syntax errors.
    for text in ("timeit", "%%time"):
        assert cell(page, text).locator(".cm-lintRange").count() == 0

    # Hover (jupyterlab-lsp shows the server's hover while Control is held) with κ.
    x, y = operator_point(page, lines.nth(1), ") - math")
    page.mouse.move(x, y)
    page.keyboard.down("Control")
    try:
        hover = page.locator(".lsp-hover", has_text="condition number").first
        page.mouse.move(x + 1, y)
        hover.wait_for()
        text = hover.inner_text()
        assert "κ ≈" in text and "digits lost to rounding" in text, text
        screenshot(page, "jupyterlab-hover.png", tmp_path)
    finally:
        page.keyboard.up("Control")
