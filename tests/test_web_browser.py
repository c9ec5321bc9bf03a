"""The control page in a real browser: Debian's headless Chromium driven by Selenium
(through the system chromedriver), against simulated boards running the real firmware.

What is checked is what a person sees: the null bearing and preset shown on the page
after pressing its buttons, and a second page following a change made on the command
line. Expected values come from the fed-end rule (a terminated loop nulls toward its
terminated end: common practice) and the station file's presets. Screenshots (desktop
and phone widths) are saved in the test's temporary folder.
"""

from __future__ import annotations

import os
import subprocess
import sys
import time
from pathlib import Path

import pytest

from mqtt_support import MqttSimBoard
from web_support import serve, station_file, stop

CHROMIUM = "/usr/bin/chromium"
CHROMEDRIVER = "/usr/bin/chromedriver"

pytestmark = pytest.mark.slow


def _missing() -> str | None:
    for path in (CHROMIUM, CHROMEDRIVER):
        if not os.access(path, os.X_OK):
            return f"{path} is not installed (make test installs chromium and chromium-driver)"
    try:
        import selenium  # noqa: F401
    except ImportError:
        return "selenium is not installed (the dev extra has it)"
    return None


@pytest.fixture(scope="module")
def browser():
    why = _missing()
    if why:
        pytest.skip(why)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                "--disable-background-networking", "--disable-component-update",
                "--window-size=1280,1000"):
        opts.add_argument(arg)
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=opts)
    driver.set_page_load_timeout(30)
    yield driver
    driver.quit()


def role(driver, name: str):
    from selenium.webdriver.common.by import By

    return driver.find_element(By.CSS_SELECTOR, f'[data-device="flag-ne"] [data-role="{name}"]')


def wait_text(driver, name: str, want: str, timeout_s: float = 15.0) -> str:
    """Wait until element ``name`` shows ``want``; returns what it shows."""
    from selenium.common.exceptions import NoSuchElementException, StaleElementReferenceException

    deadline = time.monotonic() + timeout_s
    text = ""
    while time.monotonic() < deadline:
        try:
            text = role(driver, name).text
            if text == want:
                return text
        except (NoSuchElementException, StaleElementReferenceException):
            pass
        time.sleep(0.05)
    return text


def screenshot(driver, path: Path, width: int) -> None:
    driver.set_window_size(width, 900)
    time.sleep(0.3)
    height = driver.execute_script("return document.documentElement.scrollHeight")
    driver.set_window_size(width, min(int(height) + 120, 3000))
    time.sleep(0.3)
    driver.save_screenshot(str(path))


def test_flip_and_preset_change_the_page(browser, tmp_path):
    station = station_file(tmp_path, link=f"sim://?state={tmp_path / 'sim-state'}")
    desk, server = serve(station)
    try:
        browser.get(server.url)
        # fed A at boot: null toward end B = 65 + 180 = 245 deg
        assert wait_text(browser, "bearing", "245°") == "245°"
        role(browser, "flip").click()
        assert wait_text(browser, "bearing", "65°") == "65°"   # fed B: toward end A
        assert "fed end B" in role(browser, "ends").text
        from selenium.webdriver.common.by import By

        west = browser.find_element(By.CSS_SELECTOR,
                                    '[data-device="flag-ne"] [data-preset="dx-east"]')
        west.click()
        assert wait_text(browser, "preset-now", "dx-east") == "dx-east"
        assert wait_text(browser, "bearing", "245°") == "245°"
        assert west.get_attribute("aria-pressed") == "true"
        # a refused command shows its reason on the page
        field = role(browser, "ohms")
        field.clear()
        field.send_keys("90000")
        role(browser, "ohms-form").submit()
        deadline = time.monotonic() + 10
        while "far outside" not in role(browser, "msg").text and time.monotonic() < deadline:
            time.sleep(0.05)
        assert "far outside" in role(browser, "msg").text
        assert role(browser, "rose").find_element(By.CSS_SELECTOR, "svg path.now")
        screenshot(browser, tmp_path / "page-desktop.png", 1280)
        screenshot(browser, tmp_path / "page-phone.png", 390)
        out = os.environ.get("NULLSTEER_SCREENSHOTS")
        if out:  # a developer's look at them: NULLSTEER_SCREENSHOTS=DIR
            Path(out).mkdir(parents=True, exist_ok=True)
            for name in ("page-desktop.png", "page-phone.png"):
                (Path(out) / name).write_bytes((tmp_path / name).read_bytes())
        assert (tmp_path / "page-phone.png").stat().st_size > 10_000
    finally:
        browser.set_window_size(1280, 1000)
        stop(desk, server)


def test_a_second_page_sees_a_command_line_change(browser, tmp_path, make_broker):
    broker = make_broker()
    block = {"host": broker.host, "port": broker.port, "id": "flag-ne",
             "discovery_prefix": "webtest", "end_a_bearing_deg": 65.0}
    link = broker.url("flag-ne")
    with MqttSimBoard(block, state_dir=tmp_path / "mqtt-state"):
        desk, server = serve(station_file(tmp_path, link=link), poll_s=30.0)
        try:
            browser.get(server.url)
            first = browser.current_window_handle
            assert wait_text(browser, "bearing", "245°") == "245°"
            browser.switch_to.new_window("tab")
            browser.get(server.url)
            assert wait_text(browser, "bearing", "245°") == "245°"
            done = subprocess.run([sys.executable, "-m", "nullsteer", "set", "--link", link,
                                   "--fed-end", "B", "--ohms", "1500"],
                                  capture_output=True, text=True, timeout=60)
            assert done.returncode == 0, done.stderr
            # the poll is 30 s: the board's retained state brings the change
            assert wait_text(browser, "bearing", "65°", timeout_s=10) == "65°"
            browser.switch_to.window(first)
            assert wait_text(browser, "bearing", "65°", timeout_s=10) == "65°"
        finally:
            for handle in browser.window_handles[1:]:
                browser.switch_to.window(handle)
                browser.close()
            browser.switch_to.window(browser.window_handles[0])
            stop(desk, server)
