"""A long reading trace as the few points that draw the same picture: per pixel column, its first, last, lowest and highest sample.

This is the M4 aggregation (Jugel, Jerzak, Hackenbroich and Markl, "M4: a
visualization-oriented time series data aggregation", VLDB 2014): a line
through those four samples of every pixel column, in time order, covers the
same pixels as a line through all of them, so a million samples become a
few thousand points and every spike stays.  The samples arrive in chunks
(logger.run.load.Run.trace_chunks) and are reduced as they come, so memory
does not grow with the run.
"""

from __future__ import annotations

import numpy as np


class TraceEnvelope:
    """Feed (t, y) chunks in time order with `add`; `points()` gives the kept samples, in order."""

    def __init__(self, t0: float, t1: float, columns: int):
        self.t0, self.columns = t0, max(int(columns), 1)
        self.scale = self.columns / (t1 - t0) if t1 > t0 else 0.0
        self.t = np.empty(0)
        self.y = np.empty(0)

    def add(self, t: np.ndarray, y: np.ndarray) -> None:
        ok = ~np.isnan(y)
        t = np.concatenate([self.t, np.asarray(t, float)[ok]])
        y = np.concatenate([self.y, np.asarray(y, float)[ok]])
        keep = _m4(np.clip(((t - self.t0) * self.scale).astype(np.int64), 0, self.columns - 1), y)
        self.t, self.y = t[keep], y[keep]

    def points(self) -> tuple[np.ndarray, np.ndarray]:
        return self.t, self.y


def _m4(column: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Positions (sorted) of each column's first, last, lowest and highest sample."""
    if not len(y):
        return np.empty(0, np.int64)
    by_column = np.argsort(column, kind="stable")  # within a column: in arrival order
    by_value = np.lexsort((y, column))  # within a column: lowest first
    c = column[by_column]
    starts = np.flatnonzero(np.concatenate(([True], c[1:] != c[:-1])))
    ends = np.concatenate((starts[1:], [len(c)])) - 1
    return np.unique(np.concatenate((by_column[starts], by_column[ends], by_value[starts], by_value[ends])))
