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
from dataclasses import asdict, dataclass

import numpy as np
from scipy import stats

from logger.analysis import geometry, outliers
from logger.errors import UserError
from logger.config.profile import Profile
from logger.analysis.calibration import calibration_note
from logger.analysis.pair import analyse_pair
from logger.analysis.phases import FLAT, SURFACE, classify, pair_phases
from logger.analysis.seating import Seating
from logger.analysis.zero import Zero, curvature_p, fit_zero, zero_u_at
from logger.analysis.montecarlo import coverage_interval_U
from logger.analysis.uncertainty import Budget, Component, radius_budget, reading_components



@dataclass(frozen=True)
class AnalysisSettings:
    rejection: str = "modified-z"  # one of outliers.METHODS
    z_cut: float | None = None  # modified-z only: the |M| beyond which a seating is rejected (default 3.5)
    alpha: float | None = None  # grubbs only: the significance level (default 0.05)
    flat_first: int | None = None  # force the first N seatings to be the flat
    phase_gap_mm: float | None = None  # separation of surface from flat; default from the step
    max_spread_mm: float | None = None  # seatings wandering more than this are unsteady
    target_radius_mm: float | None = None
    diameter_mm: float | None = None
    label: str = ""
    pair: bool = False  # a mirror and its tool seated alternately: two levels without a flat are the two pieces
    abrasive_mm: float = 0.0  # grain of the last abrasive: how far the pair's two radii may differ

    def __post_init__(self):
        """The rejection method's own parameter, its default filled in; one meant for another method is an error."""
        given = {name: getattr(self, name) for name in outliers.PARAMETERS}
        for name, value in outliers.limits(self.rejection, given).items():
            object.__setattr__(self, name, value)

    @property
    def rejection_limit(self) -> float | None:
        """The value of the method's parameter (None when it takes none)."""
        parameter = outliers.REJECTIONS[self.rejection].parameter
        return None if parameter is None else getattr(self, parameter)

    def as_dict(self) -> dict:
        """For settings.json: every setting, but only the rejection parameter that applies."""
        unused = set(outliers.PARAMETERS) - {outliers.REJECTIONS[self.rejection].parameter}
        return {k: v for k, v in asdict(self).items() if k not in unused}


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


def analyse(seatings: list[Seating], profile: Profile, settings: AnalysisSettings) -> SessionResult:
    """Decide every seating and compute the result; the counts are taken after every decision."""
    result = _analyse(seatings, profile, settings)
    acc = [d for d in result.decisions if d.accepted]
    result.summary.update(
        seatings_flat=sum(d.phase == FLAT for d in acc), seatings_surface=sum(d.phase != FLAT for d in acc),
        seatings_rejected=len(result.decisions) - len(acc), seatings_total=len(result.decisions))
    if profile.calibrated_sagitta_mm is not None:  # measured with a calibrated profile: near its references?
        result.summary["calibration_note"] = calibration_note(profile.calibrated_sagitta_mm,
                                                              result.summary.get("sagitta_mm"))
    return result


