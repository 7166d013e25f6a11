"""Seatings -> session: phases, zero, drift, rejection, and the result.

The whole analysis is recomputed from the list of seatings each time a new
one arrives.  Sessions hold tens or hundreds of seatings, so this costs
nothing, and it means a later seating may revise an earlier decision (a
lone far seating becomes the start of the surface phase once a second one
agrees with it; the drift fit changes as zero checks arrive).  Live capture
and replay therefore give identical results for the same stream.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from logger.analysis import geometry, outliers
from logger.errors import UserError
from logger.config.profile import Profile
from logger.analysis.seating import Seating
from logger.analysis.uncertainty import Budget, Component, radius_budget, reading_components

FLAT, SURFACE = "flat", "surface"


@dataclass(frozen=True)
class AnalysisSettings:
    rejection: str = "modified-z"  # one of outliers.METHODS
    z_cut: float = 3.5
    flat_first: int | None = None  # force the first N seatings to be the flat
    phase_gap_mm: float | None = None  # separation of surface from flat; default from the step
    max_spread_mm: float | None = None  # seatings wandering more than this are unsteady
    target_radius_mm: float | None = None
    diameter_mm: float | None = None
    label: str = ""


@dataclass
class Decision:
    """What the session made of one seating."""

    seating: Seating
    phase: str = FLAT
    accepted: bool = True
    reason: str = ""
    score: float = 0.0
    zero_mm: float | None = None  # the zero at this seating's time
    sagitta_mm: float | None = None  # surface seatings: the probe's travel from the zero


@dataclass
class SessionResult:
    decisions: list[Decision]
    summary: dict
    budget: Budget | None = None


@dataclass
class _Zero:
    model: str  # "linear" or "constant"
    t_ref_s: float
    value_mm: float
    slope_mm_per_s: float
    u_mm: float | None  # standard uncertainty of the zero at t_ref
    dof: float

    def at(self, t_s: float) -> float:
        return self.value_mm + self.slope_mm_per_s * (t_s - self.t_ref_s)


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


def fit_zero(times, values, bracketed: bool, fallback: tuple[float, float] | None) -> _Zero:
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
        return _Zero("linear", t_ref, value, float(slope), u, dof)
    t_ref = float(t.mean()) if n else 0.0
    value = float(x.mean())
    if n >= 2:
        sd, dof = float(x.std(ddof=1)), n - 1
    else:
        sd, dof = fallback if fallback else (None, math.inf)
    u = None if sd is None else sd / math.sqrt(n)
    return _Zero("constant", t_ref, value, 0.0, u, dof)


def _zero_u_at(z: _Zero, times, t_s: float) -> float | None:
    """Standard error of a fitted line's value at t (textbook regression)."""
    if z.u_mm is None or z.model == "constant":
        return z.u_mm
    t = np.asarray(times, float)
    n = len(t)
    sxx = float(np.sum((t - t.mean()) ** 2))
    sd = z.u_mm * math.sqrt(n)
    return sd * math.sqrt(1.0 / n + (t_s - t.mean()) ** 2 / sxx)


def analyse(seatings: list[Seating], profile: Profile, settings: AnalysisSettings) -> SessionResult:
    """Decide every seating and compute the result; the counts are taken after every decision."""
    result = _analyse(seatings, profile, settings)
    acc = [d for d in result.decisions if d.accepted]
    result.summary.update(
        seatings_flat=sum(d.phase == FLAT for d in acc), seatings_surface=sum(d.phase == SURFACE for d in acc),
        seatings_rejected=len(result.decisions) - len(acc), seatings_total=len(result.decisions))
    return result


