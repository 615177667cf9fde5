"""One server and one headless Chromium for every browser test of the session.

The server is the real command (``secondstage serve``) on a free loopback port
with a temporary data directory; the browser is Debian's Chromium driven by
Playwright's Python API (Playwright's own browser download is never used).
Screenshots of each step go to ``tests/artifacts/browser/`` (git-ignored).
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from collections.abc import Iterator
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium")
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
ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts" / "browser"
REPOSITORY = Path(__file__).resolve().parents[2]

pytestmark = pytest.mark.browser


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@pytest.fixture(scope="session")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """The base URL of a running ``secondstage serve`` on an empty data directory."""
    port = free_port()
    data_dir = tmp_path_factory.mktemp("browser-data")
    log = (tmp_path_factory.mktemp("browser-log") / "server.log").open("w")
    process = subprocess.Popen(
        [sys.executable, "-m", "app.cli.main", "serve", "--port", str(port), "--data-dir", str(data_dir)],
        cwd=REPOSITORY,
        stdout=log,
        stderr=subprocess.STDOUT,
        env={**os.environ, "SECONDSTAGE_REFIT_WAIT_SECONDS": "10"},
    )
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 30
        while True:
            try:
                with urllib.request.urlopen(base + "/", timeout=1) as response:
                    if response.status == 200:
                        break
            except OSError:
                if process.poll() is not None or time.monotonic() > deadline:
                    raise RuntimeError(f"the server did not start; see {log.name}") from None
                time.sleep(0.2)
        yield base
    finally:
        process.terminate()
        process.wait(timeout=30)
        log.close()


@pytest.fixture(scope="session")
def browser() -> Iterator[object]:
    """Debian's Chromium, headless, with no network access beyond this machine."""
    if CHROMIUM is None:
        pytest.skip("the chromium package is not installed (apt-get install -y chromium)")
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        instance = playwright.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS)
        yield instance
        instance.close()


@pytest.fixture
def shots(request: pytest.FixtureRequest) -> object:
    """``shots(page, "step")`` saves a full-page screenshot named after the test and the step."""
    folder = ARTIFACTS / request.node.name
    folder.mkdir(parents=True, exist_ok=True)
    counter = iter(range(1, 100))

    def take(page: object, step: str) -> Path:
        path = folder / f"{next(counter):02d}-{step}.png"
        page.screenshot(path=str(path), full_page=True)  # type: ignore[attr-defined]
        return path

    return take