def _analyse(seatings: list[Seating], profile: Profile, settings: AnalysisSettings) -> SessionResult:
    step = profile.indicator.resolution_mm
    decisions = [Decision(s) for s in seatings]
    _mark_unsteady(decisions, settings, step)
    pieces = pair_phases(seatings, settings.phase_gap_mm, step, profile.indicator.sign, settings.pair,
                         [d.accepted for d in decisions])
    if pieces:  # a mirror against its tool (logger.analysis.pair)
        for d, ph in zip(decisions, pieces):
            d.phase = ph
        summary = _base_summary(profile, settings)
        return SessionResult(decisions, summary, analyse_pair(decisions, profile, settings, summary))
    phases = classify(seatings, settings.phase_gap_mm, settings.flat_first, step, [d.accepted for d in decisions])
    for d, ph in zip(decisions, phases):
        d.phase = ph
    flats = [d for d in decisions if d.phase == FLAT]
    surf = [d for d in decisions if d.phase == SURFACE]
    floor = _judge_flats(decisions, flats, surf, settings, step)

    good_flats = [d for d in flats if d.accepted]
    summary = _base_summary(profile, settings)
    if not good_flats:
        summary.update(status="no flat seatings", message=(
            "No seating on the flat was found: seat the spherometer on the reference flat first."
            if not seatings else "Every flat seating was rejected: no zero to measure from."))
        return SessionResult(decisions, summary)

    def zero_fit(fallback):
        return fit_zero([d.seating.t_mid_s for d in good_flats], [d.seating.value_mm for d in good_flats],
                        bool(surf) and _bracketed(good_flats, surf), fallback)

    zero = zero_fit(None)
    for d in flats:
        d.zero_mm = zero.at(d.seating.t_mid_s)
    _curvature(summary, good_flats, zero)
    if not surf:
        summary.update(_zero_summary(zero), status="no surface seatings",
                       message="Only the flat was seated: the zero is set, no surface measured yet.")
        return SessionResult(decisions, summary)

    summary["surface"] = _surface_sagittas(surf, zero, profile.indicator.sign)
    steady = [d for d in surf if d.accepted]
    _apply(steady, outliers.judge([d.sagitta_mm for d in steady], settings.rejection, floor, settings.rejection_limit))
    summary["rejection_shift_mm"] = outliers.detectable_shift(
        [d.sagitta_mm for d in steady if d.accepted], settings.rejection, floor, settings.rejection_limit)
    good = [d for d in surf if d.accepted]
    if not good:
        summary.update(_zero_summary(zero), status="not estimable",
                       message="Every surface seating was rejected.")
        return SessionResult(decisions, summary)
    return _result(decisions, good, good_flats, zero, zero_fit, summary, profile, settings)


def _mark_unsteady(decisions: list[Decision], settings: AnalysisSettings, step: float) -> None:
    """Rocking, a foot slipping: seatings whose own samples wander are rejected as unsteady."""
    spreads = np.array([d.seating.spread_mm for d in decisions])
    limit = settings.max_spread_mm
    if limit is None:
        limit = max(3 * step, 5 * float(np.median(spreads))) if len(spreads) else 3 * step
    for d in decisions:
        if d.seating.spread_mm > limit:
            d.accepted, d.reason = False, f"unsteady: spread {d.seating.spread_mm:.4f} mm beyond {limit:.4f} mm"


def _bracketed(ds: list[Decision], surf: list[Decision]) -> bool:
    """Some of `ds` come before the first surface seating and some after the last."""
    first = min((d.seating.t_mid_s for d in surf), default=math.inf)
    last = max((d.seating.t_mid_s for d in surf), default=-math.inf)
    return any(d.seating.t_mid_s < first for d in ds) and any(d.seating.t_mid_s > last for d in ds)


def _within_sd_mm(ds: list[Decision]) -> float:
    """The noise within a seating: the RMS of the seatings' own time-weighted SDs."""
    return float(np.sqrt(np.mean([d.seating.spread_mm**2 for d in ds]))) if ds else 0.0


def _flat_trend(steady_flats: list[Decision], surf: list[Decision]):
    """The flats' robust trend, t_s -> mm: Theil-Sen when they bracket the surface, else their median."""
    t = np.array([d.seating.t_mid_s for d in steady_flats])
    x = np.array([d.seating.value_mm for d in steady_flats])
    if surf and _bracketed(steady_flats, surf) and len(x) >= 3 and np.ptp(t) > 0:
        slope, icpt, _, _ = stats.theilslopes(x, t)
        return lambda ts: icpt + slope * np.asarray(ts, float)
    return lambda ts: np.full(np.shape(ts), float(np.median(x)))


def _residuals(ds: list[Decision], trend) -> np.ndarray:
    """Each seating's reading less the trend at its time."""
    t = np.array([d.seating.t_mid_s for d in ds])
    return np.array([d.seating.value_mm for d in ds]) - trend(t)


