"""Capture comes first: 20 pages and one stalled client while about 5,000 lines/s flow through a real pty.

The reference is the feeder's own count of the lines it wrote (a pty never
drops bytes): every one must be in stream.rec and samples.csv.  How long
summary.json takes to follow a seating is a timing figure: `make bench`
(benchmarks/stand_bench.py) measures it with and without the clients.
"""

from __future__ import annotations

import json
import signal
import socket

from benchmarks.feeder import Pacer, PtyDevice, session
from tests.helpers.paths import EXAMPLE_PROFILE
from tests.helpers.stand import EventReader, start_capture, url_port, wait_for

RATE_HZ = 5_000
CLIENTS = 20


def count_records(out) -> tuple[int, int]:
    with open(out / "stream.rec") as f:
        rec = sum(1 for line in f if line[:1] != "#")
    with open(out / "samples.csv") as f:
        samples = sum(1 for _ in f) - 1
    return rec, samples


def stalled_client(port: int) -> socket.socket:
    """Asks for the event stream and never reads a byte of it."""
    s = socket.socket()
    s.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)
    s.connect(("127.0.0.1", port))
    s.sendall(f"GET /events HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n\r\n".encode())
    return s


def test_twenty_pages_and_a_stalled_one_lose_no_line(tmp_path):
    stream = session(6, rate_hz=RATE_HZ, seated_s=1.0, lifted_s=0.4)  # about 8.5 s of lines at 5,000 per second
    dev = PtyDevice(tmp_path / "tty")
    out = tmp_path / "run"
    cap, url = start_capture(dev.link, out, "--profile", EXAMPLE_PROFILE, "--web", "127.0.0.1:0")
    port = url_port(url)
    readers = [EventReader(port) for _ in range(CLIENTS)]
    stalled = stalled_client(port)
    try:
        for r in readers:
            r.start()
        wait_for(lambda: all(r.states for r in readers), 30, "every page's first state")
        pacer = Pacer(dev, stream.lines, RATE_HZ)
        pacer.start()
        pacer.join(120)
        assert pacer.error is None and pacer.sent == len(stream.lines)
        wait_for(lambda: count_records(out)[1] == len(stream.lines), 60, "the capture to take every line")
        cap.send_signal(signal.SIGTERM)
        assert cap.wait(60) == 0, cap.stderr.read()
    finally:
        stalled.close()
        if cap.poll() is None:
            cap.kill()
        dev.close()
    assert count_records(out) == (len(stream.lines), len(stream.lines))  # not one line lost
    summary = json.loads((out / "summary.json").read_text())
    assert summary["lines"] == len(stream.lines) and summary["seatings_total"] == len(stream.levels_mm)
    for r in readers:
        r.join(30)
        # each page heard the final result (the run's end closes the streams after their last frames)
        assert r.states[-1]["run_over"] and r.error is None and len(r.states) > len(stream.levels_mm)
        assert r.states[-1]["seatings_total"] == summary["seatings_total"]
        assert r.states[-1]["lines"] == summary["lines"]
