"""The line supervisor's page in real headless Chromium: its counts match the run store (yield
by the store's one definition), the Pareto and the last runs, and it updates live while the
console tests another unit; the resonance histogram's caption names only the lines it draws and
its axis has evenly spaced round ticks."""
import math
import os
import unittest

from selenium.webdriver.common.by import By

from browser import by_id, chromium, screenshot, set_viewport, wait_for
from operator_page_test import pick_units
from station_fixture import SRC, Station, calibrate_over_api

LOT = "LOT-LINE-7"
UNITS = 14


class SupervisorPageTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.station = Station().start()
        cls.api = cls.station.api_session()
        calibrate_over_api(cls.station, cls.api)
        cls.serials = pick_units(cls.station)
        for serial in cls.serials[:UNITS] + cls.serials[:2]:   # two retests
            cls.run_unit(serial)
        cls.driver = chromium(1024, 600)

    @classmethod
    def run_unit(cls, serial):
        cls.station.connect_unit(serial)
        cls.api.send("test.start", {"serial": serial, "lot": LOT})
        ev = cls.api.until_event()
        assert ev["event"] == "result", ev
        return ev["run"]

    @classmethod
    def tearDownClass(cls):
        cls.driver.quit()
        cls.api.close()
        cls.station.close()

    def tile(self, name):
        return by_id(self.driver, "t-" + name).text

    def expect_store_counts(self):
        db = self.station.store()
        by_verdict = dict(db.execute("SELECT verdict, count(*) FROM runs WHERE lot = ? GROUP BY verdict", (LOT,)).fetchall())
        runs = sum(by_verdict.values())
        # A run is on record (aborted, "in progress") while it measures: wait for the page to show
        # the finished one.
        expected = {v: str(by_verdict.get(v, 0)) for v in ("pass", "fail", "inconclusive", "aborted")}
        wait_for(f"the page to show the stored runs {expected}",
                 lambda: self.driver.find_element(By.TAG_NAME, "body").get_attribute("data-runs") == str(runs)
                 and {v: self.tile(v) for v in expected} == expected)
        # Units tested: distinct serials with a finished run; final yield: latest finished run passed
        # (daemon/store/run_store.hpp, computed here straight from the table).
        units = db.execute("SELECT count(DISTINCT serial) FROM runs WHERE lot = ? AND verdict <> 'aborted'", (LOT,)).fetchone()[0]
        final_pass = db.execute(
            "SELECT count(*) FROM (SELECT serial, verdict FROM runs r WHERE lot = ?1 AND verdict <> 'aborted' AND seq = "
            "(SELECT max(seq) FROM runs WHERE serial = r.serial AND lot = ?1 AND verdict <> 'aborted')) WHERE verdict = 'pass'",
            (LOT,)).fetchone()[0]
        self.assertEqual(self.tile("units"), str(units))
        self.assertEqual(self.tile("final"), f"{100 * final_pass / units:.1f} %")
        rows = self.driver.find_elements(By.CSS_SELECTOR, "#units tr")
        self.assertEqual(len(rows), min(50, runs))
        latest = db.execute("SELECT serial, verdict FROM runs WHERE lot = ? ORDER BY started_utc DESC, seq DESC LIMIT 1",
                            (LOT,)).fetchone()
        self.assertEqual((rows[0].get_attribute("data-serial"), rows[0].get_attribute("data-verdict")), latest)
        return runs

    def test_counts_match_the_store_and_update_live(self):
        d = self.driver
        d.get(self.station.url + "supervisor")
        wait_for("the page to go live", lambda: by_id(d, "conn").get_attribute("data-state") == "live")
        runs = self.expect_store_counts()
        self.assertEqual(runs, UNITS + 2)
        self.assertIn(LOT, by_id(d, "lot-name").text)
        # Pareto: failed units by class, as the store's latest runs have them.
        bars = {t.get_attribute("data-class"): int(t.text) for t in d.find_elements(By.CSS_SELECTOR, "#pareto text[data-class]")}
        self.assertTrue(bars, "the lot has failures to show")
        self.assertIn("✓ valid", by_id(d, "cal-state").text)
        self.assertEqual(len(d.find_elements(By.CSS_SELECTOR, "#health li")), 2)
        screenshot(d, "supervisor-1024x600")
        set_viewport(d, 1920, 1080)
        screenshot(d, "supervisor-1920x1080")
        set_viewport(d, 1024, 600)
        # The console tests one more unit: the page follows without a reload.
        self.run_unit(self.serials[UNITS])
        self.assertEqual(self.expect_store_counts(), UNITS + 3)

    def histogram_parts(self):
        d = self.driver
        wait_for("the histogram", lambda: d.find_elements(By.CSS_SELECTOR, "#histogram text.caption"))
        caption = d.find_element(By.CSS_SELECTOR, "#histogram text.caption").text
        ticks = [t.text for t in d.find_elements(By.CSS_SELECTOR, "#histogram text.tick")]
        windows = d.find_elements(By.CSS_SELECTOR, "#histogram line.win")
        return caption, ticks, windows

    def expect_round_even_ticks(self, ticks):
        # Round ticks: a step of 1, 2 or 5 x 10^n and every tick a whole multiple of it (common
        # practice, no source); evenly spaced, in order, labelled with the same digits.
        self.assertGreaterEqual(len(ticks), 3, ticks)
        self.assertLessEqual(len(ticks), 6, ticks)
        self.assertEqual(len({len(t.partition(".")[2]) for t in ticks}), 1, ticks)
        values = [float(t) for t in ticks]
        steps = [b - a for a, b in zip(values, values[1:])]
        step = steps[0]
        self.assertGreater(step, 0, ticks)
        for s in steps:
            self.assertAlmostEqual(s, step, delta=1e-6 * step, msg=ticks)
        mantissa = step / 10 ** math.floor(math.log10(step) + 1e-9)
        self.assertTrue(any(abs(mantissa - m) < 1e-6 for m in (1, 2, 5)), f"step {step} in {ticks}")
        for v in values:
            self.assertAlmostEqual(v / step, round(v / step), delta=1e-6, msg=f"{v} is not a multiple of {step}")

    def test_histogram_caption_and_round_ticks(self):
        d = self.driver
        d.get(self.station.url + "supervisor")
        wait_for("the page to go live", lambda: by_id(d, "conn").get_attribute("data-state") == "live")
        # whip915 has no resonance window: the caption does not speak of one, no dashed line.
        caption, ticks, windows = self.histogram_parts()
        self.assertEqual(caption, "resonance (MHz); solid: mean")
        self.assertEqual(windows, [])
        self.expect_round_even_ticks(ticks)
        engineer = self.station.api_session("engineer")
        try:
            engineer.call("recipe.select", {"path": os.path.join(SRC, "config/recipes/whip915-window.jsonc")})
            d.get(self.station.url + "supervisor")
            wait_for("the page to go live", lambda: by_id(d, "conn").get_attribute("data-state") == "live")
            wait_for("the window's dashed lines", lambda: len(self.histogram_parts()[2]) == 2)
            caption, ticks, _ = self.histogram_parts()
            self.assertEqual(caption, "resonance (MHz); dashed: window, solid: mean")
            self.expect_round_even_ticks(ticks)
        finally:
            engineer.call("recipe.select", {"path": os.path.join(SRC, "config/recipes/whip915.jsonc")})
            engineer.close()


if __name__ == "__main__":
    unittest.main(verbosity=2)
