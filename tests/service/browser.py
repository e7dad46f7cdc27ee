"""A real headless Chromium for the page tests (Debian's ``chromium`` and ``chromium-driver``,
driven by selenium), and where its screenshots go.

The machine's network may be closed: Chromium is started with everything that would reach
out (sync, component updates, background networking, QUIC) switched off and a new, empty
profile, or it hangs on connections. Tests skip, saying why, only where Chromium, its
driver or selenium cannot be found (``.ci/run`` installs them where missing).
"""
from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

import pytest

CHROMIUM_FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                  "--disable-background-networking", "--disable-component-update", "--disable-sync",
                  "--disable-dev-shm-usage", "--window-size=1400,1000")
ARTEFACTS_ENV = "UVDOSE_TEST_ARTEFACTS"


def _find(*names: str) -> str | None:
    for name in names:
        found = shutil.which(name) or (f"/usr/bin/{name}" if Path(f"/usr/bin/{name}").exists() else None)
        if found:
            return found
    return None


def start_chromium(scripts: bool = True):
    """A selenium driver for a fresh headless Chromium (``scripts=False``: page scripts off)."""
    try:
        from selenium import webdriver
        from selenium.webdriver.chrome.service import Service
    except ImportError:  # pragma: no cover - the test extra installs selenium
        pytest.skip("selenium is not installed (pip install -e '.[test]')")
    binary, driver = _find("chromium", "chromium-browser"), _find("chromedriver")
    if binary is None or driver is None:
        pytest.skip("Chromium or chromedriver not found: apt-get install -y chromium chromium-driver "
                    "(.ci/run does this where it can)")
    options = webdriver.ChromeOptions()
    options.binary_location = binary
    for flag in CHROMIUM_FLAGS:
        options.add_argument(flag)
    profile = tempfile.mkdtemp(prefix="uvdose-chromium-")
    options.add_argument(f"--user-data-dir={profile}")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    if not scripts:
        options.add_experimental_option("prefs", {"profile.managed_default_content_settings.javascript": 2})
    browser = webdriver.Chrome(service=Service(driver), options=options)
    browser.set_page_load_timeout(60)
    browser.uvdose_profile = profile
    return browser


def stop_chromium(browser) -> None:
    try:
        browser.quit()
    finally:
        shutil.rmtree(getattr(browser, "uvdose_profile", ""), ignore_errors=True)


class Artefacts:
    """Screenshots kept under the pytest tmp dir, and copied to $UVDOSE_TEST_ARTEFACTS if set."""

    def __init__(self, directory: Path):
        self.directory = directory

    def screenshot(self, browser, name: str, full_page: bool = False) -> Path:
        path = self.directory / f"{name}.png"
        if full_page:
            height = browser.execute_script("return document.documentElement.scrollHeight")
            browser.set_window_size(1400, min(int(height), 16000))
        browser.save_screenshot(str(path))
        if full_page:
            browser.set_window_size(1400, 1000)
        target = os.environ.get(ARTEFACTS_ENV)
        if target:
            Path(target).mkdir(parents=True, exist_ok=True)
            shutil.copy2(path, Path(target) / path.name)
        return path
