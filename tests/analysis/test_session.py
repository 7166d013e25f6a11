"""The session: phases, zero, drift, rejection and the radius, against exact constructions.

Seatings here are made from the exact construction in tests/helpers/exact_construction.py
(balls placed on a sphere in space), not from logger's formulas.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
import sympy
from hypothesis import given, settings, strategies as st
from scipy import stats

from tests.helpers.quantisation import bias_rms_direct
from logger.config.profile import DEFAULT_SYSTEMATIC_MM
from tests.helpers.exact_construction import three_ball_reading
from logger.config.profile import parse_profile
from logger.run.writer import json_text
from logger.analysis.seating import Seating
from logger.analysis.session import AnalysisSettings, analyse
from logger.analysis.zero import fit_zero

LEGS = (70.02, 69.98, 70.01)
BALL = 6.35


def make_profile(sense="in-positive", resolution=0.001):
    return parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": list(LEGS),
                                                        "ball_diameter": BALL},
                          "indicator": {"resolution": resolution, "sense": sense}}, "test profile")


def session(R, surface, sense="in-positive", flats_before=4, surface_n=8, flats_after=3, drift_mm_per_s=0.0,
            scatter=0.0, rng=None, zero=0.0123):
    """Seatings (t every 5 s) as the instrument would give them on a sphere of radius R."""
    s_true = three_ball_reading(*LEGS, BALL / 2, R, surface)
    sign = 1 if sense == "in-positive" else -1
    travel = -s_true if surface == "concave" else s_true  # reading grows as the spindle goes in
    out, t = [], 0.0
    kinds = ["flat"] * flats_before + ["surface"] * surface_n + ["flat"] * flats_after
    for i, kind in enumerate(kinds):
        v = zero + drift_mm_per_s * (t + 1.0) + (sign * travel if kind == "surface" else 0.0)
        if rng is not None:
            v += rng.normal(0, scatter)
        out.append(Seating(i, t, t + 2.0, v, 0.0005, 200))
        t += 5.0
    return out, s_true


@settings(max_examples=40, deadline=None)
@given(R=st.floats(300, 20000), surface=st.sampled_from(["concave", "convex"]),
       sense=st.sampled_from(["in-positive", "out-positive"]), drift=st.floats(-2e-4, 2e-4))
def test_noise_free_session_recovers_the_true_radius(R, surface, sense, drift):
    seatings, s_true = session(R, surface, sense, drift_mm_per_s=drift)
    res = analyse(seatings, make_profile(sense), AnalysisSettings())
    s = res.summary
    assert s["surface"] == surface
    assert s["seatings_flat"] == 7 and s["seatings_surface"] == 8 and s["seatings_rejected"] == 0
    assert math.isclose(s["sagitta_mm"], s_true, rel_tol=1e-9, abs_tol=1e-12)
    assert math.isclose(s["radius_mm"], R, rel_tol=1e-7)
    assert math.isclose(s["drift_mm_per_min"], drift * 60, rel_tol=1e-6, abs_tol=1e-12)
    assert s["focal_length_mm"] == pytest.approx(R / 2, rel=1e-7)  # R = 2f (textbook mirror relation)


def test_drift_is_linear_only_when_flats_bracket_the_surface():
    seatings, _ = session(2400, "concave", flats_after=0, drift_mm_per_s=1e-4)
    s = analyse(seatings, make_profile(), AnalysisSettings()).summary
    assert s["drift_model"] == "constant" and s["drift_mm_per_min"] == 0.0
    seatings, _ = session(2400, "concave", flats_after=2, drift_mm_per_s=1e-4)
    s = analyse(seatings, make_profile(), AnalysisSettings()).summary
    assert s["drift_model"] == "linear"


def test_zero_fit_against_scipy_linregress():
    # the zero line and its slope against scipy.stats.linregress (reference library)
    from scipy import stats

    rng = np.random.default_rng(2)
    t = np.array([1.0, 6.0, 11.0, 80.0, 85.0])
    x = 0.01 + 2e-5 * t + rng.normal(0, 3e-4, len(t))
    z = fit_zero(t, x, True, None)
    ref = stats.linregress(t, x)
    assert math.isclose(z.slope_mm_per_s, ref.slope, rel_tol=1e-9)
    assert math.isclose(z.at(0.0), ref.intercept, rel_tol=1e-9, abs_tol=1e-12)
    # standard error of the line at the mean time = residual sd / sqrt(n) (textbook regression)
    resid_sd = math.sqrt(np.sum((x - (ref.intercept + ref.slope * t)) ** 2) / (len(t) - 2))
    assert math.isclose(z.u_mm, resid_sd / math.sqrt(len(t)), rel_tol=1e-9)


def _line_se(t_flats, x_flats, t):
    """Textbook regression (e.g. Draper & Smith, Applied Regression Analysis, ch. 1; from memory): the
    standard error of a fitted line's value at t is s sqrt(1/n + (t - tbar)^2 / Sxx), s the residual
    standard deviation on n - 2 degrees of freedom.  Written here, not taken from logger."""
    t_f, x_f = np.asarray(t_flats, float), np.asarray(x_flats, float)
    n, tbar = len(t_f), t_f.mean()
    sxx = float(np.sum((t_f - tbar) ** 2))
    slope = float(np.sum((t_f - tbar) * (x_f - x_f.mean())) / sxx)
    resid = x_f - (x_f.mean() + slope * (t_f - tbar))
    s = math.sqrt(float(np.sum(resid**2)) / (n - 2))
    return s * math.sqrt(1.0 / n + (t - tbar) ** 2 / sxx)


def test_zero_uncertainty_away_from_the_flats_mean_time():
    # Source: the closed form above, and numpy.polyfit's covariance matrix (reference library; it
    # scales by the residuals over n - 2): var(a t + b) = [t 1] C [t 1]^T.
    from logger.analysis.zero import zero_u_at

    rng = np.random.default_rng(3)
    t = np.array([1.0, 6.0, 11.0, 16.0, 80.0, 85.0])
    x = 0.01 + 2e-5 * t + rng.normal(0, 3e-4, len(t))
    z = fit_zero(t, x, True, None)
    coef, cov = np.polyfit(t, x, 1, cov=True)
    for at in (t.mean(), 40.0, 0.0, 150.0):  # at the mean time, inside, at the start, far beyond
        v = np.array([at, 1.0])
        assert math.isclose(zero_u_at(z, t, at), _line_se(t, x, at), rel_tol=1e-9)
        assert math.isclose(zero_u_at(z, t, at), math.sqrt(v @ cov @ v), rel_tol=1e-9)
    assert zero_u_at(z, t, 150.0) > 2 * zero_u_at(z, t, t.mean())  # the second term matters here


def test_session_zero_u_at_the_surface_mean_time():
    # An uneven bracket: five flats before, one after; the surface seatings' mean time is far from
    # the flats' mean time, so the session's zero term must follow the line's standard error there
    # (closed form above), not the value at the flats' own mean time.
    rng = np.random.default_rng(8)
    seatings, _ = session(2400, "concave", flats_before=5, surface_n=8, flats_after=1, scatter=0.0015, rng=rng,
                          drift_mm_per_s=2e-5)
    res = analyse(seatings, make_profile(), AnalysisSettings())
    flats = [x for x in seatings if x.index < 5 or x.index >= 13]
    t_f = [x.t_mid_s for x in flats]
    t_surf = float(np.mean([x.t_mid_s for x in seatings if 5 <= x.index < 13]))
    assert res.summary["seatings_flat"] == 6 and res.summary["seatings_surface"] == 8
    expected = _line_se(t_f, [x.value_mm for x in flats], t_surf)
    assert math.isclose(res.summary["zero_u_mm"], expected, rel_tol=1e-9)
    assert expected > 1.2 * _line_se(t_f, [x.value_mm for x in flats], float(np.mean(t_f)))


def test_grit_on_the_flat_is_rejected_with_a_reason_and_kept():
    seatings, _ = session(2400, "concave")
    v = seatings[1]
    seatings[1] = Seating(v.index, v.t_start_s, v.t_end_s, v.value_mm + 0.04, v.spread_mm, v.n)  # 40 um grain
    res = analyse(seatings, make_profile(), AnalysisSettings())
    d = res.decisions[1]
    assert d.phase == "flat" and not d.accepted and d.reason.startswith("outlier")
    assert res.summary["seatings_rejected"] == 1 and len(res.decisions) == len(seatings)
    assert math.isclose(res.summary["radius_mm"], 2400, rel_tol=1e-7)


def test_grit_on_the_surface_is_rejected():
    rng = np.random.default_rng(5)
    seatings, _ = session(2400, "concave", scatter=0.0008, rng=rng)
    v = seatings[7]
    seatings[7] = Seating(v.index, v.t_start_s, v.t_end_s, v.value_mm + 0.03, v.spread_mm, v.n)
    res = analyse(seatings, make_profile(), AnalysisSettings())
    assert not res.decisions[7].accepted and res.decisions[7].phase == "surface"
    assert res.summary["seatings_surface"] == 7


def test_unsteady_seating_is_rejected():
    seatings, _ = session(2400, "concave")
    v = seatings[6]
    seatings[6] = Seating(v.index, v.t_start_s, v.t_end_s, v.value_mm, 0.02, v.n)
    res = analyse(seatings, make_profile(), AnalysisSettings())
    assert not res.decisions[6].accepted and res.decisions[6].reason.startswith("unsteady")


def test_one_surface_seating_is_not_estimable_and_never_nan():
    seatings, _ = session(2400, "concave", surface_n=1, flats_after=0)
    s = analyse(seatings, make_profile(), AnalysisSettings()).summary
    assert s["status"] == "not estimable"
    assert s["radius_mm"] is not None and s["radius_U_mm"] is None
    json.loads(json_text(s))  # strict JSON: no NaN or Infinity anywhere
    assert "NaN" not in json_text(s) and "Infinity" not in json_text(s)


def test_no_seatings_and_flat_only():
    p = make_profile()
    assert analyse([], p, AnalysisSettings()).summary["status"] == "no flat seatings"
    seatings, _ = session(2400, "concave", surface_n=0, flats_after=0)
    s = analyse(seatings, p, AnalysisSettings()).summary
    assert s["status"] == "no surface seatings" and math.isclose(s["zero_mm"], 0.0123)


def test_flat_first_for_a_very_shallow_curve():
    # R = 200 m gives a 4 um sagitta: closer to the zero than the default phase gap
    seatings, s_true = session(200000, "concave")
    assert analyse(seatings, make_profile(), AnalysisSettings()).summary["seatings_surface"] == 0
    s = analyse(seatings, make_profile(), AnalysisSettings(flat_first=4)).summary
    assert s["seatings_surface"] == 8 and math.isclose(s["sagitta_mm"], s_true, rel_tol=1e-6)


# The radius as a function of the instrument's inputs, for sensitivities by sympy: the textbook
# circumradius (Heron) and R = (r^2 + s^2) / (2 s) + d / 2 for a concave surface with ball feet.
_A, _B, _C, _D, _S = sympy.symbols("a b c d s", positive=True)
_R_CONCAVE = ((_A * _B * _C) ** 2 / ((_A + _B + _C) * (-_A + _B + _C) * (_A - _B + _C) * (_A + _B - _C)) + _S**2) / (
    2 * _S) + _D / 2
# No [uncertainty] in make_profile: a caliper of +-0.02 mm read as a rectangular half-width,
# u = 0.02 / sqrt(3) mm for each leg and the ball (common practice, from memory).
_U_CALIPER = 0.02 / math.sqrt(3)


def _rig2(dR, vals) -> float:
    """The rig's other sources at the profile's defaults (logger.config.profile.DEFAULT_SYSTEMATIC_MM):
    flat and indicator bounds as rectangles on s (GUM 4.3.7), the probe offset's R e^2 / r^2 as a
    rectangle on R, and one caliper error shared by the three legs (GUM 5.2, correlation via a common
    input: its sensitivity is dR/da + dR/db + dR/dc)."""
    d = DEFAULT_SYSTEMATIC_MM
    R = float(_R_CONCAVE.subs(vals))
    r2 = float(((_A * _B * _C) ** 2 / ((_A + _B + _C) * (-_A + _B + _C) * (_A - _B + _C) * (_A + _B - _C))).subs(vals))
    return ((dR[_S] * d["flat_flatness"]) ** 2 + (dR[_S] * d["indicator_error"]) ** 2
            + (R * d["probe_offset"] ** 2 / r2) ** 2) / 3 + ((dR[_A] + dR[_B] + dR[_C]) * d["caliper_common"]) ** 2


def _independent_budget(seatings, flat_idx, surf_idx, q=0.001, p=0.9545):
    """u_c, nu_eff and U of a concave session's radius, rebuilt here from the raw seatings (GUM)."""
    flats = [x for x in seatings if x.index in flat_idx]
    surf = [x for x in seatings if x.index in surf_idx]
    t_f, x_f = np.array([x.t_mid_s for x in flats]), np.array([x.value_mm for x in flats])
    slope, icpt = np.polyfit(t_f, x_f, 1)  # the zero line through the bracketing flats
    sag = np.array([(icpt + slope * x.t_mid_s) - x.value_mm for x in surf])  # concave, in-positive
    n, n_f, t_s = len(sag), len(flats), float(np.mean([x.t_mid_s for x in surf]))
    s_mean, sd = float(sag.mean()), float(sag.std(ddof=1))
    flat_sd = math.sqrt(float(np.sum((x_f - (icpt + slope * t_f)) ** 2)) / (n_f - 2))
    u_a, u_zero = sd / math.sqrt(n), _line_se(t_f, x_f, t_s)  # GUM 4.2.3; textbook regression
    # each reading's quantisation bias, computed directly from the normal CDF (tests/helpers/quantisation.py),
    # dithered by its scatter and the within-seating spread, each less q^2 / 12 (Sheppard's correction)
    within2 = max(float(np.mean([x.spread_mm**2 for x in seatings])) - q * q / 12, 0.0)
    u_res2 = sum(bias_rms_direct(q, math.sqrt(max(v * v - q * q / 12, 0.0) + within2)) ** 2 for v in (sd, flat_sd))
    vals = {_A: LEGS[0], _B: LEGS[1], _C: LEGS[2], _D: BALL, _S: s_mean}
    dR = {x: float(sympy.diff(_R_CONCAVE, x).subs(vals)) for x in (_A, _B, _C, _D, _S)}
    inst2 = sum((dR[x] * _U_CALIPER) ** 2 for x in (_A, _B, _C, _D)) + _rig2(dR, vals)
    terms_a = [(abs(dR[_S]) * u_a, n - 1), (abs(dR[_S]) * u_zero, n_f - 2)]  # Type A with their dof
    u_c = math.sqrt(sum(c * c for c, _ in terms_a) + dR[_S] ** 2 * u_res2 + inst2)  # GUM eq. 10
    nu_eff = u_c**4 / sum(c**4 / nu for c, nu in terms_a if c > 0) if any(c > 0 for c, _ in terms_a) else math.inf
    k = stats.norm.ppf(0.5 + p / 2) if math.isinf(nu_eff) else stats.t.ppf(0.5 + p / 2, nu_eff)  # GUM G.2b, G.3
    return float(_R_CONCAVE.subs(vals)), u_c, nu_eff, k * u_c


