"""The zero on the flat against time: a line when flats bracket the surface, else a constant."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass
class Zero:
    model: str  # "linear" or "constant"
    t_ref_s: float
    value_mm: float
    slope_mm_per_s: float
    u_mm: float | None  # standard uncertainty of the zero at t_ref
    dof: float

    def at(self, t_s: float) -> float:
        return self.value_mm + self.slope_mm_per_s * (t_s - self.t_ref_s)


def fit_zero(times, values, bracketed: bool, fallback: tuple[float, float] | None) -> Zero:
    """Zero against time: a straight line when flats bracket the surface, else a constant.

    u is the standard error of the fitted zero at t_ref (the mean time of
    the flats for now; the caller moves t_ref to the surface seatings' mean).
    When the flats alone cannot estimate their scatter, `fallback` (the
    surface seatings' standard deviation and its degrees of freedom: the same
    instrument and hands) stands in.
    """
    t = np.asarray(times, float)
    x = np.asarray(values, float)
    n = len(x)
    if bracketed and n >= 2 and np.ptp(t) > 0:
        slope, intercept = np.polyfit(t, x, 1)
        t_ref = float(t.mean())
        value = float(intercept + slope * t_ref)
        if n >= 3:
            resid = x - (intercept + slope * t)
            sd, dof = float(math.sqrt(np.sum(resid**2) / (n - 2))), n - 2
        else:
            sd, dof = fallback if fallback else (None, math.inf)
        u = None if sd is None else sd / math.sqrt(n)  # at t_ref = mean time
        return Zero("linear", t_ref, value, float(slope), u, dof)
    t_ref = float(t.mean()) if n else 0.0
    value = float(x.mean())
    if n >= 2:
        sd, dof = float(x.std(ddof=1)), n - 1
    else:
        sd, dof = fallback if fallback else (None, math.inf)
    u = None if sd is None else sd / math.sqrt(n)
    return Zero("constant", t_ref, value, 0.0, u, dof)


def zero_u_at(z: Zero, times, t_s: float) -> float | None:
    """Standard error of a fitted line's value at t (textbook regression)."""
    if z.u_mm is None or z.model == "constant":
        return z.u_mm
    t = np.asarray(times, float)
    n = len(t)
    sxx = float(np.sum((t - t.mean()) ** 2))
    sd = z.u_mm * math.sqrt(n)
    return sd * math.sqrt(1.0 / n + (t_s - t.mean()) ** 2 / sxx)
