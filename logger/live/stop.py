"""A stop asked for by Ctrl-C, SIGTERM or another thread, which a long-running command checks between steps.

A signal only sets a flag: the command ends at its next step with every
file complete and consistent (a capture's run folder, a replay's run of the
lines read so far), instead of being cut wherever the signal landed.
"""

from __future__ import annotations

import contextlib
import select
import signal
import socket


class Stop:
    """Set by SIGINT/SIGTERM (or `requested = True` from another thread); the loop checks it between blocks.

    Setting it also makes the stop readable (`fileno()`), and so does a
    signal (the interpreter's wakeup fd): a capture asleep on an idle port,
    or letting lines gather, wakes at once.  A socket pair, not a pipe: on
    Windows the wakeup fd must be a socket.
    """

    def __init__(self):
        self._requested = False
        self._wake, self._poke = socket.socketpair()
        self._wake.setblocking(False)
        self._poke.setblocking(False)

    def fileno(self) -> int:
        """Readable once a stop is asked for (or a signal came): for select, beside the port."""
        return self._wake.fileno()

    def drain(self) -> None:
        with contextlib.suppress(OSError):  # empty: another reader drained it
            self._wake.recv(512)

    def sleep(self, s: float) -> None:
        """Up to `s` seconds, less when a stop is asked for (or a signal comes) meanwhile."""
        if s > 0 and not self._requested and select.select([self._wake], [], [], s)[0]:
            self.drain()

    @property
    def requested(self) -> bool:
        return self._requested

    @requested.setter
    def requested(self, value: bool) -> None:
        self._requested = bool(value)
        if value:
            with contextlib.suppress(OSError):  # full: a wake-up is already waiting
                self._poke.send(b"!")

    def __call__(self, signum, frame):
        self._requested = True  # the signal itself has already made the stop readable

    @classmethod
    def on_signals(cls) -> "Stop":
        """A Stop that Ctrl-C (SIGINT) and SIGTERM set: every command that captures ends the same way."""
        stop = cls()
        signal.set_wakeup_fd(stop._poke.fileno(), warn_on_full_buffer=False)
        signal.signal(signal.SIGTERM, stop)
        signal.signal(signal.SIGINT, stop)
        return stop


class _Never:
    """A stop that is never asked for: for callers that give none."""

    requested = False


NEVER = _Never()
