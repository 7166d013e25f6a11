"""`StandPage`: the pipeline's listener that feeds the stand page.

It runs on the capture thread, so it only keeps the newest facts and hands
a state object to the server (`StandServer.publish`, which returns at once).
Events go out on every seating at once, and on every state change -- at
most one per `EVENT_GAP_S`: a state that flickers (lifted / settling on a
noisy stop) is sent as it stands at the next tick; a run's result that
changes without a seating (the start, a gap) goes out at the next tick;
the reading alone at most `READING_EVERY_S` apart.  So a fast stream
cannot flood a phone, and a lift still shows within a tenth of a second.
"""

from __future__ import annotations

import time

from logger.analysis.seating import State
from logger.live.listener import Listener, Sample
from logger.live.stand.server import StandServer
from logger.live.stand.state import last_seating, page_state, surface_series

READING_EVERY_S = 0.25  # the reading at most four times a second
EVENT_GAP_S = 0.1  # state changes at most ten times a second


class StandPage(Listener):
    def __init__(self, server: StandServer):
        self.server = server
        self._state = State.WAITING.value
        self._reading_mm: float | None = None
        self._summary: dict = {}
        self._last: dict | None = None
        self._series = surface_series([], {})
        self._dirty = True
        self._sent_reading_mm: float | None = None
        self._sent_at = float("-inf")  # time.monotonic() of the last event
        self._over = False

    def sample(self, sample: Sample) -> None:  # the hot path: one assignment
        if sample.value_mm is not None:
            self._reading_mm = sample.value_mm

    def state(self, state: State) -> None:
        self._state = state.value
        self._dirty = True
        if state == State.WAITING:  # no ticks come while the capture waits for the device
            self._push()
        else:
            self._maybe_push()

    def published(self, result, summary: dict) -> None:
        self._summary = summary
        self._series = surface_series(result.decisions, summary)
        self._dirty = True

    def seating(self, decision, summary: dict) -> None:
        self._summary = summary
        self._last = last_seating(decision)
        self._push()

    def tick(self, t_s: float) -> None:
        self._maybe_push()

    def end(self, summary: dict) -> None:
        self._summary = summary
        self._over = True  # the page then says the run ended, rather than that the link is lost
        self._push()
        self.server.stop()

    def next_tick_in_s(self) -> float | None:
        """An event or a new reading not yet sent: a tick when it may go; nothing new: no tick needed."""
        since = time.monotonic() - self._sent_at
        if self._dirty:
            return max(0.0, EVENT_GAP_S - since)
        if self._reading_mm != self._sent_reading_mm:
            return max(0.0, READING_EVERY_S - since)
        return None

    def _maybe_push(self) -> None:
        wait = self.next_tick_in_s()
        if wait is not None and wait <= 0:
            self._push()

    def _push(self) -> None:
        self.server.publish(page_state(self._summary, self._state, self._reading_mm, self._last, self._series,
                                       self._over))
        self._dirty = False
        self._sent_reading_mm = self._reading_mm
        self._sent_at = time.monotonic()