def _analyse(seatings: list[Seating], profile: Profile, settings: AnalysisSettings) -> SessionResult:
    step = profile.indicator.resolution_mm
    sign = profile.indicator.sign
    decisions = [Decision(s) for s in seatings]

    # 1. unsteady seatings (rocking, a foot slipping): their own samples wander
    spreads = np.array([s.spread_mm for s in seatings]) if seatings else np.array([])
    limit = settings.max_spread_mm
    if limit is None:
        limit = max(3 * step, 5 * float(np.median(spreads))) if len(spreads) else 3 * step
    for d in decisions:
        if d.seating.spread_mm > limit:
            d.accepted, d.reason = False, f"unsteady: spread {d.seating.spread_mm:.4f} mm beyond {limit:.4f} mm"
    phases = classify(seatings, settings.phase_gap_mm, settings.flat_first, step, [d.accepted for d in decisions])
    for d, ph in zip(decisions, phases):
        d.phase = ph

    flats = [d for d in decisions if d.phase == FLAT]
    surf = [d for d in decisions if d.phase == SURFACE]
    first_surface_t = min((d.seating.t_mid_s for d in surf), default=math.inf)
    last_surface_t = max((d.seating.t_mid_s for d in surf), default=-math.inf)

    def bracketed(ds):
        return any(d.seating.t_mid_s < first_surface_t for d in ds) and any(
            d.seating.t_mid_s > last_surface_t for d in ds
        )

    # 2. outliers on the flat, about a robust trend when the flats bracket the surface
    steady_flats = [d for d in flats if d.accepted]
    if steady_flats:
        t = np.array([d.seating.t_mid_s for d in steady_flats])
        x = np.array([d.seating.value_mm for d in steady_flats])
        if surf and bracketed(steady_flats) and len(x) >= 3 and np.ptp(t) > 0:
            slope, icpt, _, _ = stats.theilslopes(x, t)
            resid = x - (icpt + slope * t)
        else:
            resid = x - np.median(x)
        _apply(steady_flats, outliers.judge(resid, settings.rejection, step, settings.z_cut))

    good_flats = [d for d in flats if d.accepted]
    summary = _base_summary(profile, settings)
    if not good_flats:
        summary.update(status="no flat seatings", message=(
            "No seating on the flat was found: seat the spherometer on the reference flat first."
            if not seatings else "Every flat seating was rejected: no zero to measure from."))
        return SessionResult(decisions, summary)

    def zero_fit(fallback):
        return fit_zero([d.seating.t_mid_s for d in good_flats], [d.seating.value_mm for d in good_flats],
                        bool(surf) and bracketed(good_flats), fallback)

    zero = zero_fit(None)
    for d in flats:
        d.zero_mm = zero.at(d.seating.t_mid_s)

    if not surf:
        summary.update(_zero_summary(zero), status="no surface seatings",
                       message="Only the flat was seated: the zero is set, no surface measured yet.")
        return SessionResult(decisions, summary)

    # 3. the surface: sagitta against the zero at each seating's own time
    delta = np.median([d.seating.value_mm - zero.at(d.seating.t_mid_s) for d in surf])
    surface = "concave" if sign * delta < 0 else "convex"
    orient = -sign if surface == "concave" else sign
    for d in surf:
        d.zero_mm = zero.at(d.seating.t_mid_s)
        d.sagitta_mm = orient * (d.seating.value_mm - d.zero_mm)
    steady = [d for d in surf if d.accepted]
    _apply(steady, outliers.judge([d.sagitta_mm for d in steady], settings.rejection, step, settings.z_cut))
    good = [d for d in surf if d.accepted]
    summary["surface"] = surface
    if not good:
        summary.update(_zero_summary(zero), status="not estimable",
                       message="Every surface seating was rejected.")
        return SessionResult(decisions, summary)

    sag = np.array([d.sagitta_mm for d in good])
    n = len(sag)
    sd = float(sag.std(ddof=1)) if n >= 2 else None
    # the flats' own scatter about the zero fit (drift removed), when they can tell it
    flat_sd = zero.u_mm * math.sqrt(len(good_flats)) if zero.u_mm is not None else None
    if zero.u_mm is None and sd is not None:  # one flat: borrow the surface scatter (same hands, same instrument)
        zero = zero_fit((sd, n - 1))
    t_surf = float(np.mean([d.seating.t_mid_s for d in good]))
    u_zero = _zero_u_at(zero, [d.seating.t_mid_s for d in good_flats], t_surf)
    zero_at_surf = zero.at(t_surf)
    s_mean = float(sag.mean())
    same_count = bool(n >= 2 and np.ptp(sag) < 0.1 * step)
    summary.update(_zero_summary(zero), zero_mm=zero_at_surf, zero_u_mm=u_zero, zero_t_ref_s=t_surf,
                   sagitta_mm=s_mean, same_count=same_count)
    r, rho = profile.contact_mm(surface)
    summary.update(ring_radius_mm=r, foot_radius_mm=rho)
    try:
        radius = geometry.radius_from_sagitta_mm(s_mean, r, rho, surface)
    except UserError as exc:
        summary.update(status="not estimable", message=f"The mean sagitta gives no radius: {exc}.")
        return SessionResult(decisions, summary)
    summary.update(radius_mm=radius, focal_length_mm=geometry.focal_length_mm(radius))
    _targets(summary, settings, profile, surface, radius, s_mean)
    if sd is None or u_zero is None:
        summary.update(status="not estimable", message=(
            "One surface seating gives a radius but no uncertainty: seat the surface again."))
        return SessionResult(decisions, summary)

    # scatter, and each reading's step term while that reading scatters by less than one count
    comps = reading_components(step, sd, n, zero_scatter_mm=flat_sd if flat_sd is not None else sd)
    comps.append(Component("zero on the flat", u_zero, 1.0, zero.dof, "A", "t" if math.isfinite(zero.dof) else "normal"))
    budget = radius_budget(profile.spherometer, surface, s_mean, comps)
    u_sag = math.sqrt(sum(c.u**2 for c in comps))
    summary.update(
        status="ok",
        message=("Every surface seating showed the same count: the result cannot be finer than one count."
                 if same_count else "Measured."),
        sagitta_u_mm=u_sag, radius_u_mm=budget.u_c, radius_U_mm=budget.U, coverage_factor=budget.k,
        dof_eff=_finite(budget.nu_eff), focal_length_U_mm=budget.U / 2.0, budget=budget.as_dict()["components"],
    )
    return SessionResult(decisions, summary, budget)


