"""Seating detection over a block of readings: array operations where nothing can happen, the detector where it decides.

The SeatingDetector (logger.analysis.seating) stays the one definition of a
seating.  Most readings change nothing in it: while seated, a reading that
stays within `lift_mm` of the running centre is only kept; while the spindle
rests at its stop, a reading within the band of it is only watched.  Those
stretches are found and taken in bulk here, changing the detector's state
exactly as reading them one by one would (the same float operations in the
same order, the same compaction points); every other reading, which may
start, end or move a seating, goes through `SeatingDetector.feed` itself.
"""

from __future__ import annotations

from itertools import islice

import numpy as np

from logger.analysis.seating import _COMPACT_AT, REPEAT_MEMORY_S, SEATED, Seating, SeatingDetector, State

STATES = (State.LIFTED, State.SETTLING, State.SEATED, State.BAD)  # samples' state codes, in this order
_CODE = {s: i for i, s in enumerate(STATES)}
BAD_CODE = _CODE[State.BAD]


def detect_block(det: SeatingDetector, t_s: np.ndarray, v_mm: np.ndarray,
                 finished: list[Seating]) -> tuple[np.ndarray, np.ndarray]:
    """Feed readings in order; finished seatings are appended; per reading its state code and seating (-1: none)."""
    n = len(t_s)
    states = np.empty(n, np.int8)
    seats = np.full(n, -1, np.int64)
    tl, vl = t_s.tolist(), v_mm.tolist()
    i = 0
    while i < n:
        if det.state == SEATED:
            j = _seated(det, tl, vl, i)
            states[i:j], seats[i:j] = _CODE[SEATED], det.current_index
        elif det._resting and det._t:
            j = _resting(det, t_s, v_mm, i)
            states[i:j] = _CODE[det.state]
        elif det._t and det._ct:
            j = _holding(det, t_s, v_mm, i, states)
        else:
            j = i
        if j > i:
            _repeats(det, t_s, v_mm, i, j)
        if j < n:  # a reading that may decide: the detector itself
            done = det.feed(tl[j], vl[j])
            if done is not None:
                finished.append(done)
            states[j] = _CODE[det.state]
            if det.current_index is not None:
                seats[j] = det.current_index
            j += 1
        i = j
    return states, seats


def _seated(det: SeatingDetector, tl: list, vl: list, i: int) -> int:
    """Readings from i that stay within lift of the running centre: kept, the centre run on; returns where it ends."""
    c, lift = det._centre, det._lift
    j = i
    for x in islice(vl, i, None):
        d = x - c
        if d < -lift or d > lift:
            break
        c += d * 0.05
        j += 1
    det._centre = c
    _extend(det, tl[i:j], vl[i:j])
    return j


def _extend(det: SeatingDetector, ts: list, vs: list) -> None:
    """Samples appended as one by one would be: compacted at the same lengths."""
    k = 0
    while k < len(ts):
        take = min(_COMPACT_AT + 1 - len(det._t), len(ts) - k)
        det._t.extend(ts[k:k + take])
        det._v.extend(vs[k:k + take])
        k += take
        if len(det._t) > _COMPACT_AT:
            det._compact()


def _holding(det: SeatingDetector, t_s: np.ndarray, v_mm: np.ndarray, i: int, states: np.ndarray) -> int:
    """Readings from i that hold within the band of the mean since the anchor, on a stream that repeats values.

    Taken in bulk up to (not including) the first one that leaves the band,
    reaches the settle time, would reset or fire the rough-rest watch, or
    comes after a second without repeats: the detector decides those.
    """
    s = det.s
    first = float(v_mm[i])
    if not (-det._band <= first - det._sum / len(det._v) <= det._band) or abs(first - det._cv[0]) > det._lift / 2:
        return i  # moving: a restart, the detector's own
    end = min(len(v_mm), i + 64)  # a hold lasts the settle time: tens of readings
    t, v = t_s[i:end], v_mm[i:end]
    rep = np.concatenate(([det._last_v], v[:-1])) == v
    at = np.maximum.accumulate(np.where(rep, np.arange(len(v)), -1))  # the latest repeat so far (times may go back)
    last_rep = np.where(at >= 0, t[at], det._last_repeat_t)
    sums = np.cumsum(np.concatenate(([det._sum], v)))
    mean = sums[:-1] / (len(det._v) + np.arange(len(v)))
    d = v - mean
    most_out = np.minimum.accumulate(np.minimum(det.sign * v, det._most_out))
    ok = ((d >= -det._band) & (d <= det._band) & (t - det._t[0] < s.settle_s) & (t - last_rep <= REPEAT_MEMORY_S)
          & (np.abs(v - det._cv[0]) <= det._lift / 2)
          & ~((t - det._ct[0] >= 3 * s.settle_s) & (len(det._ct) + np.arange(1, len(v) + 1) >= 3)))
    n = int(np.argmin(ok)) if not ok.all() else len(ok)
    if n == 0:
        return i
    oriented = det.sign * v[:n]
    code = np.where(oriented - most_out[:n] >= det._lift, _CODE[State.SETTLING], _CODE[State.LIFTED])
    states[i:i + n] = code
    ts, vs = t[:n].tolist(), v[:n].tolist()
    _extend(det, ts, vs)
    det._sum = float(sums[n])
    det._most_out = float(most_out[n - 1])
    det.state = STATES[int(code[-1])]
    det._ct.extend(ts)
    det._cv.extend(vs)
    return i + n


def _resting(det: SeatingDetector, t_s: np.ndarray, v_mm: np.ndarray, i: int) -> int:
    """Readings from i within the band of the level the spindle rests at: only the most-out reading moves."""
    mean, band = det._sum / len(det._v), det._band
    j, step = i, 64
    while j < len(v_mm):
        d = v_mm[j:j + step] - mean
        out = np.flatnonzero((d < -band) | (d > band))
        if len(out):
            j += int(out[0])
            break
        j += len(d)
        step *= 4
    if j > i:
        det._most_out = min(det._most_out, float((det.sign * v_mm[i:j]).min()))
        det._ct, det._cv = [], []
    return j


def _repeats(det: SeatingDetector, t_s: np.ndarray, v_mm: np.ndarray, i: int, j: int) -> None:
    """What every reading i..j-1 does to the detector's memory of repeats and of the last reading."""
    prev = np.concatenate(([det._last_v], v_mm[i:j - 1]))
    rep = np.flatnonzero(v_mm[i:j] == prev)
    if len(rep):
        det._last_repeat_t = float(t_s[i + rep[-1]])
    det._last_t, det._last_v = float(t_s[j - 1]), float(v_mm[j - 1])
