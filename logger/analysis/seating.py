"""Readings -> seatings: notice each placement of the spherometer, hands-free.

A small state machine driven only by the readings' own timestamps, so that it
works the same live and in replay, on streams that send continuously and on
streams that send only when the value changes (there, silence means the
value holds; `advance(t)` tells the detector that time has passed).

* settling: the reading has stayed within `band_mm` of an anchor, but not
  yet for `settle_s`;
* seated: it has held for `settle_s`; the seating goes on while the reading
  stays within `lift_mm` of its running centre.  Noise, vibration and slow
  creep are smaller than that and do not split a seating; a rocking
  instrument stays one seating with a large spread (the session rejects it);
* lifted: the reading jumped by more than `lift_mm` (the spindle running out
  towards its stop), or it is moving and has not held yet.

A rocking instrument never holds within `band_mm`; when it stays within half
of `lift_mm` for three settle times it counts as a seating all the same (and
its spread gets it rejected as unsteady), so no placement goes unreported.

The seating's value is a robust, time-weighted centre of its settled samples:
the first `trim_fraction` of the window (the tail of the settling transient)
is left out, then samples further than four robust deviations from the
median.  Time weights make an on-change stream's long-held value count for
its whole duration.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from enum import StrEnum

import numpy as np



class State(StrEnum):
    """The instrument's state, as every view and samples.csv name it."""

    LIFTED = "lifted"
    SETTLING = "settling"
    SEATED = "seated"
    BAD = "bad"  # a sample's state when its line was unreadable (never the detector's)
    WAITING = "waiting for device"  # the capture's, while the port is gone


LIFTED, SETTLING, SEATED = State.LIFTED, State.SETTLING, State.SEATED  # the detector's three, bound for its hot path
REPEAT_MEMORY_S = 1.0  # a stream that repeated a value this recently is sending continuously

_COMPACT_AT = 20000  # samples kept per seating before pairs are merged (bounded memory)


@dataclass(frozen=True)
class DetectorSettings:
    settle_s: float = 0.4
    band_mm: float = 0.004
    lift_mm: float = 0.05
    trim_fraction: float = 0.2

    @classmethod
    def for_step(cls, step_mm: float, **overrides) -> "DetectorSettings":
        """Defaults scaled to the indicator: band 4 counts (at least 3 um), lift 20 counts (at least 50 um)."""
        base = dict(band_mm=max(4 * step_mm, 0.003), lift_mm=max(20 * step_mm, 0.05))
        base.update({k: v for k, v in overrides.items() if v is not None})
        return cls(**base)


@dataclass(frozen=True)
class Seating:
    index: int  # the seating's number, from 1 in the order seatings end (contract: "Seating numbers")
    t_start_s: float  # when the reading first held (the instrument came to rest)
    t_end_s: float  # when it stopped holding: the first reading that left it (or the end of the stream)
    value_mm: float  # robust time-weighted centre of the settled samples
    spread_mm: float  # time-weighted standard deviation of the settled samples
    n: int  # samples used

    @property
    def t_mid_s(self) -> float:
        return 0.5 * (self.t_start_s + self.t_end_s)


