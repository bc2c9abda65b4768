"""Fixtures of the web tests: an in-process client, and a real server with Chromium.

The browser tests drive Debian's Chromium through Playwright against the app
served by uvicorn on a free port.  Without Chromium they skip, saying how to
enable them, unless RINGWISE_REQUIRE_BROWSER=1 (as in CI), where they fail.
"""

from __future__ import annotations

import contextlib
import json
import os
import shutil
import socket
import tempfile
import threading
import time
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from fastapi.testclient import TestClient

from ringwise.web.paths import SAMPLES_DIR
from ringwise.web.server import create_app

#: Screenshots and PDFs of the browser tests, in the checkout (ignored by git).
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
]
ENABLE_HINT = (
    "browser tests need Debian's Chromium and poppler-utils: apt-get install chromium poppler-utils"
)


@pytest.fixture(scope="session")
def client() -> Iterator[TestClient]:
    # a loopback Host, as a browser on this computer sends (app/web/hosts.py refuses others)
    with TestClient(create_app(), base_url="http://127.0.0.1", raise_server_exceptions=False) as c:
        yield c


@pytest.fixture
def inline_client() -> Iterator[TestClient]:
    """The app without its lifespan: heavy work runs in threads of this process
    (app/web/workers.py), so a test may patch the core."""
    c = TestClient(create_app(), base_url="http://127.0.0.1", raise_server_exceptions=False)
    try:
        yield c
    finally:
        c.app.state.work.shutdown()


@pytest.fixture
def sample() -> dict[str, Any]:
    """A fresh copy of the 1 MHz Clapp sample design file."""
    return json.loads((SAMPLES_DIR / "clapp-clock-1M.json").read_text(encoding="utf-8"))


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@contextlib.contextmanager
def serving(app: Any) -> Iterator[str]:
    """``app`` under uvicorn on a free loopback port, in a background thread; its URL."""
    import uvicorn

    port = _free_port()
    server = uvicorn.Server(uvicorn.Config(app, host="127.0.0.1", port=port, log_level="warning"))
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    deadline = time.monotonic() + 10
    while not server.started:
        if time.monotonic() > deadline:  # pragma: no cover - a broken start
            raise RuntimeError("the test server did not start")
        time.sleep(0.02)
    try:
        yield f"http://127.0.0.1:{port}"
    finally:
        server.should_exit = True
        thread.join(timeout=10)


@pytest.fixture(scope="session")
def live_server() -> Iterator[str]:
    """The real app under uvicorn on a free port, in a background thread."""
    with serving(create_app()) as url:
        yield url


def _need(tool: str) -> str | None:
    path = shutil.which(tool)
    if path is None:
        message = f"{tool} not found; {ENABLE_HINT}"
        if os.environ.get("RINGWISE_REQUIRE_BROWSER") == "1":
            pytest.fail(message + " (RINGWISE_REQUIRE_BROWSER=1 makes this a failure)")
        pytest.skip(message)
    return path


@pytest.fixture(scope="session")
def browser() -> Iterator[Any]:
    """Chromium with a fresh, empty profile for this test session.

    One profile for the session (not one per test) lets Chromium keep its
    compiled-code cache for plotly.js between pages, which makes each page
    load several times faster; every test still opens fresh pages of its own.
    """
    executable = _need("chromium")
    from playwright.sync_api import sync_playwright

    with (
        tempfile.TemporaryDirectory(prefix="ringwise-chromium-") as profile,
        sync_playwright() as p,
    ):
        ctx = p.chromium.launch_persistent_context(
            profile,
            executable_path=executable,
            headless=True,
            args=CHROMIUM_ARGS,
            viewport={"width": 1440, "height": 1000},
            accept_downloads=True,
        )
        yield ctx
        ctx.close()


@pytest.fixture
def pdfinfo() -> str:
    return _need("pdfinfo")


@pytest.fixture
def context(browser: Any) -> Iterator[Any]:
    """The session's browser profile; pages a test opens are closed after it."""
    before = set(browser.pages)
    yield browser
    for page in browser.pages:
        if page not in before:
            page.close()
    browser.clear_permissions()


@pytest.fixture(scope="session")
def artifacts() -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS
