"""One offline Chromium page for the tests that open a modalnb HTML file (report, shape view).

Debian's ``chromium`` driven by Playwright (never ``playwright install``); every request that
is not a ``file://`` URL is blocked and recorded, so a page that reaches for the network
fails its test. ``MODALNB_REQUIRE_BROWSER=1`` (CI) turns a missing browser into a failure.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import tempfile
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

import pytest

CHROMIUM = shutil.which("chromium")
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--disable-dev-shm-usage"]


def chromium_or_skip() -> None:
    """Skip (or, with MODALNB_REQUIRE_BROWSER=1, fail) when there is no Chromium."""
    if CHROMIUM is None:
        if os.environ.get("MODALNB_REQUIRE_BROWSER") == "1":
            pytest.fail("MODALNB_REQUIRE_BROWSER=1 but no `chromium` on PATH (apt-get install chromium)")
        pytest.skip("no `chromium` on PATH (Debian package chromium); browser checks skipped")


@dataclass
class OfflinePage:
    """The page and what it tried: external requests, dialogs, page errors."""

    page: Any
    external: list[str] = field(default_factory=list)
    dialogs: list[str] = field(default_factory=list)
    errors: list[str] = field(default_factory=list)


@contextlib.contextmanager
def offline_page(url: str, *, wait_for: str, timeout_ms: int = 30000, media: str | None = None,
                 **context: Any) -> Iterator[OfflinePage]:
    """Open `url` (a ``file://`` URL) in a fresh offline Chromium context and wait for the
    selector `wait_for`; extra keyword arguments go to the browser context (``viewport``)."""
    from playwright import sync_api

    chromium_or_skip()
    with sync_api.sync_playwright() as p:
        ctx = p.chromium.launch_persistent_context(tempfile.mkdtemp(), executable_path=CHROMIUM,
                                                   headless=True, args=ARGS, **context)
        try:
            out = OfflinePage(ctx.new_page())

            def route(r):
                if r.request.url.startswith("file://"):
                    r.continue_()
                else:
                    out.external.append(r.request.url)
                    r.abort()

            ctx.route("**/*", route)
            out.page.on("dialog", lambda d: (out.dialogs.append(d.message), d.dismiss()))
            out.page.on("pageerror", lambda e: out.errors.append(str(e)))
            if media is not None:
                out.page.emulate_media(media=media)
            out.page.goto(url)
            out.page.wait_for_selector(wait_for, timeout=timeout_ms)
            yield out
        finally:
            ctx.close()
