"""A mirror against its tool: the radius from the difference between the two pieces' readings.

Ground together, a concave mirror and its convex tool share one radius R
(to within the abrasive's grain).  Seated alternately, the reading
difference between them is s_cc + s_cv, the probe sagittas of spheres of
radius R - rho and R + rho over the ring (geometry.radius_from_pair_mm
solves it for R).  The zero is not in it: the flat, its flatness error and
the zero's level drop out, and the signal is twice one piece's.

Every accepted seating enters one least-squares fit (docs/measurement.md,
"Mirror against tool"): reading = z0 + b t + level of its piece, with one
straight-line drift common to all levels.  With a flat, the levels are 0
(flat), -sign s_cc and +sign s_cv; without one, the concave level is z0 and
the convex one lies sign (s_cc + s_cv) above it.  The residuals judge the
outliers, the fit's covariance gives the Type A terms.  Lengths in mm.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np

from logger.analysis import geometry, outliers
from logger.analysis.phases import CONCAVE, CONVEX, FLAT
from logger.analysis.uncertainty import (Budget, Component, input_components, radius_budget, reading_components,
                                         systematic_components)
from logger.errors import UserError


@dataclasses.dataclass(frozen=True)
class Fit:
    beta: np.ndarray  # z0, [b], then s_cc, s_cv (flat) or the sum (no flat)
    cov: np.ndarray | None  # sigma^2 (X'X)^-1; None with no degrees of freedom left
    resid: np.ndarray
    sd: float | None
    dof: int
    t_ref_s: float
    slope: bool

    def contrast(self, weights: dict) -> tuple[float, float | None]:
        """A combination of the level parameters (index from the end: -1 is the last) and its standard uncertainty."""
        g = np.zeros(len(self.beta))
        for i, w in weights.items():
            g[i] = w
        value = float(g @ self.beta)
        return value, None if self.cov is None else float(math.sqrt(g @ self.cov @ g))


def fit_levels(ds, sign: int, with_flat: bool) -> Fit | None:
    """Least squares over every seating; None when some level has no seating."""
    t = np.array([d.seating.t_mid_s for d in ds])
    v = np.array([d.seating.value_mm for d in ds])
    ph = [d.phase for d in ds]
    is_cc = np.array([p == CONCAVE for p in ph], float)
    is_cv = np.array([p == CONVEX for p in ph], float)
    level_cols = [-sign * is_cc, sign * is_cv] if with_flat else [sign * is_cv]
    if not all(col.any() for col in level_cols) or (with_flat and FLAT not in ph) or (not with_flat and not is_cc.any()):
        return None
    t_ref = float(t.mean())
    slope = len(v) >= len(level_cols) + 4 and float(np.ptp(t)) > 0
    X = np.column_stack([np.ones(len(v))] + ([t - t_ref] if slope else []) + level_cols)
    beta, *_ = np.linalg.lstsq(X, v, rcond=None)
    resid = v - X @ beta
    dof = len(v) - X.shape[1]
    if dof < 1:
        return Fit(beta, None, resid, None, 0, t_ref, slope)
    sd = float(math.sqrt(resid @ resid / dof))
    return Fit(beta, sd * sd * np.linalg.inv(X.T @ X), resid, sd, dof, t_ref, slope)


def _sagitta_terms(u_a: float, fit: Fit, step: float, names: tuple[str, str]) -> list[Component]:
    """The Type A term of the fit and each reading's quantisation bias, dithered by the fit's scatter."""
    steps = [c for c in reading_components(step, fit.sd, 2) if c.kind == "B"]  # the one rule for the step terms
    comps = [Component("seating scatter (least squares, drift fitted)", u_a, 1.0, fit.dof, "A", "t")]
    return comps + [dataclasses.replace(c, name=f"resolution, {n} reading") for c, n in zip(steps, names)]


def _pair_radius(spherometer, total: float, params=None) -> float:
    """The pair's R from the sum, with these inputs; a probe off the axis by a known e reads each piece
    sag(R, e) short (geometry._on_axis_radius), so the sum 2 sag(R, e) short."""
    e = spherometer.probe_offset_mm(params)
    return geometry.radius_from_pair_mm(total, spherometer.contact_mm(CONCAVE, params),
                                        spherometer.contact_mm(CONVEX, params), 0.0 if e is None else e)


def pair_budget(spherometer, total: float, sum_terms: list[Component], abrasive_mm: float) -> Budget:
    """GUM budget of the pair's radius (GUM 5.1.2; 5.2 for the caliper error the legs share): the sum's
    terms times dR/dsum, each spherometer input by a central difference through its contact geometry,
    the rig's other sources as for one piece (uncertainty.systematic_components, with pieces = 2), and
    the abrasive (rectangular, half-width g/2)."""
    R = _pair_radius(spherometer, total)
    slope = geometry.dradius_dpair_sum(R, spherometer.contact_mm(CONCAVE), spherometer.contact_mm(CONVEX))
    comps = [dataclasses.replace(c, sensitivity=c.sensitivity * slope) for c in sum_terms]
    radius_of = lambda params: _pair_radius(spherometer, total, params)  # noqa: E731
    comps += input_components(spherometer, radius_of)
    comps += systematic_components(spherometer, CONCAVE, radius_of, R, slope, pieces=2)
    if abrasive_mm > 0:
        comps.append(Component("abrasive: the pieces' radii differ by up to its grain", abrasive_mm / 2 / math.sqrt(3),
                               distribution="rectangular"))
    return Budget("radius of curvature (mirror and tool)", R, tuple(comps))


def analyse_pair(decisions, profile, settings, summary: dict) -> Budget | None:
    """Judge the seatings of a mirror-and-tool run and fill the summary; returns the pair's budget."""
    step, sign = profile.indicator.resolution_mm, profile.indicator.sign
    with_flat = any(d.phase == FLAT for d in decisions)
    steady = [d for d in decisions if d.accepted]
    fit = fit_levels(steady, sign, with_flat)
    if fit is not None and fit.sd is not None:
        for d, (rejected, score, reason) in zip(steady, outliers.judge(fit.resid, settings.rejection, step,
                                                                       settings.rejection_limit)):
            d.score = score
            if rejected:
                d.accepted, d.reason = False, reason
        fit = fit_levels([d for d in steady if d.accepted], sign, with_flat)
    summary["surface"] = "pair"
    if fit is None or fit.sd is None:
        summary.update(status="not estimable", message=(
            "Mirror against tool: seat each piece at least twice (and the flat, if used, too)."))
        return None
    total, u_total = fit.contrast({-2: 1.0, -1: 1.0} if with_flat else {-1: 1.0})
    names = (CONCAVE, CONVEX)
    terms = _sagitta_terms(u_total, fit, step, names)
    try:
        budget = pair_budget(profile.spherometer, total, terms, settings.abrasive_mm)
    except UserError as exc:
        summary.update(status="not estimable", message=f"The pieces' readings give no radius: {exc}.")
        return None
    R = budget.value
    summary.update(
        status="ok", message="Mirror against tool: the radius from the difference between the pieces' readings.",
        sagitta_mm=total, sagitta_u_mm=math.sqrt(sum(c.u**2 for c in terms)), radius_mm=R, radius_u_mm=budget.u_c,
        radius_U_mm=budget.U, coverage_factor=budget.k, dof_eff=None if math.isinf(budget.nu_eff) else budget.nu_eff,
        focal_length_mm=R / 2, focal_length_U_mm=budget.U / 2, budget=budget.as_dict()["components"],
        pair_radius_mm=R, pair_radius_u_mm=budget.u_c, pair_radius_U_mm=budget.U, pair_sagitta_sum_mm=total,
        drift_model="linear" if fit.slope else "constant",
        drift_mm_per_min=float(fit.beta[1]) * 60 if fit.slope else 0.0)
    if with_flat:
        _pieces(decisions, fit, profile, step, sign, summary)
    _targets(summary, settings, profile.spherometer, R, total)
    return budget


