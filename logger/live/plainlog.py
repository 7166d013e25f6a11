"""One timestamped line per event, for when stdout is not a terminal (logs, scripts, services)."""

from __future__ import annotations

import sys
import time

from logger.analysis.seating import State
from logger.live.present import length_text
from logger.live.status import RunStatus
from logger.timestamps import iso_utc


class PlainLog(RunStatus):
    def __init__(self, unit: str, stream=None):
        super().__init__()
        self.unit = unit
        self.stream = stream or sys.stdout
        self._gap_s: float | None = None  # the latest gap's length, until the device is back

    def say(self, text: str) -> None:
        """One line: the time (ISO 8601 UTC) and the text."""
        self.stream.write(f"{iso_utc(time.time())} {text}\n")
        self.stream.flush()

    def state(self, state: State) -> None:
        """Seated; the device gone and back (the panel's words).

        A view starts out waiting, so the waits before the first opening (the run does not exist
        yet) print nothing; a stop while the device is gone prints no "back".
        """
        was = self.current
        super().state(state)
        if state == State.SEATED:
            self.say("seated")
        elif state == State.WAITING and was != State.WAITING:
            self.say(State.WAITING.value)
        elif was == State.WAITING and self._gap_s is not None:
            self.say(f"device back after a gap of {self._gap_s:.1f} s")
            self._gap_s = None

    def gap(self, t_start_s: float, t_end_s: float) -> None:
        self._gap_s = t_end_s - t_start_s  # told between the wait and the reopening

    def seating(self, decision, summary: dict) -> None:
        super().seating(decision, summary)
        s, u = summary, self.unit
        self.say(self.last_event)
        if s.get("radius_mm") is not None:
            U = s.get("radius_U_mm")
            self.say(f"radius {length_text(s['radius_mm'], u, 1)}"
                     + (f" +- {length_text(U, u, 1)}" if U else " (uncertainty not estimable)")
                     + f"; focal length {length_text(s['focal_length_mm'], u, 1)}")
