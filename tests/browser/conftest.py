"""One server and one headless Chromium for every browser test of the session.

The server is the real command (``secondstage serve``) on a free loopback port
with a temporary data directory; the browser is Debian's Chromium driven by
Playwright's Python API (Playwright's own browser download is never used).
Screenshots of each step go to ``tests/artifacts/browser/`` (git-ignored).

A new server has no account: it prints a one-time first-run link, which the
``steward`` fixture opens once, in the browser, to create the first steward;
other tests start signed-in browser contexts from its stored state.
"""

from __future__ import annotations

import os
import re
import shutil
import socket
import subprocess
import sys
import time
import tomllib
import urllib.request
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest

from tests.accounts import PASSWORD

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
DEMO_DIR = REPOSITORY / "seed_demo" / "cases" / "walking_blood_pressure"

pytestmark = pytest.mark.browser


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


FIRST_RUN_LINK = re.compile(r"(http://127\.0\.0\.1:\d+/welcome/[A-Za-z0-9_-]+)")
STEWARD = "steward"


@dataclass(frozen=True)
class Server:
    """A running ``secondstage serve``: its base URL and the first-run link it printed."""

    base: str
    first_run_link: str


def start_server(data_dir: Path, log_path: Path, *, demo: bool = False) -> tuple[subprocess.Popen[bytes], Server]:
    """``secondstage serve`` on a free loopback port; waits until it answers and has printed its first-run link."""
    port = free_port()
    command = [sys.executable, "-m", "app.cli.main", "serve", "--port", str(port), "--data-dir", str(data_dir)]
    with log_path.open("w") as log:
        process = subprocess.Popen(
            command + (["--demo"] if demo else []),
            cwd=REPOSITORY,
            stdout=log,
            stderr=subprocess.STDOUT,
            env={**os.environ, "SECONDSTAGE_REFIT_WAIT_SECONDS": "10"},
        )
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while True:
        try:
            with urllib.request.urlopen(base + "/sign-in", timeout=1) as response:
                if response.status == 200:
                    break
        except OSError:
            if process.poll() is not None or time.monotonic() > deadline:
                process.terminate()
                raise RuntimeError(f"the server did not start; see {log_path}") from None
            time.sleep(0.2)
    link = FIRST_RUN_LINK.search(log_path.read_text())
    if link is None:
        process.terminate()
        raise RuntimeError(f"the server printed no first-run link; see {log_path}")
    return process, Server(base=base, first_run_link=link.group(1))


def stop_server(process: subprocess.Popen[bytes]) -> None:
    process.terminate()
    process.wait(timeout=30)


@pytest.fixture(scope="session")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    """A running ``secondstage serve`` on an empty data directory."""
    process, running = start_server(
        tmp_path_factory.mktemp("browser-data"), tmp_path_factory.mktemp("browser-log") / "server.log"
    )
    try:
        yield running
    finally:
        stop_server(process)


def complete_first_run(page: Any, link: str, *, name: str = STEWARD) -> None:
    """Open the first-run link and create the first steward, as a newcomer does."""
    page.goto(link)
    page.get_by_label("Name to sign in with").fill(name)
    page.get_by_label("Password", exact=True).fill(PASSWORD)
    page.get_by_label("The same password again").fill(PASSWORD)
    page.get_by_role("button", name="Create the steward and sign in").click()
    page.get_by_role("heading", name="Cases under review").wait_for()


def sign_in(page: Any, base: str, name: str, *, password: str = PASSWORD) -> None:
    """Sign in through the sign-in page."""
    page.goto(base + "/sign-in")
    page.get_by_label("Name").fill(name)
    page.get_by_label("Password").fill(password)
    page.get_by_role("button", name="Sign in").click()
    page.get_by_role("heading", name="Cases under review").wait_for()


@pytest.fixture(scope="session")
def steward(browser: Any, server: Server) -> dict[str, Any]:
    """The browser state of the first steward, created once through the server's first-run link."""
    context = browser.new_context()
    complete_first_run(context.new_page(), server.first_run_link)
    state = context.storage_state()
    context.close()
    return state


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


def refit_walking_demo(request: Any, base: str, headers: dict[str, str], title: str) -> tuple[int, int]:
    """A case with the walking demo uploaded, its claim entered and refitted through the API; (case, refit).

    ``request`` is a Playwright API request context; ``headers`` authenticate
    it (a bearer token, or the session's form token).
    """
    case = request.post(f"{base}/api/v1/cases", data={"title": title}, headers=headers).json()["case"]["id"]
    upload = request.post(
        f"{base}/api/v1/cases/{case}/datasets",
        multipart={"file": {"name": "walking.csv", "mimeType": "text/csv", "buffer": (DEMO_DIR / "data.csv").read_bytes()}},
        headers=headers,
    )
    dataset = upload.json()["dataset"]["id"]
    spec = tomllib.loads((DEMO_DIR / "claim.toml").read_text(encoding="utf-8"))
    claim = request.post(
        f"{base}/api/v1/cases/{case}/claims", data={"dataset_id": dataset, "spec": spec}, headers=headers
    ).json()["claim"]["id"]
    refit = request.post(
        f"{base}/api/v1/cases/{case}/refits", data={"claim_id": claim, "dataset_id": dataset}, headers=headers
    ).json()
    assert refit["state"] == "finished", refit
    return case, refit["id"]