def test_budget_rebuilt_independently_per_gum():
    # JCGM 100:2008: u_c^2 = sum (c_i u_i)^2 (eq. 10), Welch-Satterthwaite (G.2b), k from Student t;
    # every term rebuilt above from the raw seatings, sympy sensitivities and the caliper default.
    rng = np.random.default_rng(11)
    seatings, _ = session(2400, "concave", scatter=0.0015, rng=rng)
    res = analyse(seatings, make_profile(), AnalysisSettings())
    assert res.summary["seatings_rejected"] == 0
    R, u_c, nu_eff, U = _independent_budget(seatings, {0, 1, 2, 3, 12, 13, 14}, set(range(4, 12)))
    assert math.isclose(res.summary["radius_mm"], R, rel_tol=1e-9)
    assert math.isclose(res.summary["radius_u_mm"], u_c, rel_tol=1e-6)
    assert math.isclose(res.summary["dof_eff"], nu_eff, rel_tol=1e-6)
    assert math.isclose(res.summary["radius_U_mm"], U, rel_tol=1e-6)
    # scatter above one count: the step is dithered away, its bias term all but nil (Widrow and Kollar, 2008)
    assert all(c.u < 1e-6 * 0.001 for c in res.budget.components if "resolution" in c.name)


def test_same_count_is_said_and_resolution_kept():
    seatings, _ = session(2400, "concave")
    q = 0.001
    seatings = [Seating(s.index, s.t_start_s, s.t_end_s, round(s.value_mm / q) * q, 0.0, 100) for s in seatings]
    s = analyse(seatings, make_profile(), AnalysisSettings()).summary
    assert s["same_count"] is True
    assert "same count" in s["message"]
    # the resolution stays in the budget: q / sqrt(12) per reading, rectangular (GUM F.2.2.1)
    res_terms = [b for b in s["budget"] if "resolution" in b["name"]]
    assert len(res_terms) == 2 and all(math.isclose(b["u_mm"], q / math.sqrt(12)) for b in res_terms)
    # and U is what the GUM gives for two step terms and the instrument, no scatter: k = 2 (nu infinite)
    _, u_c, nu_eff, U = _independent_budget(seatings, {0, 1, 2, 3, 12, 13, 14}, set(range(4, 12)), q)
    assert nu_eff > 1e9 and (s["dof_eff"] is None or s["dof_eff"] > 1e9)  # no scatter left: nu about infinite
    assert math.isclose(s["radius_u_mm"], u_c, rel_tol=1e-6) and math.isclose(s["radius_U_gum_mm"], U, rel_tol=1e-6)
    # rectangles dominate: U is the Monte Carlo's coverage interval (JCGM 101 7.7), which for a sum of
    # rectangles and normals lies between a single rectangle's 95.45 % half-width (0.9545 sqrt(3) u) and k = 2
    assert s["coverage_method"].startswith("Monte Carlo")
    assert 0.9545 * math.sqrt(3) * u_c * 0.99 <= s["radius_U_mm"] < U


