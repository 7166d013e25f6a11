"""What every view shows, kept up to date from the pipeline's events."""

from __future__ import annotations

from logger.analysis.seating import State
from logger.live.listener import Listener, Sample


def verdict_text(decision) -> str:
    """`seating 3 on the flat: accepted` -- the same words on every screen and in the log."""
    verdict = "accepted" if decision.accepted else f"rejected ({decision.reason})"
    return f"seating {decision.seating.index} on the {decision.phase}: {verdict}"


class RunStatus(Listener):
    """The latest state, reading, summary and verdict, for the views that show them."""

    def __init__(self):
        self.current: State = State.WAITING
        self.value_mm: float | None = None
        self.summary: dict = {}
        self.last_event = ""
        self.last_phase: str | None = None  # the phase of the latest seating: a flat after the surface checks the zero

    def sample(self, sample: Sample) -> None:
        if sample.value_mm is not None:
            self.value_mm = sample.value_mm

    def state(self, state: State) -> None:
        self.current = state

    def published(self, result, summary: dict) -> None:
        self.summary = summary

    def seating(self, decision, summary: dict) -> None:
        self.summary = summary
        self.last_event = verdict_text(decision)
        self.last_phase = decision.phase
