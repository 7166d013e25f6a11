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
            _repeats(det, t_s, v_mm, i, j)
        elif det._resting and det._t:
            j = _resting(det, t_s, v_mm, i)
            states[i:j] = _CODE[det.state]
            _repeats(det, t_s, v_mm, i, j)
        elif det._t and det._ct:
            j = _holding(det, tl, vl, i, states)
            if j == i:
                j = _moving(det, tl, vl, i, states)
        else:
            j = i
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
    """Readings from i that stay within lift of the running centre: kept, the centre run on; returns where it ends.

    The centre is the detector's own recurrence, run in this tight loop over
    chunks of the block (a seating's length decides where it ends).
    """
    c, lift = det._centre, det._lift
    j = i
    step = 256
    while j < len(vl):
        chunk = vl[j:j + step]
        for x in chunk:
            d = x - c
            if d < -lift or d > lift:
                break
            c += d * 0.05
            j += 1
        else:
            step *= 4
            continue
        break
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


def _holding(det: SeatingDetector, tl: list, vl: list, i: int, states: np.ndarray) -> int:
    """Readings from i that hold within the band of the mean since the anchor, on a stream that repeats values.

    Taken here up to (not including) the first one that leaves the band,
    reaches the settle time, would reset or fire the rough-rest watch, or
    comes more than REPEAT_MEMORY_S after the last repeat: the detector
    decides those.  The same sums and comparisons as `SeatingDetector.feed`.
    """
    band = det._band
    d = vl[i] - det._sum / len(det._v)
    if d < -band or d > band:
        return i  # it moved
    half_lift, lift, sign, settle_s = det._lift / 2, det._lift, det.sign, det.s.settle_s
    total, count, n_coarse = det._sum, len(det._v), len(det._ct)
    t0, ct0, cv0 = det._t[0], det._ct[0], det._cv[0]
    most, last_v, last_rep = det._most_out, det._last_v, det._last_repeat_t
    settling, lifted = _CODE[State.SETTLING], _CODE[State.LIFTED]
    codes = []
    for t, x in zip(tl[i:i + 64], vl[i:i + 64]):  # a hold is tens of readings; a longer one comes back here
        rep = t if x == last_v else last_rep
        d = x - total / count
        if (d < -band or d > band or t - t0 >= settle_s or t - rep > REPEAT_MEMORY_S or abs(x - cv0) > half_lift
                or (t - ct0 >= 3 * settle_s and n_coarse + 1 >= 3)):
            break
        last_v, last_rep = x, rep
        oriented = sign * x
        if oriented < most:
            most = oriented
        total += x
        count += 1
        n_coarse += 1
        codes.append(settling if oriented - most >= lift else lifted)
    j = i + len(codes)
    if j > i:
        states[i:j] = codes
        ts, vs = tl[i:j], vl[i:j]
        _extend(det, ts, vs)
        det._ct.extend(ts)
        det._cv.extend(vs)
        det._sum, det._most_out, det.state = total, most, STATES[codes[-1]]
        det._last_v, det._last_repeat_t, det._last_t = last_v, last_rep, tl[j - 1]
    return j


def _moving(det: SeatingDetector, tl: list, vl: list, i: int, states: np.ndarray) -> int:
    """Readings from i that each leave the band of the one before (the spindle moving): each a new anchor.

    Up to (not including) one that holds, comes more than REPEAT_MEMORY_S
    after the last repeat, or fires the rough-rest watch; the same steps as
    `SeatingDetector.feed` and its `_restart` and `_coarse`.
    """
    band, half_lift, settle3_s, sign = det._band, det._lift / 2, 3 * det.s.settle_s, det.sign
    anchor = det._sum / len(det._v)
    ct, cv = det._ct, det._cv
    most, last_v, last_rep = det._most_out, det._last_v, det._last_repeat_t
    j = i
    for t, x in zip(tl[i:i + 64], vl[i:i + 64]):
        rep = t if x == last_v else last_rep
        d = x - anchor
        if -band <= d <= band or t - rep > REPEAT_MEMORY_S:
            break
        if ct and abs(x - cv[0]) <= half_lift:
            if t - ct[0] >= settle3_s and len(ct) + 1 >= 3:
                break
            ct.append(t)
            cv.append(x)
        else:
            ct, cv = [t], [x]
        oriented = sign * x
        if oriented < most:
            most = oriented
        last_v, last_rep, anchor = x, rep, x
        j += 1
    if j > i:
        states[i:j] = _CODE[State.LIFTED]
        det._t, det._v, det._sum = [tl[j - 1]], [vl[j - 1]], vl[j - 1]
        det._ct, det._cv = ct, cv
        det.state, det._resting, det.current_index = State.LIFTED, False, None
        det._most_out, det._last_v, det._last_repeat_t, det._last_t = most, last_v, last_rep, tl[j - 1]
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
    if j <= i:
        return
    prev = np.concatenate(([det._last_v], v_mm[i:j - 1]))
    rep = np.flatnonzero(v_mm[i:j] == prev)
    if len(rep):
        det._last_repeat_t = float(t_s[i + rep[-1]])
    det._last_t, det._last_v = float(t_s[j - 1]), float(v_mm[j - 1])
