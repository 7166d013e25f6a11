"""How many lines per second survive the pty path without loss (a measurement, not a test).

Serves the fast scenario at rising rates through PtyServer, reads it with
SerialSource + LineSplitter + Decoder as capture does, and reports for each
rate whether every line arrived in order and how far the reader fell behind
the real-time schedule.  Run: PYTHONPATH=. python benchmarks/pty_rate.py
"""

from __future__ import annotations

import time

from logger.formats.decode import Decoder, LineSplitter
from logger.errors import DeviceGone
from logger.simulator import PtyServer, load_scenario, simulate
from logger.transport.serial_source import SerialSource


def measure(rate_hz: float, seconds: float = 3.0) -> tuple[bool, int, float]:
    sc = load_scenario("fast-1khz").with_overrides(rate_hz=rate_hz, flat_before=1, surface_seatings=1, flat_after=0,
                                                    seated_s=seconds / 2 - 0.3, lifted_s=0.3, lead_in_s=0.1,
                                                    tail_s=0.2)
    run = simulate(sc)
    want = [x[:-1] for _, x in run.lines()]
    server = PtyServer(run)
    server.start()
    src = SerialSource(server.path)
    src.open()
    sp, dec, got, lag = LineSplitter(), Decoder(), [], 0.0
    t0 = None
    try:
        while True:
            block = src.read_block()
            now = time.monotonic()
            t0 = t0 or now
            for raw in sp.feed(block):
                dec.decode(raw, now - t0, time.time())
                lag = max(lag, (now - t0) - len(got) / rate_hz)
                got.append(raw)
            if not block and server.wait(0):
                break
    except DeviceGone:
        pass
    src.close()
    server.stop()
    return got == want, len(want), lag


if __name__ == "__main__":
    for rate in (1000, 2000, 5000, 10000, 20000):
        ok, n, lag = measure(rate)
        print(f"{rate:6d} lines/s: {n} lines, {'lossless, in order' if ok else 'LOST OR REORDERED'}, "
              f"worst lag {lag * 1000:.1f} ms")
