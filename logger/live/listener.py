"""The one interface through which everything that watches a run hears it.

The pipeline holds a list of listeners -- the run-folder writer, the live
panel or the plain log, the bells, the stand page, speech -- and tells each
of them, in list order, what happened.  Nothing else calls a view: adding an
output is one new `Listener` subclass handed to the pipeline.

Listeners are called on the thread that reads the port, so each must return
at once: one that needs time (a web server, a speech engine) hands the event
to its own thread and never waits for it.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, NamedTuple

if TYPE_CHECKING:  # for the annotations only: this module stays import-free
    from logger.analysis.seating import State
    from logger.analysis.session import Decision, SessionResult


class Sample(NamedTuple):
    """One received line as the run sees it: a row of samples.csv."""

    t_s: float  # seconds since the stream started
    t_wall: float  # Unix epoch seconds (UTC)
    raw: bytes  # the line as received, without its LF
    text: str  # the same, escaped as in the recording
    value_mm: float | None  # None for a bad line
    unit: str | None  # the unit the value was read in
    state: "State"  # the detector's state after this line (BAD for a bad line)
    seating: int | None  # number of the seating in progress while seated


class Listener:
    """Override what you need; every method is a no-op here.

    `sample` is the hot path (every received line); the pipeline calls it
    only on listeners that override it.
    """

    def sample(self, sample: Sample) -> None:
        """One received line, good or bad."""

    def state(self, state: "State") -> None:
        """The instrument's state changed (lifted, settling, seated, waiting for device)."""

    def published(self, result: "SessionResult", summary: dict) -> None:
        """The run's result changed (start, every seating, a gap, the end): the new summary."""

    def seating(self, decision: "Decision", summary: dict) -> None:
        """A seating ended; `decision` is what the session made of it (after `published`)."""

    def gap(self, t_start_s: float, t_end_s: float) -> None:
        """The device was gone from t_start_s to t_end_s."""

    def tick(self, t_s: float) -> None:
        """Time passed (called once per block read, and when nothing arrives as `next_tick_in_s` asks)."""

    def next_tick_in_s(self) -> float | None:
        """How soon this listener needs a `tick` if nothing arrives (seconds); None: it needs none.

        A capture that nothing reaches sleeps until the soonest of these (at
        most a second), so an idle capture costs next to nothing.
        """
        return None

    def end(self, summary: dict) -> None:
        """The run is over: close files, stop threads.  Called once, even after an error."""
