"""Browser-based editors (code-server, JupyterLab) started on loopback and driven by Playwright in Debian's
headless Chromium. Each editor runs in its own process group and is stopped with it; every wait has a
timeout. Screenshots and first-diagnostic times go to $CONDHINT_E2E_RECORD (a folder) when it is set."""
from __future__ import annotations

import json
import os
import signal
import socket
import subprocess
import time
import urllib.error
import urllib.request
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Iterator

from editor_support import REPO, require

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_FLAGS = ["--no-sandbox", "--headless", "--disable-gpu", "--disable-background-networking",
                  "--disable-component-update", "--disable-sync", "--no-first-run"]
SERVER_SOURCE = REPO / "server"  # the editors start the condhint checked out here, not another install


def playwright_api() -> Any:
    """`playwright.sync_api`, or a skip (a failure in CI) saying how to install it."""
    try:
        from playwright import sync_api
    except ImportError:
        require(False, "Playwright for Python is missing; install it with: pip install playwright")
    require(CHROMIUM.is_file(), "Debian's Chromium is missing; install it with: apt-get install -y chromium")
    return sync_api


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def server_env(home: Path) -> dict[str, str]:
    """The environment of an editor (and so of the condhint server it starts): this checkout's package
    first on the path, and configuration folders kept out of $HOME."""
    path = os.pathsep.join(p for p in (str(SERVER_SOURCE), os.environ.get("PYTHONPATH", "")) if p)
    return {**os.environ, "PYTHONPATH": path, "XDG_CONFIG_HOME": str(home / "config"),
            "XDG_DATA_HOME": str(home / "data"), "XDG_CACHE_HOME": str(home / "cache")}


@contextmanager
def process_group(cmd: list[str], log: Path, **kwargs: Any) -> Iterator[subprocess.Popen]:
    """Run `cmd` in a new session; on exit stop its whole process group (the editor, its helpers, the
    language server, kernels), politely first."""
    with log.open("wb") as out:
        proc = subprocess.Popen(cmd, stdout=out, stderr=subprocess.STDOUT, stdin=subprocess.DEVNULL,
                                start_new_session=True, **kwargs)
    try:
        yield proc
    finally:
        for sig, grace in ((signal.SIGTERM, 10.0), (signal.SIGKILL, 10.0)):
            try:
                os.killpg(proc.pid, sig)
            except ProcessLookupError:
                break
            try:
                proc.wait(grace)
            except subprocess.TimeoutExpired:
                continue
            if not _group_alive(proc.pid):
                break


def _group_alive(pgid: int) -> bool:
    try:
        os.killpg(pgid, 0)
    except ProcessLookupError:
        return False
    return True


def wait_http(url: str, proc: subprocess.Popen, log: Path, timeout: float = 90.0) -> None:
    """Wait until `url` answers (any HTTP status), failing early if the process died."""
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        if proc.poll() is not None:
            raise AssertionError(f"{url}: the editor exited ({proc.returncode}):\n{log.read_text()[-3000:]}")
        try:
            urllib.request.urlopen(url, timeout=2.0).close()
            return
        except urllib.error.HTTPError:
            return
        except OSError:
            time.sleep(0.2)  # polling a port that is not open yet: there is no event to wait on
    raise AssertionError(f"{url} did not answer within {timeout} s:\n{log.read_text()[-3000:]}")


@contextmanager
def chromium_page(profile: Path) -> Iterator[Any]:
    api = playwright_api()
    with api.sync_playwright() as p:
        context = p.chromium.launch_persistent_context(
            str(profile), executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_FLAGS,
            viewport={"width": 1400, "height": 900})
        try:
            yield context.pages[0] if context.pages else context.new_page()
        finally:
            context.close()


def record_dir() -> Path | None:
    folder = os.environ.get("CONDHINT_E2E_RECORD")
    if not folder:
        return None
    path = Path(folder)
    path.mkdir(parents=True, exist_ok=True)
    return path


def screenshot(page: Any, name: str, tmp_path: Path) -> Path:
    """A PNG of the page, in $CONDHINT_E2E_RECORD when set (else beside the test's files)."""
    path = (record_dir() or tmp_path) / name
    page.screenshot(path=str(path))
    return path


def record_timing(editor: str, what: str, seconds: float) -> None:
    """Print a measured time (pytest -s shows it; -rA lists it) and append it to timings.jsonl."""
    print(f"[{editor}] {what}: {seconds:.2f} s")
    folder = record_dir()
    if folder is not None:
        with (folder / "timings.jsonl").open("a") as out:
            out.write(json.dumps({"editor": editor, "what": what, "seconds": round(seconds, 3),
                                  "at": time.strftime("%Y-%m-%d %H:%M:%S UTC", time.gmtime())}) + "\n")