class SeatingDetector:
    """Feed readings (t_s, value_mm) in time order; collect finished Seatings.

    `sign` is +1 when the reading grows as the spindle is pushed in.  A held
    level counts as a seating only when the spindle came to it from further
    out by at least `lift_mm` (it was pushed in by placing the instrument);
    the spindle resting at its stop while the instrument is lifted is held
    too, but was reached by running out, so it is not a seating.  For the
    same reason a stream that starts with the instrument already seated does
    not count that first placement.
    """

    def __init__(self, settings: DetectorSettings, sign: int = 1):
        self.s = settings
        self._band, self._lift = settings.band_mm, settings.lift_mm
        self.sign = 1 if sign >= 0 else -1
        self.state = LIFTED
        self.count = 0
        self._t: list[float] = []  # samples since the anchor
        self._v: list[float] = []
        self._sum = 0.0  # of self._v while settling
        self._centre = math.nan
        self._last_t = -math.inf
        self._last_v = math.nan
        # when a reading last repeated the one before: a continuous stream repeats values, an
        # on-change one never does; a few repeats (a keep-alive, a value re-sent after a replug) are
        # forgotten after REPEAT_MEMORY_S
        self._last_repeat_t = -math.inf
        self._resting = False  # holding still at the spindle's stop
        self._ct: list[float] = []  # samples since the reading came roughly to rest (see _coarse)
        self._cv: list[float] = []
        self._most_out = math.inf  # most-out oriented reading since the last seating ended
        self.current_index: int | None = None  # number of the seating in progress, once seated

    # -- feeding --------------------------------------------------------
    def advance(self, t_s: float) -> None:
        """Time has passed with no new reading: a held value may now count as seated.

        Only for streams that send on change.  A stream that repeats values
        (it sends continuously) holds only by its samples: there, silence is
        a delay in delivery (a busy computer, a slow link), not a held value.
        """
        if self.state == SEATED or self._resting or not self._t or t_s - self._last_repeat_t <= REPEAT_MEMORY_S:
            return
        held_s = t_s - self._t[0]
        if held_s >= self.s.settle_s:
            self._hold_reached()
        elif held_s >= 0.25 * self.s.settle_s and t_s - self._t[-1] >= 0.25 * self.s.settle_s:
            # an on-change stream gone quiet: the value is holding (at the stop: still lifted)
            self.state = SETTLING if self.sign * self._v[0] - self._most_out >= self._lift else LIFTED

    def next_change_s(self, t_s: float) -> float | None:
        """Seconds from t_s until `advance` could next change something with no new reading; None: never.

        For an on-change stream holding a value: when the hold becomes a
        seating by time, or the stream counts as gone quiet.  A capture that
        nothing reaches sleeps this long, not a fixed short time.
        """
        if self.state == SEATED or self._resting or not self._t:
            return None
        due = self._t[0] + self.s.settle_s
        quiet = self._t[-1] + 0.25 * self.s.settle_s
        if quiet > t_s:  # still ahead (once passed, it has been applied)
            due = min(due, quiet)
        return max(due, self._last_repeat_t + REPEAT_MEMORY_S) - t_s

    def feed(self, t_s: float, value_mm: float) -> Seating | None:
        """One reading; returns a Seating when this reading ended one.  (The hot path: kept lean.)"""
        self._last_t = t_s
        if value_mm == self._last_v:
            self._last_repeat_t = t_s
        self._last_v = value_mm
        if self.state != SEATED:
            self.advance(t_s)
        if self.state == SEATED:
            if -self._lift <= value_mm - self._centre <= self._lift:
                self._t.append(t_s)
                self._v.append(value_mm)
                if len(self._t) > _COMPACT_AT:
                    self._compact()
                # running centre: slow enough to ignore noise, quick enough for creep
                self._centre += (value_mm - self._centre) * 0.05
                return None
            finished = self._finish(t_s)  # the held value lasted until this reading
            self._most_out = self.sign * value_mm
            self._restart(t_s, value_mm)
            return finished
        oriented = self.sign * value_mm
        if oriented < self._most_out:
            self._most_out = oriented
        # "holding" is judged against the mean since the anchor, so noise of a count or two either
        # side of the level does not restart it; a settling transient drifts out of the band
        if self._t and -self._band <= value_mm - self._sum / len(self._v) <= self._band:
            if not self._resting:
                self._append(t_s, value_mm)
                self._sum += value_mm
                # near the stop it is the spindle running out, not a placement settling
                self.state = SETTLING if oriented - self._most_out >= self._lift else LIFTED
                if t_s - self._t[0] >= self.s.settle_s:
                    self._hold_reached()
        else:
            self._restart(t_s, value_mm)
        self._coarse(t_s, value_mm)
        return None

    def _coarse(self, t_s: float, value_mm: float) -> None:
        """A rocking instrument never holds within the band, yet it is a placement.

        When the reading stays within half the lift threshold of where it
        came to rest for three settle times, it counts as seated with every
        sample since then; its large spread then gets it rejected as unsteady.
        """
        if self.state == SEATED or self._resting:
            self._ct, self._cv = [], []
            return
        if self._ct and abs(value_mm - self._cv[0]) <= self._lift / 2:
            self._ct.append(t_s)
            self._cv.append(value_mm)
            if t_s - self._ct[0] >= 3 * self.s.settle_s and len(self._ct) >= 3:
                self._t, self._v = self._ct, self._cv
                self._ct, self._cv = [], []
                self._hold_reached()
        else:
            self._ct, self._cv = [t_s], [value_mm]

    def end(self, t_s: float | None = None) -> Seating | None:
        """End of stream or a gap in it: close a seating in progress."""
        if t_s is not None:
            self.advance(t_s)
        done = self._finish(t_s if t_s is not None else self._last_t) if self.state == SEATED else None
        self.state = LIFTED
        self._t, self._v = [], []
        self._ct, self._cv = [], []
        self._resting = False
        self._most_out = math.inf
        self._last_repeat_t, self._last_v = -math.inf, math.nan
        self.current_index = None
        return done

    # -- internals ------------------------------------------------------
    def _restart(self, t_s: float, value_mm: float) -> None:
        """A reading that moved: it becomes the anchor a new seating may grow from."""
        self._t, self._v = [t_s], [value_mm]
        self._sum = value_mm
        self.state = LIFTED
        self._resting = False
        self.current_index = None

    def _append(self, t_s: float, value_mm: float) -> None:
        self._t.append(t_s)
        self._v.append(value_mm)
        if len(self._t) > _COMPACT_AT:
            self._compact()

    def _compact(self) -> None:
        """Merge neighbouring samples pairwise (mean of pairs): memory stays bounded for very long holds."""
        t, v = self._t, self._v
        rest_t, rest_v = np.asarray(t[1:]), np.asarray(v[1:])
        m = len(rest_t) // 2 * 2
        self._t = t[:1] + rest_t[:m:2].tolist() + rest_t[m:].tolist()
        self._v = v[:1] + ((rest_v[:m:2] + rest_v[1:m:2]) / 2).tolist() + rest_v[m:].tolist()

    def _hold_reached(self) -> None:
        self._ct, self._cv = [], []  # a hold, either way: the rough-rest watch starts afresh after it
        self._sum = sum(self._v)
        held = self._sum / len(self._v)  # the hold's mean (numpy's would cost more than the rest of the seating's start)
        if self.sign * held - self._most_out < self.s.lift_mm:
            # reached by running out (or nothing seen before it): the spindle at its stop
            self._resting = True
            self.state = LIFTED
            self._t, self._v = self._t[:1], self._v[:1]
            self._sum = self._v[0]
            return
        self.state = SEATED
        self.current_index = self.count + 1
        self._centre = held

    def _finish(self, t_end_s: float) -> Seating:
        t = np.asarray(self._t)
        v = np.asarray(self._v)
        t_end = max(t_end_s, t[-1]) if math.isfinite(t_end_s) else t[-1]
        # time weights: each value holds until the next one (the last until the end)
        w = np.empty_like(t)
        np.subtract(t[1:], t[:-1], out=w[:-1])
        w[-1] = t_end - t[-1]
        if not (w > 0).any():
            w = np.ones_like(v)
        keep = t >= t[0] + self.s.trim_fraction * (t_end - t[0])
        keep[-1] = True
        value, spread, n = robust_centre(v[keep], w[keep])
        seating = Seating(self.count + 1, float(t[0]), float(t_end), value, spread, n)
        self.count += 1
        self.current_index = None
        return seating


