"""The least a Python reader can do: the capture's own select + os.read on the port, counting newlines.

Prints 'open', then the count on SIGTERM.  It is the ceiling for the
capture's line rate and the floor for its CPU: one wake-up per arrival, as
the capture has, and nothing else.

Usage: python -m benchmarks.rawcopy PORT
"""

from __future__ import annotations

import os
import select
import signal
import sys

import serial


def main(port: str) -> None:
    stop = []
    signal.signal(signal.SIGTERM, lambda *a: stop.append(1))
    ser = serial.Serial(port, timeout=0.05)
    fd = ser.fd
    print("open", flush=True)
    n = 0
    while not stop:
        if select.select([fd], [], [], 0.05)[0]:
            n += os.read(fd, 1 << 16).count(b"\n")
    ser.close()
    print(n, flush=True)


if __name__ == "__main__":
    main(sys.argv[1])
