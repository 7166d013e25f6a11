"""Calibration on a reference: the budget, the combination of references, and coverage with a wrong profile.

The instrument's truth comes from the simulator's [instrument] geometry (the
legs 0.1 mm longer than the profile says: a misread vernier); the ring radius
it should recover is the circumradius of the TRUE legs, checked against the
exact construction in tests/analysis/test_geometry.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from logger.analysis import geometry
from logger.analysis.calibration import Reference, calibrate, calibration_note, sagitta_dof
from logger.config.profile import parse_profile
from logger.simulator import load_scenario, simulate
from tests.helpers.exact_construction import ball_centres, probe_axis, three_ball_reading
from tests.helpers.simrun import analyse_run

RHO = 3.175


def _ref(name, R, uR, surface, s, us, dof=math.inf):
    return Reference(name, R, uR, surface, s, us, dof)


def _exact_ring(legs) -> float:
    P = ball_centres(*legs)
    return float(np.linalg.norm(P[0, :2] - probe_axis(P)))


def test_one_reference_budget_vs_monte_carlo():
    # Source: JCGM 101:2008 (Monte Carlo propagation through the exact relation) against the GUM
    # budget (JCGM 100:2008, 5.1.2): standard deviation within 3 %, the 95 % half-width within 5 %.
    refs = [_ref("plate", 1500.0, 0.05, "concave", 0.547, 0.0004, 9.0)]
    cal = calibrate(refs, RHO, 0.002)
    rng = np.random.default_rng(1)
    n = 400_000
    R = 1500.0 + 0.05 * rng.normal(size=n)
    d = 6.35 + 0.002 * rng.normal(size=n)
    # the standard deviation with the sagitta drawn normal (u is its standard deviation) ...
    r = np.sqrt((s := 0.547 + 0.0004 * rng.normal(size=n)) * (2 * (R - d / 2) - s))  # DESIGN.md relation
    assert r.std() == pytest.approx(cal.u_mm, rel=0.03)
    # ... and the coverage interval with it drawn as t with 9 dof, scale u (JCGM 101 6.4.9), against U = k u
    r = np.sqrt((s := 0.547 + 0.0004 * rng.standard_t(9.0, n)) * (2 * (R - d / 2) - s))
    half = (np.quantile(r, 0.97725) - np.quantile(r, 0.02275)) / 2
    assert half == pytest.approx(cal.budget.U, rel=0.05)
    assert cal.ring_radius_mm == pytest.approx(float(np.median(r)), abs=0.05 * cal.u_mm)


def test_references_combine_with_the_shared_ball_correlated():
    # Source: JCGM 101 Monte Carlo of the whole calibration (one ball drawn once per trial and used
    # by both references, each certificate and sagitta drawn on its own), combined with the same
    # weights; and GUM 5.2.2: the combined variance is w' V w with the covariance of the shared ball.
    # two strongly curved references, where the ball matters: a concave R 100 mm test plate and a
    # convex R 60 mm sphere, under feet whose diameter is known to 0.02 mm only
    s_plate = geometry.probe_sagitta_mm(100.0, 40.4, RHO, "concave")
    s_ball = geometry.probe_sagitta_mm(60.0, 40.4, RHO, "convex")
    refs = [_ref("concave plate", 100.0, 0.002, "concave", s_plate, 0.0004),
            _ref("steel ball", 60.0, 0.001, "convex", s_ball, 0.0004)]
    cal = calibrate(refs, RHO, 0.02)
    rng = np.random.default_rng(2)
    n = 400_000
    d = 6.35 + 0.02 * rng.normal(size=n)
    rs = []
    for ref, sign in zip(refs, (-1, +1)):
        s = ref.sagitta_mm + ref.sagitta_u_mm * rng.normal(size=n)
        R = ref.radius_mm + ref.radius_u_mm * rng.normal(size=n)
        rs.append(np.sqrt(s * (2 * (R + sign * d / 2) - s)))
    w = np.array(cal.weights)
    combined = w @ np.array(rs)
    assert combined.std() == pytest.approx(cal.u_mm, rel=0.03)
    # the weights are the generalised least-squares ones: the smallest variance any mean of these two
    # references can have, 1 / (1' V^-1 1), with V the Monte Carlo's own covariance (Aitken, from memory)
    V = np.cov(rs)
    assert cal.u_mm == pytest.approx(1 / math.sqrt(np.ones(2) @ np.linalg.solve(V, np.ones(2))), rel=0.03)
    corr = np.corrcoef(rs)[0, 1]
    assert corr < -0.3  # the ball pulls a concave and a convex reference opposite ways
    # an uncorrelated (diagonal) treatment would misstate u: the correlation matters here
    diag = math.sqrt(sum(wi**2 * r.var() for wi, r in zip(w, rs)))
    assert abs(diag - cal.u_mm) > 0.05 * cal.u_mm


def test_uncorrelated_references_give_the_inverse_variance_mean():
    # Source: textbook weighted mean (inverse-variance weights) when nothing is shared (ball u = 0,
    # different certificates); chi-square of the residuals with n - 1 dof (Birge ratio, from memory).
    refs = [_ref("a", 1500.0, 0.0, "concave", 0.547, 0.0004), _ref("b", 1000.0, 0.0, "concave", 0.8215, 0.0004),
            _ref("c", 800.0, 0.0, "concave", 1.028, 0.0006)]
    cal = calibrate(refs, RHO, 0.0)
    r, u = np.array(cal.rings_mm), np.array(cal.ring_u_mm)
    w = 1 / u**2
    assert cal.ring_radius_mm == pytest.approx(float((w * r).sum() / w.sum()), rel=1e-12)
    assert cal.u_mm == pytest.approx(float(1 / math.sqrt(w.sum())), rel=1e-9)
    chi2 = float((w * (r - cal.ring_radius_mm) ** 2).sum())
    assert cal.chi2 == pytest.approx(chi2, rel=1e-9)
    assert cal.birge_ratio == pytest.approx(math.sqrt(chi2 / 2), rel=1e-9)
    assert cal.consistent == (chi2 <= stats.chi2.ppf(0.95, 2))


def test_disagreeing_references_are_flagged():
    # Source: chi-square test at 95 % (scipy.stats.chi2): two references 10 u apart cannot both be right.
    s = geometry.probe_sagitta_mm(1500.0, 40.4, RHO, "concave")
    refs = [_ref("a", 1500.0, 0.01, "concave", s, 0.0002), _ref("b", 1530.0, 0.01, "concave", s, 0.0002)]
    cal = calibrate(refs, RHO, 0.0)
    assert not cal.consistent and cal.birge_ratio > 3


def test_sagitta_dof_is_welch_satterthwaite_of_the_type_a_terms():
    # Source: GUM G.4.1 by hand: terms 3 and 4 (u of the sagitta) with 4 and 9 dof, one term with none.
    summary = {"sagitta_u_mm": math.sqrt(9 + 16 + 144), "budget": [
        {"contribution_mm": 6.0, "sensitivity": -2.0, "dof": 4}, {"contribution_mm": 8.0, "sensitivity": 2.0, "dof": 9},
        {"contribution_mm": 24.0, "sensitivity": -2.0, "dof": None}]}
    assert sagitta_dof(summary) == pytest.approx(169**2 / (81 / 4 + 256 / 9), rel=1e-12)


def test_calibration_note_outside_a_third_to_three_times():
    # Source: common practice (calibrate near the working point); the bounds are the documented ones.
    assert calibration_note((0.3, 0.6), 0.5) is None
    assert calibration_note((0.3, 0.6), 0.11) is None and calibration_note((0.3, 0.6), 1.79) is None
    assert "outside" in calibration_note((0.3, 0.6), 0.09) and "outside" in calibration_note((0.3, 0.6), 1.9)


def _calibrated_profile(cal, caliper):
    lo, hi = cal.sagitta_range_mm
    return parse_profile({"unit": "mm", "spherometer": {"kind": "calibrated", "ring_radius": cal.ring_radius_mm,
                                                        "ball_diameter": 2 * caliper.contact_mm("concave")[1]},
                          "indicator": {"resolution": caliper.indicator.resolution_mm},
                          "uncertainty": {"ring_radius": cal.u_without_ball_mm,
                                          "ball_diameter": caliper.spherometer.u_mm["ball_diameter"]},
                          "calibration": {"ring_radius_per_ball_diameter": cal.ball_coefficient,
                                          "sagitta_min": lo, "sagitta_max": hi}}, "calibrated")


SEEDS = range(200)


def test_wrong_profile_calibrated_coverage_and_a_second_surface():
    # Source: the meaning of a coverage interval (JCGM 100 6.2, JCGM 101 5.3): the stated U of the ring
    # radius covers the TRUE ring radius (circumradius of the true legs, exact construction) in about
    # 95 % of seeded sessions; the certificate and the ball are drawn within their stated uncertainties.
    plate = load_scenario("calibration-test-plate")
    mirror = load_scenario("mirror-150-f8-rough").with_overrides(true_legs_mm=plate.true_legs_mm)
    caliper = plate.profile
    r_true = _exact_ring(plate.true_legs_mm)
    u_cert, u_ball = 0.05, caliper.spherometer.u_mm["ball_diameter"]
    rng = np.random.default_rng(14)
    covered, z, err_cal, err_caliper, measured_covered = 0, [], [], [], 0
    for seed in SEEDS:
        ball = 6.35 + u_ball * rng.normal()
        R_true = 1500.0 + u_cert * rng.normal()  # the certificate says 1500.0
        run = simulate(plate.with_overrides(radius_mm=R_true, true_ball_mm=ball), seed)
        s = analyse_run(run, caliper)
        ref = Reference("plate", 1500.0, u_cert, s["surface"], s["sagitta_mm"], s["sagitta_u_mm"], sagitta_dof(s))
        cal = calibrate([ref], caliper.contact_mm("concave")[1], u_ball)
        covered += abs(cal.ring_radius_mm - r_true) <= cal.budget.U
        z.append((cal.ring_radius_mm - r_true) / cal.u_mm)
        second = simulate(mirror.with_overrides(true_ball_mm=ball), 1000 + seed)
        with_cal = analyse_run(second, _calibrated_profile(cal, caliper))
        err_cal.append(with_cal["radius_mm"] - 2400.0)
        err_caliper.append(analyse_run(second, caliper)["radius_mm"] - 2400.0)
        measured_covered += abs(err_cal[-1]) <= with_cal["radius_U_mm"]
    n = len(SEEDS)
    assert 0.92 * n <= covered <= 0.99 * n, f"U covered the true ring radius in {covered} of {n}"
    assert 0.8 < float(np.std(z)) < 1.25, f"normalised errors scatter by {np.std(z):.2f}, not about 1"
    rms_cal, rms_caliper = (float(np.sqrt(np.mean(np.square(e)))) for e in (err_cal, err_caliper))
    assert rms_cal < 0.75 * rms_caliper
    assert abs(np.mean(err_cal)) < 3 * np.std(err_cal) / math.sqrt(n)  # no bias left (the caliper's is ~ -7 mm)
    assert measured_covered >= 0.88 * n, f"the calibrated measurement's U covered 2400 mm in {measured_covered} of {n}"
    print(f"coverage {covered}/{n}; mean(z) {np.mean(z):.2f}, sd(z) {np.std(z):.2f}; rms error calibrated {rms_cal:.2f} mm, "
          f"caliper {rms_caliper:.2f} mm; calibrated U covered {measured_covered}/{n}")


def test_the_ball_cancels_between_calibration_and_a_like_measurement():
    # Source: exact construction: one true instrument seated on a concave reference and on a concave
    # mirror; the ring radius is recovered with a ball diameter d, the mirror's radius computed with
    # the same d: dR/dd over d (central difference) is what the calibrated profile's budget states.
    legs, d = (70.12, 70.08, 70.11), 6.35
    s_ref = three_ball_reading(*legs, d / 2, 1500.0, "concave")
    s_mir = three_ball_reading(*legs, d / 2, 2400.0, "concave")
    # (a caliper profile would give dR/dd = 1/2 here, concave: R = (r^2 + s^2)/(2s) + d/2)
    cal = calibrate([_ref("plate", 1500.0, 0.0, "concave", s_ref, 1e-4)], d / 2, 0.01)
    prof = parse_profile({"unit": "mm", "spherometer": {"kind": "calibrated", "ring_radius": cal.ring_radius_mm,
                                                        "ball_diameter": d}, "indicator": {"resolution": 0.001},
                          "uncertainty": {"ring_radius": 0.0, "ball_diameter": 0.01},
                          "calibration": {"ring_radius_per_ball_diameter": cal.ball_coefficient,
                                          "sagitta_min": s_ref, "sagitta_max": s_ref}}, "t")

    def R_of(dd):
        r = geometry.ring_radius_from_reference_mm(1500.0, s_ref, dd / 2, "concave")
        return geometry.radius_from_sagitta_mm(s_mir, r, dd / 2, "concave")

    from logger.analysis.uncertainty import radius_budget

    h = 1e-3
    for s_work in (s_mir, s_ref):  # a mirror elsewhere, and the reference itself (there it cancels fully)
        def R_of(dd):
            r = geometry.ring_radius_from_reference_mm(1500.0, s_ref, dd / 2, "concave")
            return geometry.radius_from_sagitta_mm(s_work, r, dd / 2, "concave")

        exact = (R_of(d + h) - R_of(d - h)) / (2 * h)
        ball = [c for c in radius_budget(prof.spherometer, "concave", s_work, []).components
                if c.name == "ball diameter"]
        assert ball[0].sensitivity == pytest.approx(exact, rel=1e-3, abs=1e-6)
    assert abs(ball[0].sensitivity) < 1e-6  # on the reference itself the ball drops out
    assert geometry.radius_from_sagitta_mm(s_mir, *prof.contact_mm("concave"), "concave") == pytest.approx(2400.0,
                                                                                                        rel=1e-6)
