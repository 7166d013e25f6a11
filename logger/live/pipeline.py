"""The pipeline that capture, replay, the demo and the tests all drive.

    lines -> Decoder -> SeatingDetector -> analyse (session) -> listeners

A source only has to call `line(t_s, raw)` for every received line in time
order, `tick(t_s)` when time passes with nothing received (on-change
streams: a held value becomes a seating by time alone), `gap(...)` when the
device went away, `device_state(...)` while it waits for it, and `finish()`
at the end.  Everything downstream is the same whichever source it is, which
is why a capture and the replay of its own recording give the same summary.
Whatever watches the run (the run-folder writer first, then the views, the
bells, the stand page, speech) is a `Listener` in the pipeline's list.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Sequence

from logger import __version__
from logger.analysis.seating import DetectorSettings, Seating, SeatingDetector, State
from logger.analysis.session import AnalysisSettings, SessionResult, analyse
from logger.config.profile import Profile
from logger.formats.decode import Decoder
from logger.formats.recording import escape
from logger.live.listener import Listener, Sample
from logger.timestamps import iso_utc


@dataclass
class RunSettings:
    """Everything that decides a run's result, written to settings.json."""

    detector: DetectorSettings
    analysis: AnalysisSettings
    source: dict = field(default_factory=dict)

    def as_dict(self, profile: Profile) -> dict:
        return dict(saglog_version=__version__, profile=profile.source, profile_unit=profile.unit,
                    spherometer=dict(kind=profile.spherometer.kind, params_mm=profile.spherometer.params_mm,
                                     u_mm=profile.spherometer.u_mm, systematic_mm=profile.spherometer.systematic_mm,
                                     ball_coupling=profile.spherometer.ball_coupling),
                    indicator=asdict(profile.indicator), detector=asdict(self.detector),
                    analysis=self.analysis.as_dict(), source=self.source)


