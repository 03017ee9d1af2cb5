"""Fixtures of the web-page tests: a real server on a free port and Debian's Chromium.

No browser is ever downloaded: the tests use /usr/bin/chromium and fail (CI sets
CONFIRM_REQUIRE_BROWSER=1) or skip (elsewhere) when it is missing. Screenshots go to
``$CONFIRM_ARTEFACTS_DIR`` when set (CI keeps them), else to the test's temporary folder.
"""

from __future__ import annotations

import os
import threading
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import pytest
from werkzeug.serving import make_server

CHROMIUM = Path("/usr/bin/chromium")
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
]


def _unavailable(reason: str) -> None:
    if os.environ.get("CONFIRM_REQUIRE_BROWSER") == "1":
        pytest.fail(f"CONFIRM_REQUIRE_BROWSER=1 but {reason}", pytrace=False)
    pytest.skip(reason)


@pytest.fixture
def sync_playwright() -> Any:
    if not CHROMIUM.exists():
        _unavailable(f"{CHROMIUM} is missing (install Debian's package: apt-get install chromium)")
    try:
        from playwright.sync_api import sync_playwright
    except ImportError:
        _unavailable("the Python package playwright is not installed (pip install playwright)")
    return sync_playwright


@pytest.fixture
def served(app: Any) -> Iterator[str]:
    """The app on a free localhost port, served by werkzeug in a background thread."""
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, name="dashboard-server", daemon=True)
    thread.start()
    try:
        yield f"http://127.0.0.1:{server.server_port}"
    finally:
        server.shutdown()
        thread.join(timeout=10)
        server.server_close()


@pytest.fixture
def artefacts(tmp_path: Path, request: pytest.FixtureRequest) -> Path:
    """Where this test's screenshots go (never inside the repository)."""
    root = os.environ.get("CONFIRM_ARTEFACTS_DIR")
    folder = Path(root) / request.node.name if root else tmp_path / "screenshots"
    folder.mkdir(parents=True, exist_ok=True)
    return folder