def _seatings(values, spread=0.0005):
    return [Seating(i, 5.0 * i, 5.0 * i + 2.0, v, spread, 200) for i, v in enumerate(values)]


def test_grit_on_the_very_first_seating_does_not_become_the_zero():
    # the exact construction's sagitta on the example legs; the first flat has a 0.5 mm grain under a foot
    s_true = three_ball_reading(*LEGS, BALL / 2, 2400.0, "concave")
    values = [0.5, 0.0, 0.0, 0.0] + [-s_true] * 5 + [0.0]
    res = analyse(_seatings(values), make_profile(), AnalysisSettings())
    assert not res.decisions[0].accepted and res.decisions[0].phase == "flat"
    assert res.summary["seatings_flat"] == 4 and res.summary["seatings_surface"] == 5
    assert math.isclose(res.summary["radius_mm"], 2400.0, rel_tol=1e-7)


def test_a_rocked_first_seating_does_not_become_the_zero():
    s_true = three_ball_reading(*LEGS, BALL / 2, 2400.0, "concave")
    seatings = _seatings([0.004, 0.0, 0.0, 0.0] + [-s_true] * 5 + [0.0])
    seatings[0] = Seating(0, 0.0, 2.0, 0.004, 0.02, 200)  # wandered by 20 um while "seated"
    res = analyse(seatings, make_profile(), AnalysisSettings())
    assert res.decisions[0].reason.startswith("unsteady")
    assert math.isclose(res.summary["zero_mm"], 0.0, abs_tol=1e-12)
    assert math.isclose(res.summary["radius_mm"], 2400.0, rel_tol=1e-7)


