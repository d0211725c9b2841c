"""The offset pair on a bench without a switch, through the operator page in real headless
Chromium against a real daemon on echoline-sim: the recipe reads each unit twice (whip915-pair),
and between the two sweeps the page asks the operator to fit the kit's offset line. F2 answers
and the second sweep runs; Esc at that prompt ends the run as aborted, stored so, never a pass.
The test's hands on the simulated fixture connect the unit, then the unit behind the line."""
import unittest

from selenium.webdriver.common.keys import Keys

from browser import by_id, chromium, press, screenshot, wait_for
from station_fixture import Station, calibrate_over_api

LOT = "LOT-PAIR-1"


class OffsetPairPageTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.station = Station(recipe="config/recipes/whip915-pair.jsonc").start()
        session = cls.station.api_session()
        calibrate_over_api(cls.station, session)   # OPEN, SHORT, LOAD prompted: no switch
        session.close()
        cls.serials = cls.station.units()
        cls.driver = chromium(1024, 600)
        cls.driver.get(cls.station.url)
        wait_for("the page to go live", lambda: by_id(cls.driver, "conn").get_attribute("data-state") == "live")
        by_id(cls.driver, "lot").send_keys(LOT, Keys.ENTER)

    @classmethod
    def tearDownClass(cls):
        cls.driver.quit()
        cls.station.close()

    def scan(self, serial):
        self.assertEqual(self.driver.switch_to.active_element.get_attribute("id"), "serial")
        press(self.driver, serial, Keys.ENTER)

    def wait_prompt(self, serial):
        d = self.driver
        wait_for(f"the second-reading prompt of {serial}", lambda: by_id(d, "run-prompt").is_displayed(), timeout_s=60)
        self.assertEqual(by_id(d, "run-serial").text, serial)
        text = by_id(d, "run-prompt-text").text
        self.assertIn("offset line", text)
        self.assertIn("F2", text)
        # The source's output is off between the sweeps: the page says the unit may be handled.
        self.assertIn("RF is off", by_id(d, "run-rf").text)

    def wait_verdict(self, serial, previous_run):
        box = by_id(self.driver, "verdict")
        wait_for(f"the verdict of {serial}",
                 lambda: box.is_displayed() and box.get_attribute("data-serial") == serial
                 and box.get_attribute("data-run-id") != previous_run, timeout_s=60)
        return box.get_attribute("data-run-id"), box.get_attribute("data-verdict")

    def offset_points(self, run_id):
        return self.station.store().execute(
            "SELECT COUNT(*), COUNT(offset_raw_dbm) FROM readings WHERE run_id = ?", (run_id,)).fetchone()

    def test_1_the_operator_fits_the_line_for_the_second_reading(self):
        d = self.driver
        previous = None
        for serial in self.serials[:3]:
            self.station.connect_unit(serial)
            self.scan(serial)
            self.wait_prompt(serial)
            if serial == self.serials[0]:
                screenshot(d, "operator-offset-prompt-1024x600")
            self.station.connect_unit_via_line(serial)
            press(d, Keys.F2)
            wait_for("the prompt to close", lambda: not by_id(d, "run-prompt").is_displayed() or
                     by_id(d, "verdict").get_attribute("data-serial") == serial)
            previous, verdict = self.wait_verdict(serial, previous)
            self.assertIn(verdict, ("pass", "fail", "inconclusive"))
            total, offset = self.offset_points(previous)
            self.assertGreater(total, 100)
            self.assertEqual(offset, total, f"{serial}: the second reading is stored at every point")

    def test_2_escape_at_the_prompt_aborts_the_run(self):
        d = self.driver
        serial = self.serials[3]
        previous = by_id(d, "verdict").get_attribute("data-run-id")
        self.station.connect_unit(serial)
        self.scan(serial)
        self.wait_prompt(serial)
        press(d, Keys.ESCAPE)
        run_id, verdict = self.wait_verdict(serial, previous)
        self.assertEqual(verdict, "aborted")
        row = self.station.store().execute("SELECT verdict, reason FROM runs WHERE run_id = ?", (run_id,)).fetchone()
        self.assertEqual(row[0], "aborted")
        self.assertIn("second reading not taken", row[1])
        self.assertIn("DUT-OFFSET not connected", row[1])


if __name__ == "__main__":
    unittest.main(verbosity=2)
