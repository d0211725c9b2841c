"""/metrics against a real daemon on echoline-sim, read with the reference OpenMetrics parser
(Debian's python3-prometheus-client), its counts checked against the run store; and the page
server's guards: security headers, cross-site and foreign-Host requests refused."""
import json
import unittest

from prometheus_client.openmetrics.parser import text_string_to_metric_families

from station_fixture import Station, calibrate_over_api, test_over_api

UNITS = 6
VERDICTS = ("pass", "fail", "inconclusive", "aborted")
CLASSES = ("no-response", "tuned-low", "tuned-high", "shallow", "out-of-mask")


def scrape_families(testcase, station):
    status, headers, text = station.http("/metrics")
    testcase.assertEqual(status, 200)
    # OpenMetrics 1.0 media type (the specification's "Overall Structure").
    testcase.assertTrue(headers["Content-Type"].startswith("application/openmetrics-text; version=1.0.0"))
    testcase.assertTrue(text.endswith("# EOF\n"))
    return {f.name: f for f in text_string_to_metric_families(text)}


def yield_counts(families):
    """The store-derived families of one scrape, as plain numbers."""
    counts = {}
    for s in families["echoline_runs"].samples:
        if s.name == "echoline_runs_total":
            counts["runs/" + s.labels["verdict"]] = s.value
    for s in families["echoline_failed_runs"].samples:
        if s.name == "echoline_failed_runs_total":
            counts["class/" + s.labels["failure_class"]] = s.value
    for name in ("echoline_units_tested", "echoline_units_final_pass", "echoline_units_first_pass"):
        counts[name] = families[name].samples[0].value
    return counts


def store_counts(db):
    """The same numbers computed here from the store file, by the README's definitions: runs by
    verdict and class (retests and aborted runs included); a unit is tested once it has a
    finished (not aborted) run; first and final pass by its first and latest finished run."""
    counts = {"runs/" + v: 0 for v in VERDICTS}
    counts.update({"class/" + c: 0 for c in CLASSES})
    first, last = {}, {}
    for serial, verdict, cls in db.execute("SELECT serial, verdict, failure_class FROM runs ORDER BY started_utc, seq"):
        counts["runs/" + verdict] += 1
        if cls:
            counts["class/" + cls] += 1
        if verdict != "aborted":
            first.setdefault(serial, verdict)
            last[serial] = verdict
    counts["echoline_units_tested"] = len(first)
    counts["echoline_units_final_pass"] = sum(v == "pass" for v in last.values())
    counts["echoline_units_first_pass"] = sum(v == "pass" for v in first.values())
    return counts


class MetricsTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.station = Station().start()
        api = cls.station.api_session()
        calibrate_over_api(cls.station, api)
        # The first units of the lot, and one of them again (a retest is a run, not a unit).
        cls.serials = [u["serial"] if isinstance(u, dict) else u for u in cls.station.units()[:UNITS]]
        for serial in cls.serials + cls.serials[:1]:
            cls.station.connect_unit(serial)
            api.send("test.start", {"serial": serial, "lot": "LOT-METRICS"})
            ev = api.until_event()
            assert ev["event"] == "result", ev
        api.close()

    @classmethod
    def tearDownClass(cls):
        cls.station.close()

    def scrape(self):
        return scrape_families(self, self.station)

    def test_runs_by_verdict_match_the_store(self):
        families = self.scrape()
        runs = {s.labels["verdict"]: s.value for s in families["echoline_runs"].samples if s.name == "echoline_runs_total"}
        db = self.station.store()
        stored = dict(db.execute("SELECT verdict, count(*) FROM runs GROUP BY verdict").fetchall())
        for verdict in ("pass", "fail", "inconclusive", "aborted"):
            self.assertEqual(runs[verdict], stored.get(verdict, 0), verdict)
        self.assertEqual(sum(runs.values()), UNITS + 1)
        classes = {s.labels["failure_class"]: s.value for s in families["echoline_failed_runs"].samples
                   if s.name == "echoline_failed_runs_total"}
        stored_classes = dict(db.execute("SELECT failure_class, count(*) FROM runs WHERE verdict IN ('fail','inconclusive') "
                                         "AND failure_class <> '' GROUP BY failure_class").fetchall())
        for cls, n in classes.items():
            self.assertEqual(n, stored_classes.get(cls, 0), cls)
        units = [s.value for s in families["echoline_units_tested"].samples][0]
        self.assertEqual(units, db.execute("SELECT count(DISTINCT serial) FROM runs WHERE verdict <> 'aborted'").fetchone()[0])

    def test_cycle_histogram_counts_every_test(self):
        fam = self.scrape()["echoline_cycle_seconds"]
        self.assertEqual(fam.type, "histogram")
        self.assertEqual(fam.unit, "seconds")
        count = [s.value for s in fam.samples if s.name == "echoline_cycle_seconds_count"][0]
        inf = [s.value for s in fam.samples if s.name == "echoline_cycle_seconds_bucket" and s.labels["le"] == "+Inf"][0]
        total = [s.value for s in fam.samples if s.name == "echoline_cycle_seconds_sum"][0]
        self.assertEqual(count, UNITS + 1)
        self.assertEqual(inf, count)
        stored_sum = self.station.store().execute(
            "SELECT sum(julianday(ended_utc) - julianday(started_utc)) * 86400 FROM runs").fetchone()[0]
        # Cycle time is the run's own total time; the store's start/end stamps bracket it (ms text).
        self.assertGreater(total, 0)
        self.assertLess(abs(total - stored_sum), 0.05 * (UNITS + 1) + 0.1 * stored_sum)

    def test_calibration_and_instruments(self):
        f = self.scrape()
        age = f["echoline_calibration_age_seconds"].samples[0].value
        self.assertGreaterEqual(age, 0)
        self.assertLess(age, 600)
        self.assertEqual(f["echoline_calibration_present"].samples[0].value, 1)
        up = {s.labels["role"]: s.value for s in f["echoline_instrument_up"].samples}
        self.assertEqual(up, {"source": 1, "receiver": 1})
        errors = {s.labels["role"]: s.value for s in f["echoline_instrument_errors"].samples}
        self.assertEqual(set(errors), {"source", "receiver"})
        self.assertIn("echoline_instrument_reconnects", f)

    def test_outbox_depth_matches_the_store(self):
        f = self.scrape()
        depth = f["echoline_outbox_depth"].samples[0].value
        stored = self.station.store().execute("SELECT count(*) FROM outbox WHERE refused IS NULL").fetchone()[0]
        self.assertEqual(depth, stored)
        # No central database configured: no run is queued, and the store remembers from which run
        # on, so every one of them is queued once if a central database is configured later.
        self.assertEqual(depth, 0)
        unqueued = self.station.store().execute(
            "SELECT count(*) FROM runs WHERE in_progress = 0 AND seq >= "
            "(SELECT unqueued_from_seq FROM forwarding WHERE id = 1)").fetchone()[0]
        self.assertEqual(unqueued, UNITS + 1)

    def test_every_page_carries_a_content_security_policy(self):
        for path in ("/", "/supervisor", "/assets/operator.js", "/metrics"):
            status, headers, _ = self.station.http(path)
            self.assertEqual(status, 200, path)
            self.assertIn("script-src 'self'", headers["Content-Security-Policy"], path)
            self.assertIn("frame-ancestors 'none'", headers["Content-Security-Policy"], path)
            self.assertEqual(headers["X-Content-Type-Options"], "nosniff")

    def test_cross_site_requests_are_refused(self):
        body = json.dumps({"client": "x"}).encode()
        json_type = {"Content-Type": "application/json"}
        # No custom header: what a cross-site form or simple request can send.
        status, _, _ = self.station.http("/session", "POST", body, json_type)
        self.assertEqual(status, 403)
        # Another site's page (Origin), even with the header.
        status, _, _ = self.station.http("/session", "POST", body,
                                         {**json_type, "X-Echoline-Session": "new", "Origin": "http://evil.example"})
        self.assertEqual(status, 403)
        # A form post (not JSON).
        status, _, _ = self.station.http("/session", "POST", b"a=b",
                                         {"Content-Type": "application/x-www-form-urlencoded", "X-Echoline-Session": "new"})
        self.assertEqual(status, 415)
        # A name pointed at 127.0.0.1 by another site (DNS rebinding).
        status, _, _ = self.station.http("/", headers={"Host": f"evil.example:{self.station.web_port}"})
        self.assertEqual(status, 421)
        # The page API without a session.
        status, _, _ = self.station.http("/api", "POST", json.dumps({"v": 1, "id": 1, "call": "status"}).encode(),
                                         {**json_type, "X-Echoline-Session": "0" * 32})
        self.assertEqual(status, 401)

    def test_page_api_goes_through_the_same_roles(self):
        headers = {"Content-Type": "application/json", "X-Echoline-Session": "new",
                   "Origin": f"http://127.0.0.1:{self.station.web_port}"}
        status, _, text = self.station.http("/session", "POST", b"{}", headers)
        self.assertEqual(status, 200, text)
        session = json.loads(text)["session"]
        headers["X-Echoline-Session"] = session
        status, _, text = self.station.http("/api", "POST", json.dumps(
            {"v": 1, "id": 2, "call": "report.lot", "args": {"lot": "LOT-METRICS"}}).encode(), headers)
        reply = json.loads(text)
        self.assertFalse(reply["ok"])
        self.assertEqual(reply["error"]["code"], "forbidden")   # an operator page may not, as on the socket
        status, _, text = self.station.http("/api", "POST", json.dumps(
            {"v": 1, "id": 3, "call": "lot.summary", "args": {}}).encode(), headers)
        summary = json.loads(text)["result"]
        self.assertEqual(summary["lot"], "LOT-METRICS")
        self.assertEqual(summary["yield"]["units_tested"], UNITS)
        self.assertEqual(summary["yield"]["runs"], UNITS + 1)


class MetricsAcrossRestartTest(unittest.TestCase):
    """The daemon counts its station's yield once when it starts and then as runs commit: the
    counts must equal the store's before and after a restart, and after runs tested since."""

    @staticmethod
    def run_units(station, api, serials):
        for serial in serials:
            station.connect_unit(serial)
            test_over_api(station, api, serial, "LOT-RESTART")
        api.close()

    def test_counts_match_the_store_before_and_after_a_restart(self):
        station = Station().start()
        try:
            api = station.api_session()
            calibrate_over_api(station, api)
            serials = [u["serial"] if isinstance(u, dict) else u for u in station.units()[:5]]
            self.run_units(station, api, serials[:3] + serials[:1])
            before = yield_counts(scrape_families(self, station))
            self.assertEqual(before, store_counts(station.store()))
            self.assertEqual(sum(before["runs/" + v] for v in VERDICTS), 4)

            station.stop_daemon()
            station.start_daemon()
            after = yield_counts(scrape_families(self, station))
            self.assertEqual(after, before)

            self.run_units(station, station.api_session(), serials[3:5] + serials[1:2])
            later = yield_counts(scrape_families(self, station))
            self.assertEqual(later, store_counts(station.store()))
            self.assertEqual(sum(later["runs/" + v] for v in VERDICTS), 7)
            self.assertEqual(later["echoline_units_tested"], 5)
        finally:
            station.close()


if __name__ == "__main__":
    unittest.main(verbosity=2)
