#!/usr/bin/env python3
"""A plain step sweep, written the way a bench script usually is: one socket per instrument,
one command after the other, standard library only. Used by scripts/bench as the comparison
for Echoline's sweep speed. It measures raw peak levels only (no calibration, no limits).

SAFETY: the source output is switched ON at the given power; the antenna on the test port
radiates. Keep the fixture shielded, and keep power minus coupling below the analyzer's
maximum safe input.

Usage: plain_sweep.py --source tcp://127.0.0.1:5031 --receiver tcp://127.0.0.1:5032
                      [--start-hz 860e6 --stop-hz 970e6 --points 201 --power-dbm -10 --settle-s 0.001]
Prints one JSON line: {"points":201,"seconds":...,"per_point_ms":...}
"""
import argparse
import json
import socket
import sys
import time


class Instrument:
    def __init__(self, address, name):
        if not address.startswith("tcp://"):
            sys.exit(f"plain_sweep.py: {name}: only tcp:// addresses are supported, not {address!r}")
        host, port = address[len("tcp://"):].rsplit(":", 1)
        self.name = name
        self.sock = socket.create_connection((host, int(port)), timeout=10)
        self.sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        self.buf = b""

    def write(self, command):
        self.sock.sendall(command.encode("ascii") + b"\n")

    def query(self, command):
        self.write(command)
        while b"\n" not in self.buf:
            chunk = self.sock.recv(4096)
            if not chunk:
                sys.exit(f"plain_sweep.py: {self.name}: connection closed after {command!r}")
            self.buf += chunk
        line, self.buf = self.buf.split(b"\n", 1)
        return line.decode("ascii").strip()


def main():
    p = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    p.add_argument("--source", required=True)
    p.add_argument("--receiver", required=True)
    p.add_argument("--start-hz", type=float, default=860e6)
    p.add_argument("--stop-hz", type=float, default=970e6)
    p.add_argument("--points", type=int, default=201)
    p.add_argument("--power-dbm", type=float, default=-10)
    p.add_argument("--settle-s", type=float, default=0.001)
    a = p.parse_args()

    src = Instrument(a.source, "source")
    sa = Instrument(a.receiver, "receiver")
    sa.write("INIT:CONT OFF")
    sa.write("FREQ:SPAN 100e3")
    sa.write("BAND 10e3")
    sa.write("BAND:VID 10e3")
    sa.write("CALC:MARK1:STAT ON")
    src.write(f"POW {a.power_dbm}")
    src.write("OUTP ON")
    src.query("*OPC?")

    step = (a.stop_hz - a.start_hz) / (a.points - 1) if a.points > 1 else 0
    levels = []
    t0 = time.perf_counter()
    for i in range(a.points):
        f = a.start_hz + i * step
        src.write(f"FREQ:CW {f:.6f}")
        src.query("*OPC?")
        time.sleep(a.settle_s)
        sa.write(f"FREQ:CENT {f:.6f}")
        sa.write("INIT:IMM")
        sa.query("*OPC?")
        sa.write("CALC:MARK1:MAX")
        levels.append(float(sa.query("CALC:MARK1:Y?")))
    seconds = time.perf_counter() - t0
    src.write("OUTP OFF")
    src.query("*OPC?")
    err = src.query("SYST:ERR?")
    err_sa = sa.query("SYST:ERR?")
    if not err.startswith(("0", "+0")) or not err_sa.startswith(("0", "+0")):
        sys.exit(f"plain_sweep.py: instrument error: source {err!r}, receiver {err_sa!r}")
    print(json.dumps({"points": a.points, "seconds": seconds, "per_point_ms": 1e3 * seconds / a.points,
                      "min_dbm": min(levels), "max_dbm": max(levels)}))


if __name__ == "__main__":
    main()