def _median(sorted_v: np.ndarray) -> float:
    """The median of sorted values, as numpy.median computes it (the middle one, or the mean of the middle two)."""
    n = len(sorted_v)
    return float(sorted_v[n // 2]) if n % 2 else float((sorted_v[n // 2 - 1] + sorted_v[n // 2]) / 2)


def _average(v: np.ndarray, w: np.ndarray) -> float:
    """numpy.average(v, weights=w), in its own operations (it is called once or twice per seating)."""
    return float((v * w).sum() / w.sum())


def robust_centre(values, weights) -> tuple[float, float, int]:
    """Time-weighted mean and standard deviation after dropping far samples.

    Far = more than 4 scaled MADs (1.4826 MAD estimates sigma for normal data)
    from the median; with quantised, identical samples the MAD is zero and
    only samples that differ from the median at all are dropped, so the floor
    of one tiny epsilon keeps the centre well defined.  (Computed with a sort
    rather than numpy.median and numpy.average, which cost more than the
    arithmetic at a seating's few hundred samples; the same numbers.)
    """
    v = np.asarray(values, float)
    w = np.asarray(weights, float)
    if w.sum() <= 0:
        w = np.ones_like(v)
    med = _median(np.sort(v))
    dev = np.abs(v - med)
    mad = _median(np.sort(dev)) * 1.4826
    if mad > 0:
        sel = dev <= 4 * mad
        if sel.sum() >= max(1, len(v) // 2):
            v, w = v[sel], w[sel]
    if w.sum() <= 0:
        w = np.ones_like(v)
    mean = _average(v, w)
    spread = float(math.sqrt(max(_average((v - mean) ** 2, w), 0.0)))
    return mean, spread, int(len(v))
