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

import numpy as np

from logger.analysis.seating import _COMPACT_AT, SEATED, Seating, SeatingDetector, State

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
    for x in vl[i:]:
        d = x - c
        if d < -lift or d > lift:
            break
        c += d * 0.05
        j += 1
    det._centre = c
    k = i
    while k < j:  # appended as one by one: compacted at the same lengths
        take = min(_COMPACT_AT + 1 - len(det._t), j - k)
        det._t.extend(tl[k:k + take])
        det._v.extend(vl[k:k + take])
        k += take
        if len(det._t) > _COMPACT_AT:
            det._compact()
    return j


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
