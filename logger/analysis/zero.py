"""The zero on the flat against time: a line when flats bracket the surface, else a constant."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats


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


CURVATURE_MIN_FLATS = 5  # a quadratic has three parameters: at least two degrees of freedom left


def curvature_p(times, values) -> float | None:
    """Two-sided p-value of the quadratic term of the zero against time (t test on its coefficient).

    Ordinary least squares on 1, t, t^2 with n - 3 degrees of freedom; under a truly linear drift
    with normal scatter p is uniform, so p < 0.05 raises a false alarm in 5 % of sessions (checked
    by simulation in tests/analysis/test_session.py).  None with fewer than CURVATURE_MIN_FLATS flats
    or no spread in time.
    """
    t = np.asarray(times, float)
    x = np.asarray(values, float)
    n = len(x)
    if n < CURVATURE_MIN_FLATS or np.ptp(t) <= 0:
        return None
    u = (t - t.mean()) / np.ptp(t)  # centred and scaled: a well-conditioned design
    X = np.column_stack([np.ones(n), u, u * u])
    beta, *_ = np.linalg.lstsq(X, x, rcond=None)
    resid = x - X @ beta
    dof = n - 3
    s2 = float(resid @ resid) / dof
    if s2 <= 0:
        return 0.0 if abs(beta[2]) > 0 else 1.0
    se = math.sqrt(s2 * float(np.linalg.inv(X.T @ X)[2, 2]))
    return float(2 * stats.t.sf(abs(beta[2]) / se, dof))
