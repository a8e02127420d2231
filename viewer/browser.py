"""Headless Chromium for looking at the report: find the browser, take a screenshot of a page.

Used by the report tests and by ``python -m viewer.screenshots``. Chromium runs with a fresh
profile and its background networking off; ``proxy`` sends every request it would make to a
local address, so a test can see whether the page asks for anything.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import tempfile
from pathlib import Path

NAMES = ("chromium", "chromium-browser", "google-chrome", "chrome")


def find_chromium() -> str | None:
    explicit = os.environ.get("DRILLAXIS_CHROMIUM")
    if explicit:
        return explicit
    for name in NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


def screenshot(page, png, width: int = 1200, height: int = 900, proxy: str | None = None,
               timeout_s: float = 120.0) -> subprocess.CompletedProcess:
    """Load ``page`` (a path or URL) and write its first ``width`` x ``height`` pixels to ``png``."""
    browser = find_chromium()
    if browser is None:
        raise FileNotFoundError("no Chromium found (install Debian's chromium, or set DRILLAXIS_CHROMIUM)")
    url = page if "://" in str(page) else Path(page).resolve().as_uri()
    with tempfile.TemporaryDirectory() as profile:
        command = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--enable-unsafe-swiftshader",
                   f"--user-data-dir={profile}", "--no-first-run", "--disable-sync", "--disable-default-apps",
                   "--disable-background-networking", "--disable-component-update", "--disable-extensions",
                   "--disable-quic", "--hide-scrollbars", f"--window-size={width},{height}",
                   f"--screenshot={Path(png).resolve()}"]
        if proxy:
            command += [f"--proxy-server={proxy}", "--proxy-bypass-list=<-loopback>"]
        return subprocess.run(command + [url], capture_output=True, text=True, timeout=timeout_s)
