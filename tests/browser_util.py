"""Headless Chromium for the tests: Debian's system browser driven by Playwright.

Playwright's own browser download does not work on the CI machines, so the tests point it at
``/usr/bin/chromium`` (``apt-get install chromium``). :func:`require_browser` skips a test with
the reason when the browser or the Python package is missing, and fails it instead when the
environment says the browser must be there (``CI_REQUIRE_BROWSER=1``, set by ``.ci/run``).
"""

from __future__ import annotations

import contextlib
import os
import shutil
from pathlib import Path

import pytest

CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
                 "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]


def chromium_path() -> str | None:
    for name in ("chromium", "chromium-browser"):
        found = shutil.which(name)
        if found:
            return found
    return None


def require_browser() -> str:
    """The browser's path, or skip (fail when ``CI_REQUIRE_BROWSER=1``) saying what is missing."""
    missing = []
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        missing.append("the Python package playwright (pip install playwright)")
    path = chromium_path()
    if path is None:
        missing.append("Debian's chromium (apt-get install chromium)")
    if missing:
        reason = "browser check needs " + " and ".join(missing)
        if os.environ.get("CI_REQUIRE_BROWSER") == "1":
            pytest.fail(reason + " (CI_REQUIRE_BROWSER=1)")
        pytest.skip(reason)
    return path


@contextlib.contextmanager
def offline_page(viewport=(1400, 1000)):
    """A page with every http(s) request refused, and the console errors it logged."""
    from playwright.sync_api import sync_playwright

    path = require_browser()
    errors: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=path, args=CHROMIUM_ARGS)
        try:
            context = browser.new_context(viewport={"width": viewport[0], "height": viewport[1]})
            context.route("http*://**", lambda route: route.abort())
            page = context.new_page()
            page.on("console", lambda m: errors.append(m.text) if m.type == "error" else None)
            page.on("pageerror", lambda exc: errors.append(f"page error: {exc}"))
            yield page, errors
        finally:
            browser.close()


def file_url(path: Path) -> str:
    return Path(path).resolve().as_uri()
