"""The least a Python reader can do: pyserial block reads, counting newlines.  Prints 'open', then the count on SIGTERM.

Usage: python -m benchmarks.rawcopy PORT
"""

from __future__ import annotations

import signal
import sys

import serial


def main(port: str) -> None:
    stop = []
    signal.signal(signal.SIGTERM, lambda *a: stop.append(1))
    ser = serial.Serial(port, timeout=0.05)
    print("open", flush=True)
    n = 0
    while not stop:
        n += ser.read(ser.in_waiting or 1).count(b"\n")
    ser.close()
    print(n, flush=True)


if __name__ == "__main__":
    main(sys.argv[1])
