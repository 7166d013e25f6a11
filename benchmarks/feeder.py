"""Invented indicator streams and a pseudo-terminal that plays them, unplugs and replugs.

The physical picture (invented data, common practice on a spherometer stand):
the spindle rests at its stop while the instrument is lifted, runs in with a
short settling transient when it is seated, holds with about one count of
noise, and runs out when it is lifted.  The first seatings are on the flat
(about 0), then on the surface, then on the flat again.

`PtyDevice` is a real pseudo-terminal (os.openpty, raw mode) behind a
symlink, so a capture can be pointed at a stable path while the device
behind it is unplugged (master closed) and replugged (a new pty, the link
re-pointed), as a USB adapter does.
"""

from __future__ import annotations

import os
import threading
import time
import tty
from dataclasses import dataclass
from pathlib import Path

import numpy as np

STOP_MM = -1.5  # the spindle's rest position while lifted (invented)
STEP_MM = 0.001  # one count of the example indicator


@dataclass(frozen=True)
class Stream:
    """Lines of an invented session and which of them close each seating.

    lines: every line with its CR LF ending.
    lift_at: index in `lines` of the first run-out line after each seating
             (the reading that ends it).
    levels_mm: the level of each seating.
    """

    lines: list[bytes]
    lift_at: list[int]
    levels_mm: list[float]


def levels(n_seatings: int, surface_mm: float = -0.340, flats_first: int = 3, flats_last: int = 3) -> list[float]:
    """Flat first, then the surface, then the flat again (flat = 0 mm)."""
    n_flat_last = min(flats_last, max(n_seatings - flats_first, 0))
    n_surface = max(n_seatings - flats_first - n_flat_last, 0)
    out = [0.0] * min(flats_first, n_seatings) + [surface_mm] * n_surface + [0.0] * n_flat_last
    return out[:n_seatings]


def session(n_seatings: int, rate_hz: float = 100.0, seated_s: float = 2.0, lifted_s: float = 1.0,
            seed: int = 0, surface_mm: float = -0.340, unit: str = "mm", tau_s: float = 0.08) -> Stream:
    """An invented stream: per seating a lifted stretch at the stop, then a settle-in and a hold.

    The settle-in is exponential with time constant `tau_s` (0.08 s, invented):
    it comes within 4 counts of the level after about 6 tau.
    """
    rng = np.random.default_rng(seed)
    n_lift, n_seat = max(int(lifted_s * rate_hz), 2), max(int(seated_s * rate_hz), 2)
    t = np.arange(n_seat) / rate_hz
    lines: list[bytes] = []
    lift_at: list[int] = []
    lv = levels(n_seatings, surface_mm)
    scale, fmt = (1.0, b"%+.3f mm\r\n") if unit == "mm" else (1 / 25.4, b"%+.5f in\r\n")
    for level in lv:
        if lines:
            lift_at.append(len(lines))
        stop = STOP_MM + rng.normal(0, 0.3 * STEP_MM, n_lift)
        seated = level + (STOP_MM - level) * np.exp(-t / tau_s) + rng.normal(0, 0.6 * STEP_MM, n_seat)
        values = np.round(np.concatenate([stop, seated]) / STEP_MM) * STEP_MM * scale
        lines.extend(fmt % v for v in values.tolist())
    lift_at.append(len(lines))
    lines.extend(fmt % (STOP_MM * scale) for _ in range(n_lift))  # lifted at the end: the last seating ends
    return Stream(lines, lift_at, lv)


class PtyDevice:
    """A virtual serial device: a raw-mode pty whose slave is reached through `link`."""

    def __init__(self, link: str | Path):
        self.link = Path(link)
        self.master: int | None = None
        self._slave: int | None = None
        self.plug()

    def plug(self) -> None:
        """A new pty (as a re-enumerated USB adapter gets) and the link pointed at it."""
        master, slave = os.openpty()
        tty.setraw(slave)
        tmp = self.link.with_name(self.link.name + ".new")
        if tmp.is_symlink():
            tmp.unlink()
        os.symlink(os.ttyname(slave), tmp)
        os.replace(tmp, self.link)
        self.master, self._slave = master, slave

    def unplug(self) -> None:
        """Close both ends: an open reader sees the device vanish; the link dangles."""
        for fd in (self.master, self._slave):
            if fd is not None:
                os.close(fd)
        self.master = self._slave = None
        if self.link.is_symlink():
            self.link.unlink()

    def write(self, data: bytes) -> None:
        view = memoryview(data)
        while view:
            view = view[os.write(self.master, view):]

    def close(self) -> None:
        self.unplug()


class Pacer(threading.Thread):
    """Writes lines into a device at `rate_hz`, in batches every `tick_s`, from a thread.

    `sent` counts the lines written; `elapsed_s` is how long it took (a
    reader that cannot keep up makes the writes block and the time grow).
    """

    def __init__(self, device: PtyDevice, lines: list[bytes], rate_hz: float, tick_s: float = 0.005):
        super().__init__(daemon=True)
        self.device, self.lines, self.rate_hz, self.tick_s = device, lines, rate_hz, tick_s
        self.sent = 0
        self.elapsed_s = 0.0
        self.error: BaseException | None = None
        self._halt = threading.Event()

    def stop(self) -> None:
        self._halt.set()

    def run(self) -> None:
        t0 = time.perf_counter()
        n = len(self.lines)
        try:
            while self.sent < n and not self._halt.is_set():
                due = min(n, int((time.perf_counter() - t0) * self.rate_hz) + 1)
                if due > self.sent:
                    self.device.write(b"".join(self.lines[self.sent:due]))
                    self.sent = due
                else:
                    time.sleep(max(0.0, min(self.tick_s, (self.sent + 1) / self.rate_hz - (time.perf_counter() - t0))))
        except OSError as exc:
            self.error = exc
        self.elapsed_s = time.perf_counter() - t0
