"""Benchmark (not a test): on loopback, the operator page's load time in headless Chromium, the
time from the daemon judging a unit to the page receiving its verdict, and the daemon's cycle
and sweep times with nobody watching against both pages open and /metrics scraped at 10 Hz.
Prints a JSON object of samples (milliseconds); scripts/bench puts the medians in its table.
usage: bench_pages.py [--loads N] [--units N] [--json FILE]"""
import argparse
import datetime
import json
import statistics
import sys
import threading
import urllib.request

from selenium.webdriver.common.keys import Keys

from browser import by_id, chromium, press, wait_for
from operator_page_test import pick_units
from station_fixture import Station, calibrate_over_api, test_over_api


def utc_ms(text):
    return datetime.datetime.strptime(text, "%Y-%m-%dT%H:%M:%S.%fZ").replace(tzinfo=datetime.timezone.utc).timestamp() * 1000


def cycles(station, serials, lot):
    """Tests each serial through the JSON-lines API; returns the daemon's (total_s, sweep_s) in ms."""
    api = station.api_session()
    total, sweep = [], []
    for serial in serials:
        station.connect_unit(serial)
        run = test_over_api(station, api, serial, lot)
        total.append(run["timings"]["total_s"] * 1000)
        sweep.append(run["timings"]["sweep_s"] * 1000)
    api.close()
    return total, sweep


def scrape_metrics(url, stop):
    while not stop.is_set():
        with urllib.request.urlopen(url + "metrics", timeout=10) as r:
            r.read()
        stop.wait(0.1)


def read_events(url, stop):
    """A page's event stream without a browser: opens a session and reads every event."""
    req = urllib.request.Request(url + "session", method="POST", data=b"{}",
                                 headers={"Content-Type": "application/json", "X-Echoline-Session": "new"})
    with urllib.request.urlopen(req, timeout=10) as r:
        session = json.loads(r.read())["session"]
    with urllib.request.urlopen(url + "events?session=" + session, timeout=30) as stream:
        while not stop.is_set() and stream.readline():
            pass


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
        # Does anyone watching slow the sweep engine? Blocks of units: alone; four event streams and
        # /metrics at 10 Hz (no browser); both pages in Chromium and /metrics; alone again.
        n = a.units
        serials = pick_units(station)[n:n + 4 * n]
        driver.get("about:blank")
        alone_total, alone_sweep = cycles(station, serials[:n], "LOT-BENCH")
        stop = threading.Event()
        watchers = [threading.Thread(target=read_events, args=(station.url, stop)) for _ in range(4)]
        watchers.append(threading.Thread(target=scrape_metrics, args=(station.url, stop)))
        for w in watchers:
            w.start()
        try:
            streams_total, streams_sweep = cycles(station, serials[n:2 * n], "LOT-BENCH")
        finally:
            stop.set()
        for w in watchers:
            w.join()
        driver.get(station.url)
        driver.switch_to.new_window("tab")
        driver.get(station.url + "supervisor")
        stop = threading.Event()
        scraper = threading.Thread(target=scrape_metrics, args=(station.url, stop))
        scraper.start()
        try:
            watched_total, watched_sweep = cycles(station, serials[2 * n:3 * n], "LOT-BENCH")
        finally:
            stop.set()
            scraper.join()
        driver.close()
        driver.switch_to.window(driver.window_handles[0])
        driver.get("about:blank")
        t2, s2 = cycles(station, serials[3 * n:], "LOT-BENCH")
        alone_total += t2
        alone_sweep += s2
    finally:
        driver.quit()
        station.close()
    result = {"page_load_ms": load_ms, "page_live_ms": live_ms, "verdict_latency_ms": latency_ms,
              "cycle_alone_ms": alone_total, "cycle_streams_ms": streams_total, "cycle_watched_ms": watched_total,
              "sweep_alone_ms": alone_sweep, "sweep_streams_ms": streams_sweep, "sweep_watched_ms": watched_sweep}
    for k, v in result.items():
        print(f"{k}: median {statistics.median(v):.1f}  min {min(v):.1f}  max {max(v):.1f}  (n={len(v)})", file=sys.stderr)
    if a.json:
        with open(a.json, "w") as f:
            json.dump(result, f, indent=2)
    print(json.dumps(result))


if __name__ == "__main__":
    main()
