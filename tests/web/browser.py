"""Headless Chromium through chromium-driver (Debian's chromium, chromium-driver and
python3-selenium), with the viewport set exactly, and waits that name what they waited for."""
import os
import time

from selenium import webdriver
from selenium.webdriver.chrome.service import Service
from selenium.webdriver.common.action_chains import ActionChains
from selenium.webdriver.common.by import By


def chromium(width=1024, height=600):
    opts = webdriver.ChromeOptions()
    opts.binary_location = "/usr/bin/chromium"
    for a in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--no-first-run",
              "--disable-extensions", "--disable-background-networking", "--disable-sync", "--disable-quic",
              f"--window-size={width},{height}"):
        opts.add_argument(a)
    driver = webdriver.Chrome(service=Service("/usr/bin/chromedriver"), options=opts)
    set_viewport(driver, width, height)
    return driver


def set_viewport(driver, width, height):
    driver.execute_cdp_cmd("Emulation.setDeviceMetricsOverride",
                           {"width": width, "height": height, "deviceScaleFactor": 1, "mobile": False})


def wait_for(what, predicate, timeout_s=30, interval_s=0.05):
    deadline = time.monotonic() + timeout_s
    last = None
    while time.monotonic() < deadline:
        try:
            last = predicate()
            if last:
                return last
        except Exception as e:   # the page is being re-rendered: look again
            last = e
        time.sleep(interval_s)
    raise AssertionError(f"waited {timeout_s} s for {what}; last seen: {last!r}")


def by_id(driver, element_id):
    return driver.find_element(By.ID, element_id)


def press(driver, *keys):
    """Keys as the operator's keyboard (or barcode scanner) sends them to the focused element."""
    ActionChains(driver).send_keys(*keys).perform()


def screenshot(driver, name):
    folder = os.environ.get("ECHOLINE_SCREENSHOT_DIR")
    if not folder:
        return None
    os.makedirs(folder, exist_ok=True)
    path = os.path.join(folder, name + ".png")
    driver.save_screenshot(path)
    return path
