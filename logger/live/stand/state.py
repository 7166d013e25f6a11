"""The object the stand page shows, and /state.json and /events serve.

Every key of summary.json, plus what the page needs live: `state`,
`reading_mm`, `last_seating` (the verdict of the newest seating), and
`surface_seatings` -- each accepted surface seating's own radius with the
running mean and a band of two standard errors of the mean, for the page's
small plot -- and `run_over` (the capture has ended: no more updates).
All in millimetres, as the files are; the page converts to the profile's
unit (`unit`).
"""

from __future__ import annotations

import math

from logger.analysis import geometry
from logger.analysis.phases import SURFACE
from logger.errors import UserError
from logger.live.status import verdict_text

BAND_SE = 2.0  # the plot's band: the running mean +- this many standard errors


def last_seating(decision) -> dict:
    """The newest seating's verdict, with the words every other screen shows for it."""
    return dict(index=decision.seating.index, phase=decision.phase, accepted=decision.accepted,
                reason=decision.reason, text=verdict_text(decision))


def surface_series(decisions, summary: dict) -> dict:
    """Accepted surface seatings in time order: their radius, and the running mean with its band (mm)."""
    out = dict(index=[], radius_mm=[], mean_mm=[], low_mm=[], high_mm=[])
    surface, r, rho = summary.get("surface"), summary.get("ring_radius_mm"), summary.get("foot_radius_mm")
    e = summary.get("probe_offset_mm") or 0.0  # known from the probe's distances to the balls, else 0
    if surface not in geometry.SURFACES or r is None or rho is None:
        return out
    sagittas = []

    def radius(s):
        try:
            return geometry.radius_from_sagitta_mm(s, r, rho, surface, e)
        except UserError:  # a sagitta no sphere on this ring gives: left out of the plot
            return None

    for d in decisions:
        if not (d.accepted and d.phase == SURFACE and d.sagitta_mm is not None):
            continue
        sagittas.append(d.sagitta_mm)
        n = len(sagittas)
        mean = sum(sagittas) / n
        se = math.sqrt(sum((s - mean) ** 2 for s in sagittas) / (n - 1) / n) if n >= 2 else None
        values = [radius(d.sagitta_mm), radius(mean)]
        # a deeper sagitta is a shorter radius: the band's ends swap through the geometry
        ends = [radius(mean + BAND_SE * se), radius(mean - BAND_SE * se)] if se else [None, None]
        if values[0] is None or values[1] is None:
            continue
        ends = sorted(ends) if None not in ends else [None, None]
        for key, value in zip(("index", "radius_mm", "mean_mm", "low_mm", "high_mm"),
                              (d.seating.index, *values, *ends)):
            out[key].append(value)
    return out


def page_state(summary: dict, state: str, reading_mm: float | None, last: dict | None, series: dict,
               run_over: bool = False) -> dict:
    """One state object: summary.json's keys first, then the live ones."""
    return {**summary, "state": state, "reading_mm": reading_mm, "last_seating": last, "surface_seatings": series,
            "run_over": run_over}
