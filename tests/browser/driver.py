"""A headless Chromium from the system packages, driven with Selenium, for the report page tests.

Nothing is downloaded: the browser and its driver are the Debian packages ``chromium`` and
``chromium-driver`` (``.ci/run`` installs them when missing). Without them the tests skip, unless
``TRACER_REQUIRE_BROWSER=1`` (set by CI), when they fail.
"""

from __future__ import annotations

import json
import os
import shutil
import time
from pathlib import Path

import pytest

CANDIDATES = {"browser": ("/usr/bin/chromium", "/usr/bin/chromium-browser"), "driver": ("/usr/bin/chromedriver",)}


def find(kind: str) -> str | None:
    for path in CANDIDATES[kind]:
        if Path(path).is_file():
            return path
    return shutil.which("chromium" if kind == "browser" else "chromedriver")


def start_browser(width=1400, height=900):
    browser, driver_path = find("browser"), find("driver")
    if browser is None or driver_path is None:
        if os.environ.get("TRACER_REQUIRE_BROWSER") == "1":
            pytest.fail("Chromium or ChromeDriver missing: apt-get install -y chromium chromium-driver")
        pytest.skip("Chromium or ChromeDriver missing (apt-get install -y chromium chromium-driver)")
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = browser
    for argument in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                     f"--window-size={width},{height}", "--force-device-scale-factor=1", "--force-color-profile=srgb",
                     "--no-first-run", "--disable-background-networking", "--disable-component-update",
                     "--disable-default-apps", "--disable-sync"):
        options.add_argument(argument)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    return webdriver.Chrome(service=Service(executable_path=driver_path), options=options)


def open_page(driver, folder: Path, hash_part: str = "", timeout=20.0) -> float:
    """Open FOLDER/index.html from file:// and wait until the page says it is ready; seconds taken."""
    url = (Path(folder) / "index.html").resolve().as_uri() + hash_part
    started = time.perf_counter()
    driver.get(url)
    wait_ready(driver, 1, timeout)
    return time.perf_counter() - started


def wait_ready(driver, count: int, timeout=20.0) -> None:
    deadline = time.perf_counter() + timeout
    while time.perf_counter() < deadline:
        if int(driver.execute_script("return document.documentElement.dataset.ready || 0")) >= count:
            return
        time.sleep(0.02)
    raise AssertionError(f"the page did not become ready within {timeout} s")


def navigate(driver, hash_part: str, timeout=20.0) -> None:
    before = int(driver.execute_script("return document.documentElement.dataset.ready || 0"))
    driver.execute_script("location.hash = arguments[0]", hash_part)
    wait_ready(driver, before + 1, timeout)


def console_errors(driver) -> list[str]:
    return [entry["message"] for entry in driver.get_log("browser") if entry["level"] in ("SEVERE", "ERROR")]


def requested_urls(driver) -> list[str]:
    """Every URL the page asked for (Chrome DevTools Network events)."""
    urls = []
    for entry in driver.get_log("performance"):
        message = json.loads(entry["message"])["message"]
        if message.get("method") == "Network.requestWillBeSent":
            urls.append(message["params"]["request"]["url"])
    return urls


def canvas_pixels(driver, selector: str):
    """The RGBA bytes of a canvas as (H, W, 4) uint8, read back with getImageData."""
    import numpy as np

    width, height, data = driver.execute_script(
        "const c = document.querySelector(arguments[0]);"
        "const d = c.getContext('2d').getImageData(0, 0, c.width, c.height).data;"
        "return [c.width, c.height, Array.from(d)];", selector)
    return np.array(data, dtype=np.uint8).reshape(height, width, 4)
