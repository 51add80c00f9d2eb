"""The workbench end to end: a real server (uvicorn, started as a user would, by the command)
and a real headless browser (Debian's chromium and chromedriver, driven by selenium; nothing
downloads a browser). The bench page records from a fake microphone that Chromium feeds from
a synthesised strike WAV.

Skipped, with the reason printed, where the machine has no chromium or chromedriver
(`.ci/run` installs them with apt-get).
"""

from __future__ import annotations

import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import numpy as np
import pytest
from test_workbench_api import HALF_FINISHED, INSTRUMENT, QUICK_BAR, TAP_HZ, tap_wav

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMEDRIVER = shutil.which("chromedriver") or "/usr/bin/chromedriver"

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(
        not (os.path.exists(CHROMIUM) and os.path.exists(CHROMEDRIVER)),
        reason="Debian's chromium and chromium-driver are not installed "
        "(apt-get install chromium chromium-driver); the browser tests need them",
    ),
]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def workshop(tmp_path: Path) -> Path:
    folder = tmp_path / "workshop"
    folder.mkdir()
    (folder / "half.toml").write_text(HALF_FINISHED.read_text(encoding="utf-8"), "utf-8")
    (folder / "e5.toml").write_text(QUICK_BAR, encoding="utf-8")
    (folder / "glock.toml").write_text(INSTRUMENT, encoding="utf-8")
    return folder


@pytest.fixture
def server(workshop: Path):
    port = _free_port()
    proc = subprocess.Popen(
        [
            sys.executable,
            "-m",
            "tonewright",
            "workbench",
            str(workshop),
            "--port",
            str(port),
            "--no-browser",
        ],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
    )
    url = f"http://127.0.0.1:{port}/"
    for _ in range(200):
        try:
            urllib.request.urlopen(url + "api/workshop", timeout=1).read()
            break
        except OSError:
            if proc.poll() is not None:
                raise RuntimeError(proc.stderr.read().decode()) from None
            time.sleep(0.1)
    yield url
    proc.terminate()
    proc.wait(10)


@pytest.fixture
def browser(tmp_path: Path):
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    strike = tmp_path / "strike.wav"
    tap_wav(strike, seconds=2.5)
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in (
        "--headless=new",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-quic",
        "--no-first-run",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        f"--user-data-dir={tmp_path / 'profile'}",
        "--window-size=1280,1000",
        "--use-fake-ui-for-media-stream",
        "--use-fake-device-for-media-stream",
        f"--use-file-for-fake-audio-capture={strike}",
        "--autoplay-policy=no-user-gesture-required",
    ):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=options)
    yield driver
    driver.quit()


def _wait(driver, test, timeout: float, what: str):
    end = time.monotonic() + timeout
    while time.monotonic() < end:
        value = test()
        if value:
            return value
        time.sleep(0.2)
    errors = driver.find_elements("css selector", ".error")
    raise AssertionError(f"{what}: timed out; page errors: {[e.text for e in errors]}")


def _screenshot_not_blank(driver, path: Path) -> None:
    import matplotlib.image as mpimg

    driver.save_screenshot(str(path))
    pixels = mpimg.imread(path)[..., :3]
    assert pixels.std() > 0.05, f"{path.name} looks blank"
    # more than a background and one colour: text, tables and lines were drawn
    assert len(np.unique((pixels * 15).astype(int).reshape(-1, 3), axis=0)) > 20


def test_bar_page_designs_a_bar(server, browser, tmp_path):
    from selenium.webdriver.support.ui import Select

    browser.get(server)
    by_id = lambda i: browser.find_element("id", i)  # noqa: E731
    _wait(browser, lambda: "e5.toml" in by_id("bar-file").text, 10, "file list")
    Select(by_id("bar-file")).select_by_visible_text("e5.toml")
    _wait(browser, lambda: "length = 200" in by_id("bar-text").get_attribute("value"), 10, "editor")
    by_id("bar-modes").click()
    _wait(browser, lambda: browser.find_elements("id", "modes-table"), 30, "modes table")
    Select(by_id("design-fidelity")).select_by_value("beam")
    by_id("design-run").click()
    _wait(browser, lambda: "meets the target" in by_id("design-status").text, 120, "design")
    assert "bending 1" in by_id("design-summary").text
    assert browser.find_elements("css selector", "#design-figures img")
    _screenshot_not_blank(browser, tmp_path / "bar-page.png")

    # a bad field is shown inline with the command line's words
    text = by_id("bar-text")
    text.clear()
    text.send_keys(QUICK_BAR.replace("width = 32", "width = -32"))
    by_id("bar-check").click()
    _wait(browser, lambda: "bar.width" in by_id("bar-error").text, 10, "inline error")


def test_bench_page_records_a_tap_and_shows_the_next_cut(server, browser, tmp_path):
    from selenium.webdriver.support.ui import Select

    browser.get(server)
    by_id = lambda i: browser.find_element("id", i)  # noqa: E731
    by_id("tab-bench").click()
    _wait(browser, lambda: "half.toml" in by_id("bench-bar").text, 10, "bar list")
    Select(by_id("bench-bar")).select_by_visible_text("half.toml")
    by_id("bench-seconds").clear()
    by_id("bench-seconds").send_keys("3")
    by_id("bench-record").click()
    _wait(browser, lambda: browser.find_elements("id", "next-cut"), 60, "next cut")
    shown = [
        float(row.find_elements("tag name", "td")[0].text)
        for row in browser.find_elements("css selector", "#bench-partials tr")[1:]
        if row.find_elements("tag name", "td") and "strike" not in row.text
    ]
    # the fundamental and the strong bending partials come through the fake microphone
    for f in (TAP_HZ[0], TAP_HZ[2]):
        assert min(abs(1200 * np.log2(g / f)) for g in shown) < 5.0, shown
    assert "mm deep" in by_id("next-cut").text
    assert browser.find_elements("css selector", "#bench-map svg polyline")  # the tuning map
    assert "cannot be put back" in by_id("bench-caution").text
    by_id("bench-cut-done").click()
    _wait(
        browser,
        lambda: len(browser.find_elements("css selector", "#bench-history li")) == 2,
        10,
        "history",
    )
    _screenshot_not_blank(browser, tmp_path / "bench-page.png")

    by_id("tab-instrument").click()
    _wait(browser, lambda: "C#5" in by_id("inst-table").text, 20, "instrument table")
    _screenshot_not_blank(browser, tmp_path / "instrument-page.png")