def _pieces(decisions, fit: Fit, profile, step: float, sign: int, summary: dict) -> None:
    """With a flat: the zero, each piece's own radius and budget, and the flat's error that the pair implies."""
    b = float(fit.beta[1]) if fit.slope else 0.0
    for d in decisions:
        d.zero_mm = float(fit.beta[0] + b * (d.seating.t_mid_s - fit.t_ref_s))
        if d.phase != FLAT:
            d.sagitta_mm = (-sign if d.phase == CONCAVE else sign) * (d.seating.value_mm - d.zero_mm)
    R = summary["pair_radius_mm"]
    zero_u = math.sqrt(fit.cov[0, 0])
    summary.update(zero_mm=float(fit.beta[0]), zero_u_mm=zero_u, zero_t_ref_s=fit.t_ref_s)
    own = {}
    for piece, index in ((CONCAVE, -2), (CONVEX, -1)):
        s, u = fit.contrast({index: 1.0})
        terms = _sagitta_terms(u, fit, step, (piece, "zero"))
        try:
            budget = radius_budget(profile.spherometer, piece, s, terms)
        except UserError:
            continue
        own[piece] = s
        summary.update({f"{piece}_sagitta_mm": s, f"{piece}_radius_mm": budget.value, f"{piece}_radius_U_mm": budget.U})
    if len(own) == 2:
        # measured = true + e on the concave piece, true - e on the convex one (e: the flat's own bulge)
        expected = {p: profile.spherometer.reading_mm(R, p) for p in own}
        error = ((own[CONCAVE] - expected[CONCAVE]) - (own[CONVEX] - expected[CONVEX])) / 2
        _, u_error = fit.contrast({-2: 0.5, -1: -0.5})
        summary.update(flat_error_mm=error, flat_error_u_mm=u_error)


def _targets(summary: dict, settings, spherometer, R: float, total: float) -> None:
    """How far the pair is from the wanted radius: in radius, and in the difference of the readings."""
    if settings.diameter_mm:
        summary.update(diameter_mm=settings.diameter_mm, focal_ratio=geometry.focal_ratio(R / 2, settings.diameter_mm))
    target = settings.target_radius_mm
    if target:
        want = spherometer.reading_mm(target, CONCAVE) + spherometer.reading_mm(target, CONVEX)
        summary.update(target_radius_mm=target, radius_to_go_mm=R - target, sagitta_to_go_mm=want - total)
