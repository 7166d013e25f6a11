"""The stand page: lift -> page updated in a real browser, and what 20 pages and a stalled one cost the capture.

Each capture is the real command in its own process, fed through a real pty
by `feeder.Pacer`; the page is opened in Debian's headless Chromium.  The
page's update time is taken inside the browser (a MutationObserver on the
counts, `Date.now()`), the lift's write time here (`time.time()`): one clock,
one machine, loopback.
"""

from __future__ import annotations

import json
import signal
import socket
import subprocess
import time
from pathlib import Path

from tests.helpers.stand import EventReader, chromium, url_port
from tests.helpers.stand import start_capture as start_page_capture

from .capture_bench import PROFILE, _wait, count_records, start_capture
from .feeder import Pacer, PtyDevice, session

SEATINGS = 10
CLIENTS = 20
LOSS_RATE_HZ = 5_000
WATCH = """
window.__seen = [];
new MutationObserver(() => {
  const n = ["n-flat", "n-surface", "n-rejected"].reduce((a, id) => a + Number(document.getElementById(id).textContent), 0);
  window.__seen.push([Date.now() / 1000, n]);
}).observe(document.getElementById("counts"), {subtree: true, childList: true, characterData: true});
"""


def start(dev: PtyDevice, out: Path, web: bool) -> tuple[subprocess.Popen, str | None]:
    """The real capture, with the stand page on a free loopback port when `web`; returns it and the page's URL."""
    if not web:
        return start_capture(dev, out), None
    proc, url = start_page_capture(dev.link, out, "--profile", PROFILE, "--web", "127.0.0.1:0")
    _wait(lambda: (out / "stream.rec").exists() or proc.poll() is not None, 60, "the capture to open the port")
    return proc, url


def finish(proc: subprocess.Popen) -> None:
    proc.send_signal(signal.SIGTERM)
    if proc.wait(60) != 0:
        raise RuntimeError(f"capture failed: {proc.stderr.read()}")


def lift_delays(dev: PtyDevice, stream, seen_at) -> list[float]:
    """For each seating: write up to its lift at 100 lines/s, then the lift; `seen_at(k)` waits for seating k+1."""
    delays, begin = [], 0
    for k, lift in enumerate(stream.lift_at):
        Pacer(dev, stream.lines[begin:lift], 100.0).run()
        time.sleep(0.05)
        t = time.time()
        dev.write(stream.lines[lift])
        delays.append(seen_at(k + 1) - t)
        begin = lift + 1
    return delays


def summary_seen(out: Path):
    def seen(n: int) -> float:
        def total():
            try:
                return json.loads((out / "summary.json").read_text()).get("seatings_total", 0)
            except (OSError, ValueError):
                return -1
        _wait(lambda: total() >= n, 10, f"seating {n} in summary.json")
        return time.time()
    return seen


def clients(url: str) -> tuple[list[EventReader], socket.socket]:
    """Twenty pages reading the event stream, and one that asks for it and never reads."""
    port = url_port(url)
    readers = [EventReader(port) for _ in range(CLIENTS)]
    for r in readers:
        r.start()
    stalled = socket.socket()
    stalled.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)
    stalled.connect(("127.0.0.1", port))
    stalled.sendall(f"GET /events HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n\r\n".encode())
    _wait(lambda: all(r.states for r in readers), 30, "every page's first state")
    return readers, stalled


def summary_latency(tmp: Path, with_clients: bool) -> list[float]:
    stream = session(SEATINGS, rate_hz=100.0, seated_s=1.6, lifted_s=0.5, seed=5)
    dev, out = PtyDevice(tmp / f"tty-st-{with_clients}"), tmp / f"cap-st-{with_clients}"
    proc, url = start(dev, out, with_clients)
    stalled = None
    try:
        if with_clients:
            _, stalled = clients(url)
        delays = lift_delays(dev, stream, summary_seen(out))
        finish(proc)
    finally:
        if stalled:
            stalled.close()
        dev.close()
    return delays


