"""Bell patterns so the person at the stand need not look at the screen.

One ring when a seating is accepted, two for a rejected seating, three when
the zero is set (the first accepted flat seating).
"""

from __future__ import annotations

import sys
import threading

from logger.analysis.phases import FLAT
from logger.live.listener import Listener


class Bells(Listener):
    GAP_S = 0.25  # between rings, so that terminals sound each one

    def __init__(self, stream=None):
        self.stream = stream or sys.stderr
        self._zero_set = False

    def ring(self, times: int) -> None:
        """Ring `times` bells, spaced out on a timer thread so the capture loop never waits."""
        for k in range(times):
            threading.Timer(k * self.GAP_S, self._bell).start()

    def _bell(self) -> None:
        try:
            self.stream.write("\a")
            self.stream.flush()
        except (OSError, ValueError):
            pass  # the terminal went away: no bell, nothing else lost

    def seating(self, decision, summary: dict) -> None:
        if not decision.accepted:
            self.ring(2)
        elif decision.phase == FLAT and not self._zero_set:
            self._zero_set = True
            self.ring(3)
        else:
            self.ring(1)