def test_stray_far_seatings_on_both_sides_are_not_a_surface():
    # a flat-only session with two grains of grit, one on each side: no surface phase at all
    res = analyse(_seatings([0, .001, 0, .03, .001, -.029, 0, .001, 0]), make_profile(), AnalysisSettings())
    assert res.summary["seatings_surface"] == 0 and res.summary["status"] == "no surface seatings"
    assert res.summary["seatings_rejected"] == 2


def test_flats_on_one_count_keep_the_zero_resolution_term():
    # surface seatings scatter by more than a count (dithered), the flats all show one count:
    # the zero reading's quantisation q / sqrt(12) (GUM F.2.2.1) must stay in the budget
    rng = np.random.default_rng(4)
    s_true = three_ball_reading(*LEGS, BALL / 2, 2400.0, "concave")
    values = [0.0] * 4 + list(-s_true + rng.normal(0, 0.0015, 8)) + [0.0] * 3
    # no noise within a seating either (spread 0): nothing dithers the flats' step
    res = analyse(_seatings(values, spread=0.0), make_profile(), AnalysisSettings())
    u = {c.name: c.u for c in res.budget.components}
    assert math.isclose(u["resolution, zero reading"], 0.001 / math.sqrt(12), rel_tol=1e-9)
    assert u["resolution, surface reading"] < 1e-4 * 0.001
    assert res.summary["zero_u_mm"] == 0.0 and res.summary["sagitta_u_mm"] > 0.001 / math.sqrt(12)