class Pipeline:
    def __init__(self, profile: Profile, settings: RunSettings, listeners: Sequence[Listener], start_wall: float,
                 live: bool = True):
        self.profile = profile
        self.settings = settings
        self.start_wall = start_wall
        self.listeners = list(listeners)
        # the hot path tells only those who listen to every line
        self._sample_to = [lst.sample for lst in self.listeners if type(lst).sample is not Listener.sample]
        self.decoder = Decoder(profile.indicator.unit)
        self.detector = SeatingDetector(settings.detector, profile.indicator.sign)
        # bound once: `line` runs for every received line
        self._value, self._feed = self.decoder.value, self.detector.feed
        self.seatings: list[Seating] = []
        self.gaps: list[dict] = []
        self.last_t_s = 0.0
        self.result: SessionResult = analyse([], profile, settings.analysis)
        self._state = self.detector.state
        self._ended = False
        # Live, every seating is analysed and published at once.  A replay has
        # nobody watching: it analyses once at the end, which gives the same
        # result (the analysis depends only on the list of seatings).
        self.live = live
        if live:  # a complete run folder from the first moment: a kill -9 leaves readable files
            self._publish()

    # -- feeding --------------------------------------------------------
    def line(self, t_s: float, raw: bytes, text: str | None = None, t_wall: float | None = None) -> None:
        """One received line; `text` is its escaped form if the caller has it already.  (The hot path.)"""
        if t_wall is None:
            t_wall = self.start_wall + t_s
        self.last_t_s = t_s
        value_mm, unit, bad = self._value(raw)
        if value_mm is None:
            state, index = State.BAD, None
        else:
            done = self._feed(t_s, value_mm)
            detector = self.detector
            state, index = detector.state, detector.current_index
            if done is not None:
                self._seating(done)
            if state != self._state:
                self._notify_state()
        if self._sample_to:
            sample = Sample(t_s, t_wall, raw, escape(raw) if text is None else text, value_mm, unit, state, index)
            for tell in self._sample_to:
                tell(sample)

    def partial(self, t_s: float, raw: bytes) -> None:
        """The tail of a line the port opened in (logger.live.opening): a bad line, never a reading."""
        self.last_t_s = t_s
        self.decoder.bad += 1
        if self._sample_to:
            sample = Sample(t_s, self.start_wall + t_s, raw, escape(raw), None, None, State.BAD, None)
            for tell in self._sample_to:
                tell(sample)

    def tick(self, t_s: float) -> None:
        """Time has passed (after every block read): held values may become seatings; listeners flush, redraw."""
        self.detector.advance(t_s)
        self._notify_state()
        for lst in self.listeners:
            lst.tick(t_s)

    def next_tick_in_s(self, t_s: float) -> float | None:
        """How soon a `tick` is needed if nothing arrives: the detector's and every listener's need; None: none."""
        waits = [w for w in (lst.next_tick_in_s() for lst in self.listeners) if w is not None]
        due = self.detector.next_change_s(t_s)
        if due is not None:
            waits.append(due)
        return min(waits, default=None)

    def device_state(self, state: State) -> None:
        """The capture's own state (waiting for device, or back to lifted): told to every listener."""
        self._state = state
        for lst in self.listeners:
            lst.state(state)

    def gap(self, t_start_s: float, t_end_s: float) -> None:
        """The device was gone from t_start to t_end: a seating in progress ends at the gap."""
        done = self.detector.end(t_start_s)
        self.gaps.append({"t_start_s": t_start_s, "t_end_s": t_end_s})
        for lst in self.listeners:
            lst.gap(t_start_s, t_end_s)
        if done is not None:
            self._seating(done)
        elif self.live:
            self._publish()

    def finish(self, t_end_s: float | None = None) -> dict:
        """End of the stream: close a seating in progress, publish the final summary, end every listener."""
        t_end = self.last_t_s if t_end_s is None else max(t_end_s, self.last_t_s)
        self.last_t_s = t_end
        done = self.detector.end(t_end)
        if done is not None:
            self.seatings.append(done)
        try:
            self.result = analyse(self.seatings, self.profile, self.settings.analysis)
            self._publish()
            if done is not None:
                self._tell_seating(done)
        finally:
            self.end()
        return self.summary

    def end(self) -> None:
        """Every listener's `end`, once, even after an error (files closed, threads stopped); the first error is raised."""
        if self._ended:
            return
        self._ended = True
        summary, first = self.summary, None
        for lst in self.listeners:
            try:
                lst.end(summary)
            except Exception as exc:  # noqa: BLE001 - every listener gets its end; the first error is raised after
                first = first or exc
        if first is not None:
            raise first

    # -- results --------------------------------------------------------
    @property
    def summary(self) -> dict:
        s = dict(self.result.summary)
        lines = self.decoder.good + self.decoder.bad
        s.update(saglog_version=__version__, lines=lines, bad_lines=self.decoder.bad,
                 started_utc=iso_utc(self.start_wall), ended_utc=iso_utc(self.start_wall + self.last_t_s),
                 t_end_s=self.last_t_s, gaps=list(self.gaps))
        if lines == 0:  # a capture waited for lines; a replay read a recording (or a plain capture) without any
            s.update(status="no readings",
                     message="Nothing was received." if self.live else "The recording holds no lines.")
        elif self.decoder.good == 0:
            said = ("The one line received was a bad line (no reading in it)" if lines == 1
                    else f"All {lines} lines were bad lines (no reading in them)")
            s.update(status="no readings", message=f"{said}: check the baud rate and the cable.")
        return s

    def _seating(self, seating: Seating) -> None:
        self.seatings.append(seating)
        if not self.live:
            return
        self.result = analyse(self.seatings, self.profile, self.settings.analysis)
        self._publish()
        self._tell_seating(seating)

    def _tell_seating(self, seating: Seating) -> None:
        decision, summary = self.result.decisions[seating.index - 1], self.summary
        for lst in self.listeners:
            lst.seating(decision, summary)

    def _publish(self) -> None:
        summary = self.summary
        for lst in self.listeners:
            lst.published(self.result, summary)

    def _notify_state(self) -> None:
        if self.detector.state != self._state:
            self._state = self.detector.state
            for lst in self.listeners:
                lst.state(self._state)
