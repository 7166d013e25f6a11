"""Outlier tests for the seatings of one phase.

Every test returns, for each value, (rejected, score, reason) and never
deletes anything: the session keeps rejected seatings in its files.

* modified z-score (Iglewicz & Hoaglin 1993): M = 0.6745 (x - median) / MAD,
  rejected when |M| > the z cut (3.5, their recommendation).
* Grubbs' test, two-sided, repeated one value at a time (NIST/SEMATECH
  e-Handbook of Statistical Methods, section 1.3.5.17), at a significance
  level alpha (0.05 by default).
* Chauvenet's criterion: reject when n * P(|Z| >= z) < 1/2.  It takes no
  parameter: the 1/2 is the criterion itself (tuning it makes another test).
With quantised readings many seatings show the same count and the spread
becomes zero, so every honest seating one count off would look like an
outlier: `judge` floors the MAD, and the SD of the last two, at a scale the
seatings can honestly have (`scale_floor`): one count when nothing dithers
the step, less when the noise within each seating does.  `detectable_shift`
states the smallest shift each test can tell from the scatter under that
floor, so the summary can say so.

`REJECTIONS` maps each method's name to its test and the one parameter that
tunes it; `METHODS` (the --rejection choices) are its keys, so a new method is
one function and one entry there.  A parameter given to a method it does not
tune is an error (`limits`), never silently ignored.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import stats

from logger.analysis.uncertainty import dither_sd_mm, quantisation_bias_rms_mm
from logger.errors import UserError

MAD_TO_Z = 0.6745  # Iglewicz & Hoaglin's constant: the upper quartile of the standard normal
FLOOR_LEAST_COUNTS = 0.8  # the floor never goes below this many counts (see scale_floor)
FLOOR_POOLED_MADS = 1.5  # and never below this many MADs of the session's seatings pooled (see scale_floor)


def scale_floor(step_mm: float, within_sd_mm: float, residuals_mm=()) -> float:
    """The least scale (mm) the seatings of one session can honestly show: the MAD's floor.

    A seating is a mean of quantised samples.  With no noise within it, it
    sits on a whole count and two seatings differ by whole counts, so the floor
    is one count.  Noise within a seating dithers the step, and the mean's
    error is then its quantisation bias, whose RMS over the unknown offset is
    `quantisation_bias_rms_mm` (Widrow and Kollar), q / sqrt(12) undithered:
    the seatings behave as if read with an effective step of sqrt(12) times it,
    which falls smoothly from one count as the noise grows.  The noise is the
    measured within-seating SD less Sheppard's q^2 / 12 (`dither_sd_mm`), which
    errs towards less dither, a larger floor.

    Below a count the floor must still stand above the MAD's own chance lows:
    with no floor, |M| > 3.5 throws out an honest seating from about one group
    of ten normal values in eight.  The flats and the surface are seated by the
    same hands on the same instrument, so `residuals_mm` (each phase's steady
    seatings about the flats' trend, a sequence of arrays, each centred on its
    own median) pooled give a steadier scale: the floor is at least
    FLOOR_POOLED_MADS of their MAD, and never below FLOOR_LEAST_COUNTS counts.
    Both were set by simulation so that honest sessions lose a seating no more
    often than under the one-count floor while smaller grains are caught
    (benchmarks/grit_study.py, docs/measurement.md).
    """
    effective_step = math.sqrt(12.0) * quantisation_bias_rms_mm(step_mm, dither_sd_mm(step_mm, None, within_sd_mm))
    groups = [np.asarray(r, float) for r in residuals_mm if len(r)]
    pooled = float(np.median(np.abs(np.concatenate([g - np.median(g) for g in groups])))) if groups else 0.0
    return max(effective_step, FLOOR_POOLED_MADS * pooled, FLOOR_LEAST_COUNTS * step_mm)


def _places_apart(larger: float, smaller: float, places: int) -> int:
    """The fewest decimal places, from `places` up, at which |larger| still reads larger than |smaller|.

    A reason shows a score beside its cut; rounded to fixed places, a score
    just past the cut would read as the cut itself ("modified z = -3.5
    beyond 3.5"), and a reason must show why at a glance.
    """
    while places < 12 and not abs(round(larger, places)) > abs(round(smaller, places)):
        places += 1
    return places


def modified_z(values, floor: float, cut: float = 3.5):
    x = np.asarray(values, float)
    med = float(np.median(x))
    mad = max(float(np.median(np.abs(x - med))), floor)
    scores = MAD_TO_Z * (x - med) / mad
    return [(bool(abs(m) > cut), float(m), _z_reason(float(m), cut) if abs(m) > cut else "") for m in scores]


def _z_reason(m: float, cut: float) -> str:
    return f"outlier: modified z = {m:+.{_places_apart(m, cut, 1)}f} beyond {cut:g}"


def _grubbs_critical(n: int, alpha: float) -> float:
    t = stats.t.ppf(1 - alpha / (2 * n), n - 2)
    return (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))


def grubbs(values, floor: float, alpha: float = 0.05):
    x = np.asarray(values, float)
    out = [(False, 0.0, "")] * len(x)
    live = list(range(len(x)))
    while len(live) >= 3:
        sub = x[live]
        mean, sd = float(sub.mean()), max(float(sub.std(ddof=1)), floor)
        dev = np.abs(sub - mean) / sd
        j = int(np.argmax(dev))
        g, crit = float(dev[j]), _grubbs_critical(len(live), alpha)
        if g <= crit:
            for i, d in zip(live, dev):
                out[i] = (False, float(d), "")
            break
        p = _places_apart(g, crit, 2)
        out[live[j]] = (True, g, f"outlier: Grubbs G = {g:.{p}f} beyond {crit:.{p}f}")
        live.pop(j)
    return out


def chauvenet(values, floor: float):
    x = np.asarray(values, float)
    if len(x) < 3:
        return keep_all(x)
    mean, sd = float(x.mean()), max(float(x.std(ddof=1)), floor)
    z = np.abs(x - mean) / sd
    expected = len(x) * 2 * stats.norm.sf(z)
    return [
        (bool(e < 0.5), float(zi),
         f"outlier: Chauvenet, {e:.{_places_apart(0.5, e, 2)}f} such seatings expected" if e < 0.5 else "")
        for zi, e in zip(z, expected)
    ]


def keep_all(values):
    """No test: every value stays."""
    return [(False, 0.0, "")] * len(values)


@dataclass(frozen=True)
class Method:
    """A rejection test and the one setting that tunes it (`parameter` None: it takes none)."""

    test: Callable  # test(values, floor, limit) -> [(rejected, score, reason)]
    parameter: str | None = None  # the AnalysisSettings field, e.g. "z_cut"; the option is --z-cut
    default: float | None = None


# name -> Method; the order is the order of the --rejection choices.
REJECTIONS = {
    "modified-z": Method(modified_z, "z_cut", 3.5),
    "grubbs": Method(grubbs, "alpha", 0.05),
    "chauvenet": Method(lambda values, floor, limit: chauvenet(values, floor)),
    "none": Method(lambda values, floor, limit: keep_all(values)),
}
METHODS = tuple(REJECTIONS)
PARAMETERS = tuple(m.parameter for m in REJECTIONS.values() if m.parameter)


def _method(name: str) -> Method:
    found = REJECTIONS.get(name)
    if found is None:
        raise UserError(f"rejection method {name!r} is not known (known: {', '.join(METHODS)})")
    return found


def limits(method: str, given: dict) -> dict:
    """The parameter `method` takes ({} for none), its default filled in; `given` maps parameter names to
    values or None.  One given for another method is a UserError naming the method it belongs to."""
    m = _method(method)
    for name, value in given.items():
        if value is not None and name != m.parameter:
            owner = next(k for k, v in REJECTIONS.items() if v.parameter == name)
            raise UserError(f"--{name.replace('_', '-')} is for --rejection {owner}, not {method}"
                            + (f" (its parameter is --{m.parameter.replace('_', '-')})" if m.parameter else
                               " (it takes no parameter)"))
    if m.parameter is None:
        return {}
    value = given.get(m.parameter)
    return {m.parameter: m.default if value is None else value}


def judge(values, method: str, floor: float, limit: float | None = None):
    """Apply the named method (`limit`: its parameter, None for its default); fewer than three values are
    never judged, an unknown name is a UserError."""
    m = _method(method)
    if len(values) < 3:
        return keep_all(values)
    return m.test(values, floor, m.default if limit is None else limit)


def detectable_shift(values, method: str, step: float, limit: float | None = None) -> float | None:
    """The smallest shift of one seating from the others that the named test rejects (same units).

    `values` are the seatings kept; the shifted one is one more; `step` is the floor `judge` was
    given (the session's `scale_floor`); `limit` is the method's parameter (None: its default).
    Modified z: cut x max(MAD, step) / 0.6745.
    Grubbs and Chauvenet judge the shifted seating against a mean and SD that include it: m values with
    sum of squares S and one more D from their mean score D a / sqrt((S + D^2 a) / m), a = m / (m + 1),
    which reaches the critical z (Grubbs' G at n = m + 1; Chauvenet's z with n P(|Z| >= z) = 1/2) at
    D = z sqrt(S / (m a^2 - z^2 a)).  None when nothing is judged (no test, fewer than three seatings)
    or when no shift is ever rejected.
    """
    limit = _method(method).default if limit is None else limit
    x = np.asarray(values, float)
    m = len(x)
    if method == "none" or m < 3:
        return None
    if method == "modified-z":
        return limit * max(float(np.median(np.abs(x - np.median(x)))), step) / MAD_TO_Z
    n, a = m + 1, m / (m + 1)
    S = max(float(np.sum((x - x.mean()) ** 2)), (m - 1) * step * step)  # the SD floored as judge floors it
    z = _grubbs_critical(n, limit) if method == "grubbs" else float(stats.norm.isf(0.25 / n))
    room = m * a * a - z * z * a
    return z * math.sqrt(S / room) if room > 0 else None
