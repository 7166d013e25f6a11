"""The pipeline that capture, replay, the demo and the tests all drive.

    lines -> Decoder -> SeatingDetector -> analyse (session) -> RunWriter / listener

A source only has to call `line(t_s, raw)` for every received line in time
order, `tick(t_s)` when time passes with nothing received (on-change
streams: a held value becomes a seating by time alone), `gap(...)` when the
device went away, and `finish()` at the end.  Everything downstream is the
same whichever source it is, which is why a capture and the replay of its
own recording give the same summary.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field

from . import __version__
from .decode import Decoder, Reading
from .profile import Profile
from .recording import escape
from .runfolder import RunWriter, iso_utc
from .seating import DetectorSettings, Seating, SeatingDetector
from .session import AnalysisSettings, SessionResult, analyse

BAD = "bad"


class Listener:
    """What a live view or the sound cues hear from the pipeline.  Override what you need."""

    def reading(self, reading: Reading, state: str) -> None: ...

    def seating(self, seating: Seating, result: SessionResult) -> None: ...

    def state(self, state: str) -> None: ...


@dataclass
class RunSettings:
    """Everything that decides a run's result, written to settings.json."""

    detector: DetectorSettings
    analysis: AnalysisSettings
    source: dict = field(default_factory=dict)

    def as_dict(self, profile: Profile) -> dict:
        return dict(saglog_version=__version__, profile=profile.source, profile_unit=profile.unit,
                    spherometer=dict(kind=profile.spherometer.kind, params_mm=profile.spherometer.params_mm,
                                     u_mm=profile.spherometer.u_mm),
                    indicator=asdict(profile.indicator), detector=asdict(self.detector),
                    analysis=asdict(self.analysis), source=self.source)


class Pipeline:
    def __init__(self, profile: Profile, settings: RunSettings, writer: RunWriter | None,
                 start_wall: float, listener: Listener | None = None, live: bool = True):
        self.profile = profile
        self.settings = settings
        self.writer = writer
        self.start_wall = start_wall
        self.listener = listener or Listener()
        self._wants_readings = type(self.listener).reading is not Listener.reading
        self.decoder = Decoder(profile.indicator.unit)
        self.detector = SeatingDetector(settings.detector, profile.indicator.sign)
        # bound once: `line` runs for every received line
        self._value, self._feed = self.decoder.value, self.detector.feed
        self._sample = writer.sample if writer is not None else None
        self.seatings: list[Seating] = []
        self.gaps: list[dict] = []
        self.last_t_s = 0.0
        self.result: SessionResult = analyse([], profile, settings.analysis)
        self._state = self.detector.state
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
            state, index = BAD, None
        else:
            done = self._feed(t_s, value_mm)
            detector = self.detector
            state, index = detector.state, detector.current_index
            if done is not None:
                self._seating(done)
            if state != self._state:
                self._notify_state()
        if self._sample is not None:
            self._sample(t_s, t_wall, escape(raw) if text is None else text, value_mm, state, index)
        if self._wants_readings:
            self.listener.reading(Reading(t_s, t_wall, raw, value_mm, unit, bad), state)

    def tick(self, t_s: float) -> None:
        self.detector.advance(t_s)
        self._notify_state()
        if self.writer is not None:
            self.writer.maybe_flush()

    def gap(self, t_start_s: float, t_end_s: float) -> None:
        """The device was gone from t_start to t_end: a seating in progress ends at the gap."""
        done = self.detector.end(t_start_s)
        self.gaps.append({"t_start_s": t_start_s, "t_end_s": t_end_s})
        if done is not None:
            self._seating(done)
        elif self.live:
            self._publish()

    def finish(self, t_end_s: float | None = None) -> dict:
        """End of the stream: close a seating in progress, write the final summary."""
        t_end = self.last_t_s if t_end_s is None else max(t_end_s, self.last_t_s)
        self.last_t_s = t_end
        done = self.detector.end(t_end)
        if done is not None:
            self.seatings.append(done)
        self.result = analyse(self.seatings, self.profile, self.settings.analysis)
        self._publish()
        if done is not None:
            self.listener.seating(done, self.result)
        if self.writer is not None:
            self.writer.close()
        return self.summary

    # -- results --------------------------------------------------------
    @property
    def summary(self) -> dict:
        s = dict(self.result.summary)
        lines = self.decoder.good + self.decoder.bad
        s.update(saglog_version=__version__, lines=lines, bad_lines=self.decoder.bad,
                 started_utc=iso_utc(self.start_wall), ended_utc=iso_utc(self.start_wall + self.last_t_s),
                 t_end_s=self.last_t_s, gaps=list(self.gaps))
        if lines == 0:
            s.update(status="no readings", message="Nothing was received.")
        elif self.decoder.good == 0:
            s.update(status="no readings",
                     message=f"All {lines} lines were unreadable: check the baud rate and the cable.")
        return s

    def _seating(self, seating: Seating) -> None:
        self.seatings.append(seating)
        if not self.live:
            return
        self.result = analyse(self.seatings, self.profile, self.settings.analysis)
        self._publish()
        self.listener.seating(seating, self.result)

    def _publish(self) -> None:
        if self.writer is not None:
            self.writer.seatings(self.result.decisions)
            self.writer.summary(self.summary)
            self.writer.flush()

    def _notify_state(self) -> None:
        if self.detector.state != self._state:
            self._state = self.detector.state
            self.listener.state(self._state)