def test_depth_still_to_grind_at_the_centre():
    # Textbook sphere: sag(R, h) = R - sqrt(R^2 - h^2) over the half aperture h; the depth still to
    # grind is sag(R_target, h) - sag(R_now, h), its U from sympy's d sag / dR times U(R) (GUM 5.1.3).
    rng = np.random.default_rng(2)
    seatings, _ = session(2500, "concave", scatter=0.0012, rng=rng)
    s = analyse(seatings, make_profile(), AnalysisSettings(target_radius_mm=2400.0, diameter_mm=150.0)).summary
    R_sym = sympy.symbols("R", positive=True)
    sag = R_sym - sympy.sqrt(R_sym**2 - 75**2)
    want = float(sag.subs(R_sym, 2400.0) - sag.subs(R_sym, s["radius_mm"]))
    assert s["depth_to_go_mm"] == pytest.approx(want, rel=1e-9)
    assert s["depth_to_go_mm"] > 0  # a radius still too long: glass still to come out at the centre
    dsag = float(sympy.diff(sag, R_sym).subs(R_sym, s["radius_mm"]))
    assert s["depth_to_go_U_mm"] == pytest.approx(abs(dsag) * s["radius_U_mm"], rel=1e-9)


def _flat_times():
    return np.array([0, 5, 10, 15, 20, 60, 65, 70, 75, 80, 40.0])  # five before, five after, one between


