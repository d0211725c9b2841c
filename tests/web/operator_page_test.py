"""The operator page in real headless Chromium against a real daemon on echoline-sim: calibrate
through the page's prompts, scan 20 units and see every verdict, the console working the same
station at once, a serial scanned mid-sweep is queued and not lost, cancel mid-sweep, and the
daemon restarted mid-lot with the page recovering. Keyboard only: the serial field, Enter, F2
and Esc. The test's hands on the simulated fixture connect each unit and standard."""
import unittest

from selenium.webdriver.common.by import By
from selenium.webdriver.common.keys import Keys

from browser import by_id, chromium, press, screenshot, set_viewport, wait_for
from station_fixture import Station

LOT = "LOT-PAGE-1"
UNITS = 20


def pick_units(station):
    """The lot's serials with its first defective units (the simulator's ground truth) among
    the first twenty, so the page shows failures as well as passes; the others follow."""
    serials = station.units()
    defective = [s for s in serials[:60]
                 if station.control({"cmd": "truth", "unit": s, "frequencies_hz": [915e6]}).get("defect") not in (None, "", "none")]
    good = [s for s in serials if s not in defective]
    picked = good[:UNITS - 3] + defective[:3]
    picked[5], picked[-1] = picked[-1], picked[5]   # one failure early on
    return picked + [s for s in good[UNITS - 3:]]


class OperatorPageTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.station = Station().start()
        cls.serials = pick_units(cls.station)
        cls.driver = chromium(1024, 600)
        cls.driver.get(cls.station.url)
        wait_for("the page to go live", lambda: by_id(cls.driver, "conn").get_attribute("data-state") == "live")
        by_id(cls.driver, "lot").send_keys(LOT, Keys.ENTER)   # Enter in the lot field returns to the serial field

    @classmethod
    def tearDownClass(cls):
        cls.driver.quit()
        cls.station.close()

    # --- helpers ---
    def verdict_box(self):
        return by_id(self.driver, "verdict")

    def scan(self, serial):
        """A barcode scanner types the serial and Enter into whatever has the focus."""
        self.assertEqual(self.driver.switch_to.active_element.get_attribute("id"), "serial")
        press(self.driver, serial, Keys.ENTER)

    def wait_verdict(self, serial, previous_run):
        box = self.verdict_box()
        wait_for(f"the verdict of {serial}",
                 lambda: box.is_displayed() and box.get_attribute("data-serial") == serial
                 and box.get_attribute("data-run-id") != previous_run, timeout_s=60)
        return box.get_attribute("data-run-id"), box.get_attribute("data-verdict")

    def stored(self, run_id):
        return self.station.store().execute("SELECT serial, verdict, lot, reason FROM runs WHERE run_id = ?", (run_id,)).fetchone()

    def calibrate_through_page(self):
        d = self.driver
        wait_for("the calibration panel", lambda: by_id(d, "cal-panel").is_displayed())
        self.assertIn("Calibration needed", by_id(d, "cal-reason").text)
        press(d, Keys.F2)
        measured = []
        for _ in range(3):
            current = wait_for("a prompt to connect a standard",
                               lambda: by_id(d, "cal-go").is_enabled() and "connected" in by_id(d, "cal-go").text
                               and d.find_element(By.CSS_SELECTOR, "#cal-steps li.current").get_attribute("data-standard"))
            self.assertIn(f"Connect the {current} standard", by_id(d, "cal-text").text)
            if current == "SHORT":
                screenshot(d, "operator-calibration-1024x600")
            self.station.connect_standard(current)
            press(d, Keys.F2)
            measured.append(current)
            wait_for(f"{current} to be measured", lambda: "connected" not in by_id(d, "cal-go").text
                     or d.find_element(By.CSS_SELECTOR, "#cal-steps li.current").get_attribute("data-standard") != current)
        wait_for("the calibration to end valid", lambda: "Calibration done and valid" in by_id(d, "notice").text)
        self.assertEqual(measured, ["OPEN", "SHORT", "LOAD"])

    # --- the flow, in order ---
    def test_1_calibrate_and_scan_twenty_units(self):
        d = self.driver
        self.calibrate_through_page()
        wait_for("the idle panel", lambda: by_id(d, "idle-panel").is_displayed())
        previous = None
        seen = {}
        for serial in self.serials[:UNITS]:
            self.station.connect_unit(serial)
            self.scan(serial)
            previous, verdict = self.wait_verdict(serial, previous)
            word = by_id(d, "verdict-word").text
            # The verdict in words and in a shape, never by colour alone.
            self.assertEqual(word, verdict.upper())
            self.assertTrue(d.find_element(By.CSS_SELECTOR, f"#verdict-glyph svg.glyph-{verdict}"))
            self.assertTrue(by_id(d, "verdict-action").text, "the tray / next step is always said")
            if verdict in ("fail", "inconclusive", "aborted"):
                self.assertTrue(by_id(d, "verdict-reason").text, f"{serial}: a {verdict} needs its reason in words")
            row = self.stored(previous)
            self.assertEqual(row[:3], (serial, verdict, LOT))
            if verdict == "fail" and "fail" not in seen.values():
                screenshot(d, "operator-fail-1024x600")
            seen[serial] = verdict
            if len(seen) == 3:
                screenshot(d, "operator-1024x600")
        self.assertEqual(len(seen), UNITS)
        recent = d.find_elements(By.CSS_SELECTOR, "#recent li")
        self.assertEqual(len(recent), UNITS)
        self.assertGreater(len(set(seen.values())), 1, "the lot's first units include failures as well as passes")

    def test_2_console_and_page_share_the_station(self):
        d = self.driver
        serial = self.serials[UNITS]
        previous = self.verdict_box().get_attribute("data-run-id")
        # The operator console, `echoline station`, tests one unit while the page is open.
        verdicts, code, output = self.station.console([serial], LOT)
        self.assertIn(serial, verdicts, output)
        # The page shows the console's unit as it is judged: both work the same station.
        run_id, verdict = self.wait_verdict(serial, previous)
        self.assertEqual(verdict, verdicts[serial])
        row = self.stored(run_id)
        self.assertEqual(row[:3], (serial, verdict, LOT))
        # Every unit tested from the page is in the lot report.
        engineer = self.station.api_session("engineer")
        report = engineer.call("report.lot", {"lot": LOT})["content"]
        engineer.close()
        for s in self.serials[:UNITS + 1]:
            self.assertIn(s, report)

    def test_3_scan_while_measuring_is_queued_then_cancel(self):
        d = self.driver
        slow, queued = self.serials[UNITS + 1], self.serials[UNITS + 2]
        # Each receiver reply 25 ms late: a sweep of 221 points takes several seconds.
        self.station.control({"cmd": "fault", "role": "receiver", "kind": "slow-reply", "probability": 1.0,
                              "delay_ms": 25, "seed": 1})
        self.station.connect_unit(slow)
        previous = self.verdict_box().get_attribute("data-run-id")
        self.scan(slow)
        wait_for("the sweep to be under way", lambda: by_id(d, "run-panel").is_displayed()
                 and "point" in by_id(d, "run-count").text and int(by_id(d, "run-count").text.split()[1]) > 1)
        self.scan(queued)   # the next unit scanned while this one measures
        queue = wait_for("the queued serial", lambda: [li.get_attribute("data-serial")
                                                        for li in d.find_elements(By.CSS_SELECTOR, "#queue li")])
        self.assertEqual(queue, [queued])
        screenshot(d, "operator-measuring-1024x600")
        press(d, Keys.ESCAPE)
        run_id, verdict = self.wait_verdict(slow, previous)
        self.assertEqual(verdict, "aborted")
        self.assertIn("cancel", self.stored(run_id)[3])
        self.station.control({"cmd": "clear-faults"})
        # The queued serial was not lost: it waits until its unit is connected (F2), then is tested.
        wait_for("the next unit's prompt", lambda: by_id(d, "next-bar").is_displayed())
        self.assertEqual(by_id(d, "next-serial").text, queued)
        self.assertTrue(self.verdict_box().is_displayed(), "the cancelled unit's verdict stays in view")
        screenshot(d, "operator-next-1024x600")
        self.station.connect_unit(queued)
        press(d, Keys.F2)
        run_id2, _ = self.wait_verdict(queued, run_id)
        self.assertEqual(self.stored(run_id2)[0], queued)
        self.assertEqual(d.find_elements(By.CSS_SELECTOR, "#queue li"), [])

    def test_4_daemon_restart_mid_lot(self):
        d = self.driver
        # The daemon stops while a unit is measured (each receiver reply 25 ms late).
        interrupted = self.serials[UNITS + 3]
        self.station.control({"cmd": "fault", "role": "receiver", "kind": "slow-reply", "probability": 1.0,
                              "delay_ms": 25, "seed": 2})
        self.station.connect_unit(interrupted)
        self.scan(interrupted)
        wait_for("the sweep to be under way", lambda: by_id(d, "run-panel").is_displayed()
                 and by_id(d, "run-serial").text == interrupted and "point" in by_id(d, "run-count").text)
        self.station.stop_daemon()
        self.station.control({"cmd": "clear-faults"})
        wait_for("the page to say the connection is lost", lambda: by_id(d, "conn").get_attribute("data-state") == "lost")
        # Scanned while the daemon is down: kept in the queue, tested once it is back.
        serial = self.serials[UNITS + 4]
        self.scan(serial)
        self.assertEqual([li.get_attribute("data-serial") for li in d.find_elements(By.CSS_SELECTOR, "#queue li")], [serial])
        self.station.connect_unit(serial)
        self.station.start_daemon()
        wait_for("the page to be live again", lambda: by_id(d, "conn").get_attribute("data-state") == "live", timeout_s=30)
        # The interrupted unit's outcome is shown (aborted, as stored), then the queued unit is tested.
        stored_interrupted = self.station.store().execute(
            "SELECT run_id, verdict FROM runs WHERE serial = ? ORDER BY seq DESC LIMIT 1", (interrupted,)).fetchone()
        self.assertEqual(stored_interrupted[1], "aborted")
        wait_for("the interrupted unit's outcome", lambda: interrupted in
                 [li.get_attribute("data-serial") for li in d.find_elements(By.CSS_SELECTOR, "#recent li[data-verdict='aborted']")])
        previous = stored_interrupted[0]
        wait_for("the next unit's prompt", lambda: by_id(d, "next-bar").is_displayed())
        self.assertEqual(by_id(d, "next-serial").text, serial)
        press(d, Keys.F2)
        run_id, verdict = self.wait_verdict(serial, previous)
        self.assertEqual(self.stored(run_id)[:2], (serial, verdict))
        # And scanning goes on as before.
        serial2 = self.serials[UNITS + 5]
        self.station.connect_unit(serial2)
        self.scan(serial2)
        self.wait_verdict(serial2, run_id)

    def test_5_retest_question_and_screenshots(self):
        d = self.driver
        serial = self.serials[0]
        previous = self.verdict_box().get_attribute("data-run-id")
        self.station.connect_unit(serial)
        self.scan(serial)
        wait_for("the retest question", lambda: by_id(d, "question").is_displayed())
        self.assertIn(serial, by_id(d, "question-text").text)
        self.assertIn("tested before", by_id(d, "question-text").text)
        screenshot(d, "operator-retest-1024x600")
        press(d, Keys.F2)
        run_id, _ = self.wait_verdict(serial, previous)
        self.assertEqual(self.station.store().execute("SELECT retest FROM runs WHERE run_id = ?", (run_id,)).fetchone()[0], 1)
        set_viewport(d, 1920, 1080)
        screenshot(d, "operator-1920x1080")
        set_viewport(d, 1024, 600)
        # Skipping a retest tests nothing and says so.
        self.scan(serial)
        wait_for("the retest question again", lambda: by_id(d, "question").is_displayed())
        press(d, Keys.ESCAPE)
        wait_for("the skip notice", lambda: "skipped" in by_id(d, "notice").text)
        self.assertEqual(self.station.store().execute("SELECT count(*) FROM runs WHERE serial = ?", (serial,)).fetchone()[0], 2)
        # The last verdict stays in view after a skip.
        self.assertTrue(self.verdict_box().is_displayed())
        self.assertEqual(self.verdict_box().get_attribute("data-run-id"), run_id)

    def test_6_text_contrast_meets_wcag_aa(self):
        """Every verdict's word on its own background, and the page's other text, reach 4.5:1
        (WCAG 2.1 success criterion 1.4.3, contrast ratio and relative luminance as defined
        there), read from the colours Chromium computes."""
        d = self.driver
        pairs = d.execute_script("""
            const out = [];
            const probe = (cls, parentCls) => {
              const host = document.createElement('div');
              if (parentCls) host.className = parentCls;
              const e = document.createElement('span');
              e.className = cls; e.textContent = 'x';
              host.append(e); document.body.append(host);
              const fg = getComputedStyle(e).color;
              let n = e, bg = 'rgba(0, 0, 0, 0)';
              while (n && (bg === 'rgba(0, 0, 0, 0)' || bg === 'transparent')) { bg = getComputedStyle(n).backgroundColor; n = n.parentElement; }
              host.remove();
              return [cls + ' in ' + (parentCls || 'page'), fg, bg];
            };
            for (const v of ['pass', 'fail', 'inconclusive', 'aborted']) {
              out.push(probe('verdict-word', 'verdict v-' + v));
              out.push(probe('vtag v-' + v));
            }
            out.push(probe('hint'), probe('verdict-detail'), probe('run-count'), probe('rf-note'), probe('notice'));
            out.push(probe('brand', 'strip'), probe('strip-item', 'strip'));
            out.push(probe('keys-link', 'keys'), probe('x', 'keys'));
            return out;""")
        for name, fg, bg in pairs:
            ratio = contrast(parse_rgb(fg), parse_rgb(bg))
            self.assertGreaterEqual(ratio, 4.5, f"{name}: {fg} on {bg} is {ratio:.2f}:1")


def parse_rgb(text):
    parts = text[text.index("(") + 1:text.index(")")].split(",")
    return tuple(int(float(p)) for p in parts[:3])


def contrast(a, b):
    """WCAG 2.1 contrast ratio (L1 + 0.05) / (L2 + 0.05) of sRGB colours (W3C WCAG 2.1, definitions
    of contrast ratio and relative luminance)."""
    def lum(c):
        def chan(v):
            v = v / 255
            return v / 12.92 if v <= 0.03928 else ((v + 0.055) / 1.055) ** 2.4
        r, g, b = (chan(v) for v in c)
        return 0.2126 * r + 0.7152 * g + 0.0722 * b
    hi, lo = sorted((lum(a), lum(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


if __name__ == "__main__":
    unittest.main(verbosity=2, failfast=True)
