"""Benchmark (not a test): on loopback, the operator page's load time in headless Chromium and
the time from the daemon judging a unit to the page receiving its verdict. Prints a JSON
object of samples in milliseconds; scripts/bench puts the medians in its table.
usage: bench_pages.py [--loads N] [--units N] [--json FILE]"""
import argparse
import datetime
import json
import statistics
import sys

from selenium.webdriver.common.keys import Keys

from browser import by_id, chromium, press, wait_for
from operator_page_test import pick_units
from station_fixture import Station, calibrate_over_api


def utc_ms(text):
    return datetime.datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=datetime.timezone.utc).timestamp() * 1000


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--loads", type=int, default=20, help="page loads to time (1-1000)")
    ap.add_argument("--units", type=int, default=20, help="units whose verdict latency is timed (1-200)")
    ap.add_argument("--json", help="also write the result here")
    a = ap.parse_args()
    if not 1 <= a.loads <= 1000 or not 1 <= a.units <= 200:
        ap.error("--loads takes 1 to 1000 and --units 1 to 200")
    station = Station().start()
    driver = chromium(1024, 600)
    try:
        api = station.api_session()
        calibrate_over_api(station, api)
        api.close()
        load_ms, live_ms = [], []
        for _ in range(a.loads + 1):   # the first load warms Chromium up and is not counted
            driver.get(station.url)
            wait_for("the page to go live", lambda: driver.execute_script(
                "return performance.getEntriesByName('station-live').length > 0"))
            nav = driver.execute_script("const n = performance.getEntriesByType('navigation')[0];"
                                        "return [n.loadEventEnd, performance.getEntriesByName('station-live')[0].startTime];")
            load_ms.append(nav[0])
            live_ms.append(nav[1])
        load_ms, live_ms = load_ms[1:], live_ms[1:]
        latency_ms = []
        previous = None
        for serial in pick_units(station)[:a.units]:
            station.connect_unit(serial)
            press(driver, serial, Keys.ENTER)
            box = by_id(driver, "verdict")
            wait_for(f"the verdict of {serial}", lambda: box.get_attribute("data-serial") == serial
                     and box.get_attribute("data-run-id") != previous, timeout_s=60)
            previous = box.get_attribute("data-run-id")
            latency_ms.append(float(box.get_attribute("data-received-ms")) - utc_ms(box.get_attribute("data-ended-utc")))
    finally:
        driver.quit()
        station.close()
    result = {"page_load_ms": load_ms, "page_live_ms": live_ms, "verdict_latency_ms": latency_ms}
    for k, v in result.items():
        print(f"{k}: median {statistics.median(v):.1f}  min {min(v):.1f}  max {max(v):.1f}  (n={len(v)})", file=sys.stderr)
    if a.json:
        with open(a.json, "w") as f:
            json.dump(result, f, indent=2)
    print(json.dumps(result))


if __name__ == "__main__":
    main()
