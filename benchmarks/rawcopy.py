"""The least a reader can do: the capture's own select + os.read on the port, counting newlines.

Prints 'open', then the count on SIGTERM.  It is the ceiling for the
capture's line rate and the floor for its CPU: one wake-up per arrival, as
the capture has, and nothing else.

With --compiled, the same port setup (pyserial, exclusive), then the
process becomes `cat` reading the port with a blocking read (VMIN 1) into
/dev/null: one wake-up per arrival with no interpreter at all, the floor
for any reader that takes each arrival the moment it comes.  It prints only
'open'.

Usage: python -m benchmarks.rawcopy PORT [--compiled]
"""

from __future__ import annotations

import fcntl
import os
import select
import signal
import sys
import termios

import serial


def main(port: str, compiled: bool = False) -> None:
    stop = []
    signal.signal(signal.SIGTERM, lambda *a: stop.append(1))
    ser = serial.Serial(port, timeout=0.05)
    fd = ser.fd
    if compiled:
        attrs = termios.tcgetattr(fd)
        attrs[6][termios.VMIN], attrs[6][termios.VTIME] = 1, 0  # a read waits for the first byte, then returns
        termios.tcsetattr(fd, termios.TCSANOW, attrs)
        fcntl.fcntl(fd, fcntl.F_SETFL, fcntl.fcntl(fd, fcntl.F_GETFL) & ~os.O_NONBLOCK)
        print("open", flush=True)
        os.dup2(fd, 0)
        os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
        signal.signal(signal.SIGTERM, signal.SIG_DFL)
        os.execvp("cat", ["cat"])
    print("open", flush=True)
    n = 0
    while not stop:
        if select.select([fd], [], [], 0.05)[0]:
            n += os.read(fd, 1 << 16).count(b"\n")
    ser.close()
    print(n, flush=True)


if __name__ == "__main__":
    main(sys.argv[1], "--compiled" in sys.argv[2:])