def test_curvature_p_is_the_nested_f_test_and_false_alarms_five_percent():
    # Reference: the nested-model F test (linear vs quadratic least squares, scipy.stats.f), which equals the
    # t test on the quadratic coefficient (t^2 = F); and by simulation, truly linear drift with normal scatter
    # gives p < 0.05 in 5 % of sessions (binomial SE over 4000: 0.0034).
    from logger.analysis.zero import curvature_p
    rng = np.random.default_rng(9)
    t = _flat_times()
    x = 0.002 + 1e-5 * t + rng.normal(0, 0.0008, len(t))
    rss = [float(np.sum((x - np.polyval(np.polyfit(t, x, d), t)) ** 2)) for d in (1, 2)]
    F = (rss[0] - rss[1]) / (rss[1] / (len(t) - 3))
    assert curvature_p(t, x) == pytest.approx(float(stats.f.sf(F, 1, len(t) - 3)), rel=1e-6)
    alarms = sum(curvature_p(t, 1e-5 * t + rng.normal(0, 0.0008, len(t))) < 0.05 for _ in range(4000))
    assert 0.04 <= alarms / 4000 <= 0.06
    assert curvature_p(t[:4], x[:4]) is None


def test_a_zero_still_settling_raises_the_caution():
    # A zero creeping along a curve (glass cooling after washing: 5 um over the session, invented) is told.
    t = _flat_times()
    seatings = [Seating(i, tt, tt + 2.0, 4e-6 * (tt - 40) ** 2 / 16 * 0.25, 0.0, 200) for i, tt in enumerate(t)]
    s_true = three_ball_reading(*LEGS, BALL / 2, 2400.0, "concave")
    seatings += [Seating(20 + i, 25.0 + 3 * i, 26.5 + 3 * i, -s_true, 0.0, 200) for i in range(4)]
    seatings += [Seating(30 + i, 45.0 + 3 * i, 46.5 + 3 * i, -s_true, 0.0, 200) for i in range(4)]
    seatings.sort(key=lambda x: x.t_start_s)
    seatings = [Seating(i, x.t_start_s, x.t_end_s, x.value_mm, x.spread_mm, x.n) for i, x in enumerate(seatings)]
    s = analyse(seatings, make_profile(), AnalysisSettings()).summary
    assert s["drift_model"] == "linear" and s["drift_curvature_p"] < 0.05
    assert "settle" in s["caution"]
