"""Seating detection over a block of readings: array operations where nothing can happen, the detector where it decides.

The SeatingDetector (logger.analysis.seating) stays the one definition of a
seating.  Most readings change nothing in it: while seated, a reading that
stays within `lift_mm` of the running centre is only kept; while the spindle
rests at its stop, a reading within the band of it is only watched; while
the instrument is neither, a reading only grows a hold or restarts it.
Those stretches are taken in bulk here (numpy for the rest, tight loops for
the recurrences), changing the detector's state exactly as reading them
one by one would (the same float operations in the same order, the same
compaction points); each reading that decides something (a hold complete,
a lift, the rough-rest watch firing, a stream gone quiet) goes through
`SeatingDetector.feed` itself.
"""

from __future__ import annotations

import numpy as np

from logger.analysis.seating import _COMPACT_AT, REPEAT_MEMORY_S, SEATED, Seating, SeatingDetector, State

STATES = (State.LIFTED, State.SETTLING, State.SEATED, State.BAD)  # samples' state codes, in this order
_CODE = {s: i for i, s in enumerate(STATES)}
BAD_CODE = _CODE[State.BAD]
_STRETCH = 256  # readings `_unsettled` takes at most in one call


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
            _repeats(det, tl, vl, i, j)
        elif det._resting and det._t:
            j = _resting(det, t_s, v_mm, i)
            states[i:j] = _CODE[det.state]
            _repeats(det, tl, vl, i, j)
        elif det._t:
            j = _unsettled(det, tl, vl, i, states)
            if j > i and (j == n or j - i == _STRETCH):  # it stopped at the end of a stretch: nothing to decide
                i = j
                continue
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


def _unsettled(det: SeatingDetector, tl: list, vl: list, i: int, states: np.ndarray) -> int:
    """Readings from i while the instrument is neither seated nor resting: holds that grow, moves that restart them.

    Taken here up to (not including) the first reading that decides
    something: one that would complete a hold (the settle time reached, or
    the hold about to be compacted), fire the rough-rest watch, or come more
    than REPEAT_MEMORY_S after the last repeat (where `advance` acts); the
    detector decides those.  The same sums, comparisons and lists as
    `SeatingDetector.feed` with its `_restart` and `_coarse`.
    """
    band, half_lift, lift, sign = det._band, det._lift / 2, det._lift, det.sign
    settle_s, settle3_s = det.s.settle_s, 3 * det.s.settle_s
    total, count, t0 = det._sum, len(det._v), det._t[0]
    n_rough = len(det._ct)
    ct0, cv0 = (det._ct[0], det._cv[0]) if n_rough else (0.0, 0.0)
    most, last_v, last_rep = det._most_out, det._last_v, det._last_repeat_t
    settling, lifted = _CODE[State.SETTLING], _CODE[State.LIFTED]
    anchor = rough_from = -1  # where the hold and the rough rest last started afresh (-1: before i)
    codes = []
    k = i
    for t, x in zip(tl[i:i + _STRETCH], vl[i:i + _STRETCH]):  # a longer stretch comes back here
        rep = t if x == last_v else last_rep
        if t - rep > REPEAT_MEMORY_S:
            break
        d = x - total / count
        held = -band <= d <= band
        if held and (t - t0 >= settle_s or count >= _COMPACT_AT):
            break
        rough = n_rough and -half_lift <= x - cv0 <= half_lift
        if rough and t - ct0 >= settle3_s and n_rough + 1 >= 3:
            break
        last_v, last_rep = x, rep
        oriented = sign * x
        if oriented < most:
            most = oriented
        if held:  # the hold grows
            total += x
            count += 1
            codes.append(settling if oriented - most >= lift else lifted)
        else:  # it moved: a new anchor
            anchor, total, count, t0 = k, x, 1, t
            codes.append(lifted)
        if rough:
            n_rough += 1
        else:
            rough_from, n_rough, ct0, cv0 = k, 1, t, x
        k += 1
    if k > i:
        states[i:k] = codes
        if anchor < 0:
            det._t.extend(tl[i:k])
            det._v.extend(vl[i:k])
        else:
            det._t, det._v = tl[anchor:k], vl[anchor:k]
        if rough_from < 0:
            det._ct.extend(tl[i:k])
            det._cv.extend(vl[i:k])
        else:
            det._ct, det._cv = tl[rough_from:k], vl[rough_from:k]
        det._sum, det.state = total, STATES[codes[-1]]
        det._most_out, det._last_v, det._last_repeat_t, det._last_t = most, last_v, last_rep, tl[k - 1]
    return k


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


def _repeats(det: SeatingDetector, tl: list, vl: list, i: int, j: int) -> None:
    """What every reading i..j-1 does to the detector's memory of repeats and of the last reading."""
    if j <= i:
        return
    for k in range(j - 1, i - 1, -1):  # the last repeat: a held or resting reading repeats often
        if vl[k] == (vl[k - 1] if k > i else det._last_v):
            det._last_repeat_t = tl[k]
            break
    det._last_t, det._last_v = tl[j - 1], vl[j - 1]