def _judge_flats(decisions: list[Decision], flats: list[Decision], surf: list[Decision], settings: AnalysisSettings,
                 step: float) -> float:
    """Outliers on the flat, about a robust trend (Theil-Sen) when the flats bracket the surface.

    Returns the session's MAD floor (outliers.scale_floor) for the surface: from the noise within the
    steady seatings and both phases about the flats' trend, pooled.  The flats are judged with it only
    where it exceeds one count: their residuals are about a fitted line, extrapolated when the
    bracket is uneven, and a flat wrongly thrown out bends the zero of every surface seating.
    """
    within = _within_sd_mm([d for d in decisions if d.accepted])
    steady = [d for d in flats if d.accepted]
    if not steady:
        return outliers.scale_floor(step, within)
    trend = _flat_trend(steady, surf)
    resid = _residuals(steady, trend)
    floor = outliers.scale_floor(step, within, [resid, _residuals([d for d in surf if d.accepted], trend)])
    _apply(steady, outliers.judge(resid, settings.rejection, max(floor, step), settings.rejection_limit))
    return floor


def _surface_sagittas(surf: list[Decision], zero: Zero, sign: int) -> str:
    """Each surface seating's sagitta against the zero at its own time; returns which surface it is."""
    delta = np.median([d.seating.value_mm - zero.at(d.seating.t_mid_s) for d in surf])
    surface = "concave" if sign * delta < 0 else "convex"
    orient = -sign if surface == "concave" else sign
    for d in surf:
        d.zero_mm = zero.at(d.seating.t_mid_s)
        d.sagitta_mm = orient * (d.seating.value_mm - d.zero_mm)
    return surface


def _result(decisions, good, good_flats, zero: Zero, zero_fit, summary: dict, profile: Profile,
            settings: AnalysisSettings) -> SessionResult:
    """The mean sagitta, the radius, and its GUM budget from the accepted seatings."""
    step, surface = profile.indicator.resolution_mm, summary["surface"]
    sag = np.array([d.sagitta_mm for d in good])
    n = len(sag)
    sd = float(sag.std(ddof=1)) if n >= 2 else None
    # the flats' own scatter about the zero fit (drift removed), when they can tell it
    flat_sd = zero.u_mm * math.sqrt(len(good_flats)) if zero.u_mm is not None else None
    if zero.u_mm is None and sd is not None:  # one flat: borrow the surface scatter (same hands, same instrument)
        zero = zero_fit((sd, n - 1))
    t_surf = float(np.mean([d.seating.t_mid_s for d in good]))
    u_zero = zero_u_at(zero, [d.seating.t_mid_s for d in good_flats], t_surf)
    s_mean = float(sag.mean())
    same_count = bool(n >= 2 and np.ptp(sag) < 0.1 * step)
    summary.update(_zero_summary(zero), zero_mm=zero.at(t_surf), zero_u_mm=u_zero, zero_t_ref_s=t_surf,
                   sagitta_mm=s_mean, same_count=same_count)
    r, rho = profile.contact_mm(surface)
    summary.update(ring_radius_mm=r, foot_radius_mm=rho)
    try:
        radius = profile.spherometer.radius_mm(s_mean, surface)
    except UserError as exc:
        summary.update(status="not estimable", message=f"The mean sagitta gives no radius: {exc}.")
        return SessionResult(decisions, summary)
    summary.update(radius_mm=radius, focal_length_mm=geometry.focal_length_mm(radius))
    _targets(summary, settings, profile, surface, radius, s_mean)
    if sd is None or u_zero is None:
        summary.update(status="not estimable", message=(
            "One surface seating gives a radius but no uncertainty: seat the surface again."))
        return SessionResult(decisions, summary)

    # scatter, and each reading's quantisation bias, dithered by the scatter and the noise within seatings
    within = _within_sd_mm(good + good_flats)
    comps = reading_components(step, sd, n, zero_scatter_mm=flat_sd if flat_sd is not None else sd,
                               within_sd_mm=within)
    comps.append(Component("zero on the flat", u_zero, 1.0, zero.dof, "A", "t" if math.isfinite(zero.dof) else "normal"))
    budget = radius_budget(profile.spherometer, surface, s_mean, comps)
    u_sag = math.sqrt(sum(c.u**2 for c in comps))
    U, method = coverage_interval_U(budget, profile.spherometer, surface, s_mean, comps)
    summary.update(
        status="ok",
        message=("Every surface seating showed the same count: the result cannot be finer than one count."
                 if same_count else "Measured."),
        sagitta_u_mm=u_sag, within_seating_sd_mm=within, radius_u_mm=budget.u_c, radius_U_mm=U, coverage_factor=U / budget.u_c,
        radius_U_gum_mm=budget.U, coverage_method=method,
        dof_eff=_finite(budget.nu_eff), focal_length_U_mm=U / 2.0, budget=budget.as_dict()["components"],
    )
    _depth_to_go(summary, settings, radius, U)
    return SessionResult(decisions, summary, budget)