def _apply(ds: list[Decision], verdicts) -> None:
    for d, (rejected, score, reason) in zip(ds, verdicts):
        d.score = score
        if rejected:
            d.accepted, d.reason = False, reason


def _finite(x):
    return None if x is None or not math.isfinite(x) else float(x)


def _zero_summary(z: _Zero) -> dict:
    return dict(zero_mm=z.value_mm, zero_u_mm=z.u_mm, zero_t_ref_s=z.t_ref_s, drift_model=z.model,
                drift_mm_per_min=z.slope_mm_per_s * 60.0)


def _targets(summary, settings, profile, surface, radius, s_mean) -> None:
    d = settings.diameter_mm
    if d:
        summary.update(diameter_mm=d, focal_ratio=geometry.focal_ratio(radius / 2.0, d))
    tr = settings.target_radius_mm
    if tr:
        r, rho = profile.contact_mm(surface)
        target_s = geometry.probe_sagitta_mm(tr, r, rho, surface)
        summary.update(target_radius_mm=tr, radius_to_go_mm=radius - tr, sagitta_to_go_mm=target_s - s_mean)


def _base_summary(profile: Profile, settings: AnalysisSettings) -> dict:
    """Every key present from the first moment, null where not yet known (never NaN)."""
    keys = ("surface zero_mm zero_u_mm zero_t_ref_s drift_mm_per_min drift_model sagitta_mm sagitta_u_mm "
            "radius_mm radius_u_mm radius_U_mm coverage_factor dof_eff focal_length_mm focal_length_U_mm "
            "diameter_mm focal_ratio target_radius_mm radius_to_go_mm sagitta_to_go_mm").split()
    out = {k: None for k in keys}
    r_cc, rho = profile.contact_mm("concave")
    r_cv, _ = profile.contact_mm("convex")
    out.update(
        status="", message="", label=settings.label, unit=profile.unit,
        same_count=False, rejection=settings.rejection, budget=[],
        spherometer=dict(kind=profile.spherometer.kind, params_mm=dict(profile.spherometer.params_mm),
                         u_mm=dict(profile.spherometer.u_mm), name=profile.name),
        ring_radius_mm=r_cc, foot_radius_mm=rho, resolution_mm=profile.indicator.resolution_mm,
        sense=profile.indicator.sense,
    )
    if r_cv != r_cc:
        out["ring_radius_convex_mm"] = r_cv
    return out
