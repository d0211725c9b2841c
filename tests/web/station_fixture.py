"""A real station for the page tests: echoline-sim and echolined as child processes on
loopback, a station config with the pages on a fixed free port, the simulator's fixture
control port (the operator's hands: connect a unit or a standard), the JSON-lines API on the
Unix socket (the console's way in) and read-only queries of the SQLite run store.

Binaries and the source folder come from the environment ctest sets (tests/web/CMakeLists.txt):
ECHOLINE_SIM_BIN, ECHOLINE_DAEMON_BIN, ECHOLINE_SOURCE_DIR.
"""
import json
import os
import re
import shutil
import socket
import sqlite3
import subprocess
import tempfile
import time
import urllib.request

SRC = os.environ.get("ECHOLINE_SOURCE_DIR", os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..")))
SIM = os.environ.get("ECHOLINE_SIM_BIN", os.path.join(SRC, "build", "simulator", "echoline-sim"))
DAEMON = os.environ.get("ECHOLINE_DAEMON_BIN", os.path.join(SRC, "build", "daemon", "echolined"))
CLIENT = os.environ.get("ECHOLINE_CLIENT_BIN", os.path.join(SRC, "build", "daemon", "echoline"))
TOKEN = "page-test-token-0123456789abcdef"


def free_port():
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def non_loopback_address():
    """An IPv4 address of this machine that is not loopback, or None (no network interface).
    Connecting a UDP socket only asks the routing table; nothing is sent."""
    try:
        with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
            s.connect(("192.0.2.1", 9))   # TEST-NET-1 (RFC 5737): never a real peer
            address = s.getsockname()[0]
    except OSError:
        return None
    return None if address.startswith("127.") else address


def wait_line(proc, prefix, timeout_s, what):
    """Reads the child's stdout until a line starting with `prefix`; returns that line."""
    deadline = time.monotonic() + timeout_s
    seen = []
    while time.monotonic() < deadline:
        line = proc.stdout.readline()
        if not line:
            raise RuntimeError(f"{what} ended before printing '{prefix}': {seen}")
        line = line.strip()
        seen.append(line)
        if line.startswith(prefix):
            return line, seen
    raise RuntimeError(f"{what}: no '{prefix}' line within {timeout_s} s: {seen}")


class Station:
    def __init__(self, lot="config/sim/lots/whip915-lot-a.jsonc", sim_config="config/sim/instant.jsonc",
                 web_host="127.0.0.1", recipe="config/recipes/whip915.jsonc"):
        self.web_host = web_host
        self.recipe = os.path.join(SRC, recipe)
        self.work = tempfile.mkdtemp(prefix="echoline-web-")
        self.lot = os.path.join(SRC, lot)
        self.sim_config = os.path.join(SRC, sim_config)
        self.web_port = free_port()
        self.sim = None
        self.daemon = None
        self.endpoints = {}
        self.daemon_log = open(os.path.join(self.work, "echolined.stderr"), "ab")

    # --- processes ---
    def start(self):
        self.start_sim()
        self.write_config()
        self.start_daemon()
        return self

    def start_sim(self):
        self.sim = subprocess.Popen([SIM, "--config", self.sim_config, "--lot", self.lot, "--log-level", "warn"],
                                    stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True)
        _, lines = wait_line(self.sim, "ready", 30, "echoline-sim")
        for line in lines:
            fields = dict(f.split("=", 1) for f in line.split()[1:] if "=" in f)
            if line.startswith("endpoint"):
                self.endpoints[fields["role"]] = fields["address"]

    def write_config(self):
        with open(os.path.join(self.work, "token"), "w") as f:
            f.write(TOKEN + "\n")
        config = {
            "station": "web-bench",
            "data_dir": os.path.join(self.work, "data"),
            "log_dir": os.path.join(self.work, "log"),
            "recipe": self.recipe,
            "instruments": [
                {"role": "source", "name": "siggen", "address": self.endpoints["source"],
                 "profile": os.path.join(SRC, "config/instruments/sim-source.jsonc")},
                {"role": "receiver", "name": "analyzer", "address": self.endpoints["receiver"],
                 "profile": os.path.join(SRC, "config/instruments/sim-receiver.jsonc")},
            ],
            "calibration_kit": os.path.join(SRC, "config/kits/sim-kit.jsonc"),
            "fixture": {"coupling_db": 20, "mainline_loss_db": 0.5, "cable_loss_db": 0.3, "source_match_db": 25,
                        "nominal_directivity_db": 35, "test_port_delay_ns": 2},
            "api": {"unix_socket": os.path.join(self.work, "api.sock"), "token_file": os.path.join(self.work, "token")},
            "web": {"host": self.web_host, "port": self.web_port},
        }
        with open(os.path.join(self.work, "station.jsonc"), "w") as f:
            json.dump(config, f, indent=2)

    def start_daemon(self):
        self.daemon = subprocess.Popen([DAEMON, "--config", os.path.join(self.work, "station.jsonc"), "--log-level", "warn"],
                                       stdout=subprocess.PIPE, stderr=self.daemon_log, text=True)
        line, _ = wait_line(self.daemon, "listening", 30, "echolined")
        self.url = line.split("web=", 1)[1].strip()
        assert self.url == f"http://{self.web_host}:{self.web_port}/", line
        if self.web_host == "0.0.0.0":
            self.url = f"http://127.0.0.1:{self.web_port}/"

    def stop_daemon(self):
        if self.daemon and self.daemon.poll() is None:
            self.daemon.terminate()
            self.daemon.wait(30)
        self.daemon = None

    def close(self):
        self.stop_daemon()
        if self.sim and self.sim.poll() is None:
            self.sim.terminate()
            self.sim.wait(10)
        self.daemon_log.close()
        if os.environ.get("ECHOLINE_KEEP_WORK"):
            print("work folder kept:", self.work)
        else:
            shutil.rmtree(self.work, ignore_errors=True)

    # --- the operator's hands on the simulated fixture ---
    def control(self, request):
        host, port = self.endpoints["control"][len("tcp://"):].rsplit(":", 1)
        with socket.create_connection((host, int(port)), timeout=10) as s:
            s.sendall((json.dumps(request) + "\n").encode())
            reply = s.makefile().readline()
        answer = json.loads(reply)
        assert answer.get("ok"), f"fixture control {request}: {answer}"
        return answer

    def connect_unit(self, serial):
        return self.control({"cmd": "connect", "unit": serial})

    def connect_unit_via_line(self, serial):
        """The unit behind the kit's offset line, as an operator fits it for a second reading."""
        return self.control({"cmd": "connect", "unit": serial, "via": "offset-line"})

    def connect_standard(self, standard):
        return self.control({"cmd": "connect", "standard": standard})

    def units(self):
        return self.control({"cmd": "units"})["units"]

    # --- the operator console itself, `echoline station`, fed as a scanner feeds it ---
    def console(self, serials, lot, operator="console", timeout_s=120):
        """Runs `echoline station` on this station with the serials piped in as a scanner types
        them (serial, Enter), the console's hands on the simulated fixture connecting each unit;
        returns {serial: verdict} from its "Unit <serial>   verdict <v>" lines and its output."""
        proc = subprocess.run([CLIENT, "station", "--config", os.path.join(self.work, "station.jsonc"),
                               "--sim-fixture", self.endpoints["control"], "--lot", lot, "--operator", operator],
                              input="".join(s + "\n" for s in serials), capture_output=True, text=True,
                              timeout=timeout_s)
        verdicts = {}
        for line in proc.stdout.splitlines():
            m = re.search(r"^\s+Unit (\S+)\s+verdict (\w+)", line)
            if m:
                verdicts[m.group(1)] = m.group(2)
        return verdicts, proc.returncode, proc.stdout + proc.stderr

    # --- the console's way in: the JSON-lines API on the Unix socket ---
    def api_session(self, role="operator"):
        return ApiSession(os.path.join(self.work, "api.sock"), role)

    # --- HTTP as a plain client ---
    def http(self, path, method="GET", body=None, headers=None):
        req = urllib.request.Request(self.url.rstrip("/") + path, method=method, data=body, headers=headers or {})
        try:
            with urllib.request.urlopen(req, timeout=10) as r:
                return r.status, dict(r.headers), r.read().decode()
        except urllib.error.HTTPError as e:
            return e.code, dict(e.headers), e.read().decode()

    # --- the store, read-only ---
    def store(self):
        db = sqlite3.connect(f"file:{os.path.join(self.work, 'data', 'web-bench.sqlite')}?mode=ro", uri=True, timeout=10)
        return db


class ApiSession:
    """One JSON-lines connection, as `echoline station` keeps one."""

    def __init__(self, path, role):
        self.sock = socket.socket(socket.AF_UNIX)
        self.sock.connect(path)
        self.file = self.sock.makefile("rw")
        self.next_id = 1
        args = {"role": role, "client": "console in the page test"}
        if role == "engineer":
            args["token"] = TOKEN
        self.call("hello", args)

    def send(self, call, args=None):
        rid = self.next_id
        self.next_id += 1
        self.file.write(json.dumps({"v": 1, "id": rid, "call": call, "args": args or {}}) + "\n")
        self.file.flush()
        return rid

    def read(self):
        return json.loads(self.file.readline())

    def call(self, call, args=None):
        rid = self.send(call, args)
        while True:
            m = self.read()
            if m.get("id") == rid and "ok" in m:
                assert m["ok"], f"{call}: {m}"
                return m["result"]

    def until_event(self, kinds=("result", "error")):
        while True:
            m = self.read()
            if m.get("event") in kinds:
                return m

    def close(self):
        self.sock.close()


def answer_prompts(station, session, call):
    """Runs cal.start or cal.check as the console does: connects each prompted standard, then
    answers. Returns the final result event; an error event or a refusal fails."""
    session.send(call)
    while True:
        m = session.read()
        if m.get("event") == "prompt":
            station.connect_standard(m["standard"])
            session.send("cal.answer", {"standard": m["standard"]})
        elif m.get("event") == "result":
            return m
        elif m.get("event") == "error" or m.get("ok") is False:
            raise AssertionError(f"{call} failed: {m}")


def test_over_api(station, session, serial, lot):
    """Tests one connected unit as the console does; measures the check standard first when the
    station asks for it (every N units, the recipe's rule). Returns the run."""
    for _ in range(2):
        rid = session.send("test.start", {"serial": serial, "lot": lot})
        reply = session.read()
        while reply.get("id") != rid or "ok" not in reply:
            reply = session.read()
        if reply["ok"]:
            ev = session.until_event()
            assert ev["event"] == "result", ev
            return ev["run"]
        if reply["error"]["code"] != "check_due":
            raise AssertionError(f"test.start {serial}: {reply}")
        answer_prompts(station, session, "cal.check")
        station.connect_unit(serial)
    raise AssertionError(f"test.start {serial}: refused twice")


def calibrate_over_api(station, session):
    """Calibrates as the console does; the calibration must come out valid."""
    m = answer_prompts(station, session, "cal.start")
    assert m["calibration"]["valid"], m
    return m