def _depth_to_go(summary: dict, settings: AnalysisSettings, radius: float, U: float) -> None:
    """Depth still to grind at the centre over the full aperture D, for a sphere:
    sag(R_target, D/2) - sag(R_now, D/2), sag(R, h) = R - sqrt(R^2 - h^2); its U by the
    sensitivity d sag / dR = 1 - R / sqrt(R^2 - h^2) (GUM 5.1.3; the target is exact)."""
    d, tr = settings.diameter_mm, settings.target_radius_mm
    if not (d and tr) or d / 2 >= min(radius, tr):
        return
    h = d / 2.0
    summary.update(depth_to_go_mm=geometry.aperture_depth_mm(tr, d) - geometry.aperture_depth_mm(radius, d),
                   depth_to_go_U_mm=abs(1.0 - radius / math.sqrt(radius * radius - h * h)) * U)


def _curvature(summary: dict, good_flats: list[Decision], zero: Zero) -> None:
    """With enough flats along a linear zero, test it for curvature and say what to do (docs/measurement.md)."""
    if zero.model != "linear":
        return
    p = curvature_p([d.seating.t_mid_s for d in good_flats], [d.seating.value_mm for d in good_flats])
    summary["drift_curvature_p"] = p
    if p is not None and p < 0.05:
        summary["caution"] = (f"The zero drifted along a curve, not a line (p = {p:.3f}): the glass or the frame "
                              "is still changing temperature. Let it settle, and seat the flat between surface "
                              "seatings.")


def _apply(ds: list[Decision], verdicts) -> None:
    for d, (rejected, score, reason) in zip(ds, verdicts):
        d.score = score
        if rejected:
            d.accepted, d.reason = False, reason


def _finite(x):
    return None if x is None or not math.isfinite(x) else float(x)


def _zero_summary(z: Zero) -> dict:
    return dict(zero_mm=z.value_mm, zero_u_mm=z.u_mm, zero_t_ref_s=z.t_ref_s, drift_model=z.model,
                drift_mm_per_min=z.slope_mm_per_s * 60.0)


def _targets(summary, settings, profile, surface, radius, s_mean) -> None:
    d = settings.diameter_mm
    if d:
        summary.update(diameter_mm=d, focal_ratio=geometry.focal_ratio(radius / 2.0, d))
    tr = settings.target_radius_mm
    if tr:
        target_s = profile.spherometer.reading_mm(tr, surface)
        summary.update(target_radius_mm=tr, radius_to_go_mm=radius - tr, sagitta_to_go_mm=target_s - s_mean)


def _base_summary(profile: Profile, settings: AnalysisSettings) -> dict:
    """Every key present from the first moment, null where not yet known (never NaN)."""
    keys = ("surface zero_mm zero_u_mm zero_t_ref_s drift_mm_per_min drift_model sagitta_mm sagitta_u_mm "
            "radius_mm radius_u_mm radius_U_mm coverage_factor dof_eff focal_length_mm focal_length_U_mm "
            "diameter_mm focal_ratio target_radius_mm radius_to_go_mm sagitta_to_go_mm depth_to_go_mm "
            "depth_to_go_U_mm rejection_shift_mm drift_curvature_p caution").split()
    out = {k: None for k in keys}
    r_cc, rho = profile.contact_mm("concave")
    r_cv, _ = profile.contact_mm("convex")
    out.update(
        status="", message="", label=settings.label, unit=profile.unit,
        same_count=False, rejection=settings.rejection, budget=[],
        spherometer=dict(kind=profile.spherometer.kind, params_mm=dict(profile.spherometer.params_mm),
                         u_mm=dict(profile.spherometer.u_mm), name=profile.name),
        ring_radius_mm=r_cc, foot_radius_mm=rho, probe_offset_mm=profile.spherometer.probe_offset_mm(),
        resolution_mm=profile.indicator.resolution_mm,
        sense=profile.indicator.sense,
    )
    if r_cv != r_cc:
        out["ring_radius_convex_mm"] = r_cv
    return out
