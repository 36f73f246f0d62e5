"""Fixtures for the language-server tests: a factory starting real servers, whose logs join failing reports."""
from __future__ import annotations

import sys
from contextlib import AsyncExitStack
from pathlib import Path

import pytest
import pytest_asyncio

sys.path.insert(0, str(Path(__file__).parent))

from lsp_support import running  # noqa: E402

_CLIENTS = pytest.StashKey[list]()


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    # A server that violates the client's declared capabilities fails the test (pytest-lsp's checks).
    here = Path(__file__).parent
    for item in items:
        if here in Path(str(item.fspath)).parents:
            item.add_marker(pytest.mark.filterwarnings("error::pytest_lsp.LspSpecificationWarning"))


@pytest.hookimpl(wrapper=True)
def pytest_runtest_makereport(item: pytest.Item, call: pytest.CallInfo):
    report = yield
    clients = item.stash.get(_CLIENTS, [])
    if report.failed and clients:
        lines = [f"[{m.type.name}] {m.message}" for c in clients for m in c.log_messages]
        lines += [f"[showMessage {m.type.name}] {m.message}" for c in clients for m in c.messages]
        report.sections.append(("condhint server log", "\n".join(lines)))
    return report


@pytest_asyncio.fixture
async def lsp(request: pytest.FixtureRequest, tmp_path: Path):
    """`await lsp(profile, init_options=..., configuration=..., root=...)` -> an initialised client."""
    started: list = []
    request.node.stash[_CLIENTS] = started
    async with AsyncExitStack() as stack:
        async def start(profile: str, init_options=None, configuration=None, root: Path | None = None):
            return await stack.enter_async_context(
                running(profile, root or tmp_path, init_options, configuration, started))

        yield start
