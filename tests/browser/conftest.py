"""JupyterLab + Playwright + Debian Chromium for the real-browser tests.

* Playwright is a test dependency, imported directly: without it these tests fail, never
  skip. Without ``chromium`` on PATH they are skipped with a reason, unless
  ``MODALNB_REQUIRE_BROWSER=1`` (CI), which turns a missing browser into a failure too.
  Never ``playwright install``: the tests drive the system Chromium.
* One JupyterLab server per test session, on a free 127.0.0.1 port, with a token, rooted in
  a temporary folder holding a copy of notebooks/; stopped by its PID at the end.
* One Chromium context per module; every request that does not go to 127.0.0.1 is blocked
  and recorded (the toolkit must work offline); a failed test saves a screenshot to
  ``$MODALNB_SCREENSHOTS`` (default: <tmp>/modalnb-screenshots).
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.error
import urllib.request
from pathlib import Path

import pytest
from playwright.sync_api import Error as PlaywrightError
from playwright.sync_api import sync_playwright

CHROMIUM = shutil.which("chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--disable-dev-shm-usage"]
TESTS = Path(__file__).resolve().parents[1]
NOTEBOOKS = TESTS.parent / "notebooks"
SCREENSHOTS = Path(os.environ.get("MODALNB_SCREENSHOTS", Path(tempfile.gettempdir()) / "modalnb-screenshots"))
SETTINGS = {"@jupyterlab/apputils-extension:notification":
            {"fetchNews": "false", "checkForUpdates": False, "doNotDisturbMode": True}}


def _require_browser() -> None:
    """Skip when there is no Chromium, unless MODALNB_REQUIRE_BROWSER=1: then fail."""
    if CHROMIUM is None:
        if os.environ.get("MODALNB_REQUIRE_BROWSER") == "1":
            pytest.fail("MODALNB_REQUIRE_BROWSER=1 but no `chromium` on PATH "
                        "(apt-get install chromium)", pytrace=False)
        pytest.skip("no `chromium` on PATH (Debian package chromium); real-browser tests skipped")


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    outcome = yield
    rep = outcome.get_result()
    if rep.when == "call":
        item.modalnb_failed = rep.failed


@pytest.fixture(scope="session")
def lab():
    """A running JupyterLab: dict(url, token, root, log)."""
    _require_browser()
    tmp = Path(tempfile.mkdtemp(prefix="modalnb-lab-"))
    root = tmp / "root"
    shutil.copytree(NOTEBOOKS, root, ignore=shutil.ignore_patterns(".ipynb_checkpoints", "modalnb-*"))
    app = tmp / "app-settings"
    app.mkdir()
    (app / "overrides.json").write_text(json.dumps(SETTINGS))
    env = dict(os.environ)
    port, token = _free_port(), os.urandom(12).hex()
    log = open(tmp / "lab.log", "w")  # noqa: SIM115 - closed at teardown
    cmd = [sys.executable, "-m", "jupyterlab", "--no-browser", "--allow-root", "--ip=127.0.0.1",
           f"--port={port}", "--ServerApp.port_retries=0", f"--IdentityProvider.token={token}",
           f"--ServerApp.root_dir={root}", "--LabApp.expose_app_in_browser=True",
           "--LabApp.news_url=None", f"--LabApp.user_settings_dir={tmp / 'settings'}",
           f"--LabApp.workspaces_dir={tmp / 'ws'}", f"--LabApp.app_settings_dir={app}"]
    proc = subprocess.Popen(cmd, stdout=log, stderr=subprocess.STDOUT, env=env, cwd=root)
    url = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 60
    while True:
        try:
            with urllib.request.urlopen(f"{url}/api/status?token={token}", timeout=2) as r:
                if r.status == 200:
                    break
        except (urllib.error.URLError, ConnectionError, TimeoutError):
            pass
        if proc.poll() is not None or time.monotonic() > deadline:
            proc.kill()
            log.close()
            pytest.fail(f"JupyterLab did not start; log: {tmp / 'lab.log'}", pytrace=False)
        time.sleep(0.3)
    yield {"url": url, "token": token, "root": root, "log": tmp / "lab.log"}
    proc.send_signal(signal.SIGTERM)
    try:
        proc.wait(timeout=10)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait(timeout=5)
    log.close()


@pytest.fixture(scope="module")
def browser(lab):
    """A Chromium context with every non-127.0.0.1 request blocked and recorded."""
    _require_browser()
    external: list[str] = []
    with sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(
            tempfile.mkdtemp(prefix="modalnb-chromium-"), executable_path=CHROMIUM, headless=True,
            args=ARGS, viewport={"width": 1280, "height": 1000})

        def route(r):
            u = r.request.url
            if u.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:", "about:")):
                r.continue_()
            else:
                external.append(u)
                r.abort()

        ctx.route("**/*", route)
        ctx.modalnb_external = external
        try:
            yield ctx
        finally:
            ctx.close()


@pytest.fixture
def shoot(request):
    """Register a page; it is photographed if the test fails."""
    pages = []
    yield pages.append
    if getattr(request.node, "modalnb_failed", False):
        SCREENSHOTS.mkdir(parents=True, exist_ok=True)
        for i, page in enumerate(pages):
            path = SCREENSHOTS / f"{request.node.name}-{i}.png"
            try:
                page.screenshot(path=str(path), full_page=True)
                print(f"screenshot saved: {path}")
            except PlaywrightError as exc:  # a closed page must not hide the failure
                print(f"no screenshot ({exc})")
