"""Which seatings are on the flat and which on the surface.

The zero is the level of the opening seatings; seatings far enough from it,
on the side most of them lie, are the surface.  A lone far seating that is
not the newest is grit on the flat, not a surface phase.

A mirror seated against its tool shows other levels (`pair_phases`): the
flat in the middle, the concave piece on one side and the convex piece on
the other, about as far away; or, with no flat, just the two pieces.
"""

from __future__ import annotations

import numpy as np

from logger.analysis.seating import Seating

FLAT, SURFACE = "flat", "surface"
CONCAVE, CONVEX = "concave", "convex"  # the two pieces of a mirror-and-tool run


def default_gap_mm(step_mm: float) -> float:
    return max(10 * step_mm, 0.01)


OPENING = 5  # the zero is sought among this many first steady seatings


def _zero_level(v: np.ndarray, gap_mm: float) -> float:
    """The flat's level: the median of the first seating's group among the opening ones.

    When the first seating stands alone and the next ones agree among
    themselves, it is either a single flat followed by the surface or grit
    on the first flat.  The rest of the run decides: if later seatings come
    back to the second group's level and never to the first's, the first was
    grit and the second group is the flat.
    """
    first = v[:OPENING]
    group0 = first[np.abs(first - v[0]) <= gap_mm]
    if len(group0) >= 2 or len(v) < 3:
        return float(np.median(group0))
    y = v[1]
    group1 = first[np.abs(first - y) <= gap_mm]
    left = np.nonzero(np.abs(v[1:] - y) > gap_mm)[0]  # where the run leaves the second group's level
    later = v[1 + left[0]:] if len(left) else v[:0]
    back_to_y = np.any(np.abs(later - y) <= gap_mm)
    back_to_first = np.any(np.abs(later - v[0]) <= gap_mm)
    if len(group1) >= 2 and back_to_y and not back_to_first:
        return float(np.median(group1))
    return float(v[0])


def classify(seatings: list[Seating], gap_mm: float | None, flat_first: int | None, step_mm: float,
             steady: list[bool] | None = None) -> list[str]:
    """Phase of each seating: the flat (zero and zero checks) or the surface.

    The zero comes from the opening seatings (`_zero_level`; with
    `flat_first`, the median of the first N).  Seatings further than `gap_mm` from the
    zero are surface candidates; the surface level is the median of those on
    the side most of them lie, and a candidate is surface when it is nearer
    to that level than to the zero.  A single far seating that is not the
    newest is grit on the flat, not a surface phase.  With `flat_first` and
    no explicit gap, the gap shrinks to what the opening flats' scatter
    allows (very shallow curves).  Unsteady seatings (`steady` False) take
    no part in finding the levels; they are placed by the same rule.
    """
    v = np.array([s.value_mm for s in seatings])
    if len(v) == 0:
        return []
    ok = np.ones(len(v), bool) if steady is None else np.asarray(steady, bool)
    if not ok.any():
        ok = np.ones(len(v), bool)
    n_first = min(flat_first, len(v)) if flat_first else 0
    if flat_first:
        opening = v[:n_first]
        zero = float(np.median(opening))
        if gap_mm is None:
            # told where the flat ends: the surface need only stand clear of the flat's own scatter
            gap_mm = (max(3 * step_mm, 5 * 1.4826 * float(np.median(np.abs(opening - zero))))
                      if len(opening) >= 2 else default_gap_mm(step_mm))
    else:
        gap_mm = default_gap_mm(step_mm) if gap_mm is None else gap_mm
        zero = _zero_level(v[ok], gap_mm)
    idx = np.arange(len(v))
    far = idx[ok & (idx >= n_first) & (np.abs(v - zero) > gap_mm)]
    if len(far):
        above = far[v[far] > zero]
        far = above if 2 * len(above) >= len(far) else far[v[far] < zero]
    if len(far) == 0 or (len(far) == 1 and far[0] != len(v) - 1):
        return [FLAT] * len(v)
    level = float(np.median(v[far]))
    return [SURFACE if i >= n_first and abs(x - zero) > gap_mm and abs(x - level) < abs(x - zero) else FLAT
            for i, x in enumerate(v)]


def _levels(v: np.ndarray, gap_mm: float) -> list[np.ndarray]:
    """Groups of at least two values, split where sorted neighbours are more than `gap_mm` apart."""
    order = np.argsort(v, kind="stable")
    cuts = np.nonzero(np.diff(v[order]) > gap_mm)[0] + 1
    return [g for g in np.split(order, cuts) if len(g) >= 2]


def pair_phases(seatings: list[Seating], gap_mm: float | None, step_mm: float, sign: int, told: bool,
                steady: list[bool] | None = None) -> list[str] | None:
    """Flat, concave and convex seatings of a mirror-and-tool run; None when the run is not one.

    Three levels whose middle one holds the first steady seating are the
    flat with the pieces on both sides; it is a pair only when both sides
    hold at least two seatings, neither fewer than a third of the other's,
    and lie about equally far from the flat (within a factor 2: one radius,
    a flat not quite flat), so grit on the flat is never taken for a piece.
    Told that the run is a pair (`told`), two levels are the two pieces
    with no flat.  For an in-positive indicator (sign +1) the concave piece
    reads lower.  Every seating takes the phase of the nearest level.
    """
    v = np.array([s.value_mm for s in seatings])
    ok = np.ones(len(v), bool) if steady is None else np.asarray(steady, bool)
    idx = np.nonzero(ok)[0]
    groups = [idx[g] for g in _levels(v[idx], default_gap_mm(step_mm) if gap_mm is None else gap_mm)]
    if len(groups) == 3 and idx.size and idx[0] in groups[1]:
        low, flat, high = (float(np.median(v[g])) for g in groups)
        n_low, n_high = len(groups[0]), len(groups[2])
        depth = sorted((flat - low, high - flat))
        if min(n_low, n_high) * 3 < max(n_low, n_high) or depth[1] > 2 * depth[0]:
            return None
        names = (CONCAVE, FLAT, CONVEX) if sign > 0 else (CONVEX, FLAT, CONCAVE)
        centres = (low, flat, high)
    elif len(groups) == 2 and told:
        names = (CONCAVE, CONVEX) if sign > 0 else (CONVEX, CONCAVE)
        centres = tuple(float(np.median(v[g])) for g in groups)
    else:
        return None
    return [names[int(np.argmin([abs(x - c) for c in centres]))] for x in v]
