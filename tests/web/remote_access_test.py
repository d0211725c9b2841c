"""The pages on a non-loopback address: they need the station token, and then work the same
way. Skipped where the machine has no network interface besides loopback."""
import json
import unittest
import urllib.request

from prometheus_client.openmetrics.parser import text_string_to_metric_families

from browser import by_id, chromium, wait_for
from station_fixture import TOKEN, Station, non_loopback_address

ADDRESS = non_loopback_address()


@unittest.skipIf(ADDRESS is None, "no non-loopback IPv4 address on this machine")
class RemoteAccessTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.station = Station(web_host="0.0.0.0").start()
        cls.remote = f"http://{ADDRESS}:{cls.station.web_port}"

    @classmethod
    def tearDownClass(cls):
        cls.station.close()

    def request(self, path, method="GET", body=None, headers=None):
        req = urllib.request.Request(self.remote + path, method=method, data=body, headers=headers or {})
        try:
            with urllib.request.urlopen(req, timeout=10) as r:
                return r.status, r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, e.read().decode()

    def session(self, token=None):
        body = {"client": "remote test"}
        if token is not None:
            body["token"] = token
        return self.request("/session", "POST", json.dumps(body).encode(),
                            {"Content-Type": "application/json", "X-Echoline-Session": "new"})

    def test_a_remote_page_needs_the_token(self):
        self.assertEqual(self.session()[0], 401)
        self.assertEqual(self.session("wrong-token-of-enough-length")[0], 401)
        status, text = self.session(TOKEN)
        self.assertEqual(status, 200, text)
        session = json.loads(text)["session"]
        status, text = self.request("/api", "POST", json.dumps({"v": 1, "id": 1, "call": "status"}).encode(),
                                    {"Content-Type": "application/json", "X-Echoline-Session": session})
        self.assertEqual(status, 200)
        self.assertEqual(json.loads(text)["result"]["station"], "web-bench")

    def test_a_remote_scraper_needs_the_token(self):
        self.assertEqual(self.request("/metrics")[0], 401)
        self.assertEqual(self.request("/metrics", headers={"Authorization": "Bearer nope"})[0], 401)
        status, text = self.request("/metrics", headers={"Authorization": "Bearer " + TOKEN})
        self.assertEqual(status, 200)
        self.assertIn("echoline_runs", [f.name for f in text_string_to_metric_families(text)])

    def test_the_operator_page_asks_for_the_token_then_works(self):
        driver = chromium(1024, 600)
        try:
            driver.get(self.remote + "/")
            alert = wait_for("the token prompt", lambda: driver.switch_to.alert)
            alert.send_keys(TOKEN)
            alert.accept()
            wait_for("the page to go live", lambda: by_id(driver, "conn").get_attribute("data-state") == "live")
            wait_for("the station's name", lambda: by_id(driver, "station-name").text == "station web-bench")
        finally:
            driver.quit()


if __name__ == "__main__":
    unittest.main(verbosity=2)