def page_latency(tmp: Path) -> list[float]:
    stream = session(SEATINGS, rate_hz=100.0, seated_s=1.6, lifted_s=0.5, seed=6)
    dev, out = PtyDevice(tmp / "tty-page"), tmp / "cap-page"
    proc, url = start(dev, out, True)
    driver = chromium()
    try:
        driver.get(url)
        _wait(lambda: driver.execute_script("return document.getElementById('state').textContent") == "lifted", 30,
              "the page")
        driver.execute_script(WATCH)

        def seen(n: int) -> float:
            def first():
                return next((t for t, total in driver.execute_script("return window.__seen") if total >= n), None)
            _wait(lambda: first() is not None, 10, f"seating {n} on the page")
            return first()
        delays = lift_delays(dev, stream, seen)
        finish(proc)
    finally:
        driver.quit()
        dev.close()
    return delays


def loss_with_clients(tmp: Path) -> tuple[int, int]:
    """Lines sent at 5,000 lines/s with 20 pages and a stalled one, and lines in stream.rec."""
    stream = session(6, rate_hz=LOSS_RATE_HZ, seated_s=1.0, lifted_s=0.4, seed=7)
    dev, out = PtyDevice(tmp / "tty-loss"), tmp / "cap-loss"
    proc, url = start(dev, out, True)
    try:
        _, stalled = clients(url)
        pacer = Pacer(dev, stream.lines, LOSS_RATE_HZ)
        pacer.run()
        _wait(lambda: count_records(out)[1] >= pacer.sent, 60, "the capture to take every line")
        finish(proc)
        stalled.close()
    finally:
        dev.close()
    return pacer.sent, count_records(out)[0]


def _ms(delays: list[float]) -> tuple[float, float]:
    d = sorted(delays)
    return d[len(d) // 2] * 1000, d[-1] * 1000


def run(tmp: Path) -> list[dict]:
    figures = []
    med, worst = _ms(page_latency(tmp))
    print(f"stand page: lift -> page updated median {med:.0f} ms, max {worst:.0f} ms", flush=True)
    figures.append(dict(name="lift -> stand page updated (browser)", value={"median_ms": round(med), "max_ms": round(worst)},
                        unit="ms", text=f"median {med:.0f} ms, max {worst:.0f} ms ({SEATINGS} seatings)",
                        goal="median < 100 ms, max < 300 ms", met=med < 100 and worst < 300))
    alone, crowded = _ms(summary_latency(tmp, False)), _ms(summary_latency(tmp, True))
    print(f"stand page: lift -> summary.json without pages {alone[0]:.0f}/{alone[1]:.0f} ms, with {CLIENTS} + 1 "
          f"stalled {crowded[0]:.0f}/{crowded[1]:.0f} ms (median/max)", flush=True)
    figures.append(dict(name=f"lift -> summary.json with {CLIENTS} pages + 1 stalled",
                        value={"median_ms": round(crowded[0]), "max_ms": round(crowded[1]),
                               "without_median_ms": round(alone[0]), "without_max_ms": round(alone[1])},
                        unit="ms", text=f"median {crowded[0]:.0f} ms, max {crowded[1]:.0f} ms (without pages: "
                                        f"{alone[0]:.0f} / {alone[1]:.0f} ms)",
                        goal="about the same as without pages", met=crowded[1] < max(2 * alone[1], alone[1] + 50)))
    sent, kept = loss_with_clients(tmp)
    print(f"stand page: {LOSS_RATE_HZ:,} lines/s with {CLIENTS} pages + 1 stalled: sent {sent}, kept {kept}",
          flush=True)
    figures.append(dict(name=f"capture loss at {LOSS_RATE_HZ:,} lines/s with {CLIENTS} pages + 1 stalled",
                        value=sent - kept, unit="lines lost", text=f"{sent - kept} of {sent:,} lines lost",
                        goal="none lost", met=sent == kept))
    return figures
