"""A mirror against its tool: exact constructions of both pieces, coverage over seeded sessions, Monte Carlo."""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest

from logger.analysis import geometry
from logger.analysis.pair import pair_budget
from logger.analysis.seating import Seating
from logger.analysis.session import AnalysisSettings, analyse
from logger.analysis.uncertainty import Component
from logger.config.profile import parse_profile
from logger.simulator import load_scenario, simulate
from tests.helpers.exact_construction import three_ball_reading
from tests.helpers.simrun import analyse_run

LEGS, BALL = (70.02, 69.98, 70.01), 6.35


def _profile(sense="in-positive"):
    return parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": list(LEGS),
                                                        "ball_diameter": BALL},
                          "indicator": {"resolution": 0.001, "sense": sense}}, "test")


def _seatings(plan, R, flat_error, sign, zero=0.3, drift_per_s=2e-6):
    """Seatings whose values come from the exact construction: 'f' flat, 'c' mirror, 'v' tool.

    A flat that bulges by e pushes the spindle in by e; a concave piece lets it run out by its
    reading, a convex one pushes it in (display = zero + sign * push-in).
    """
    push = {"f": flat_error, "c": -three_ball_reading(*LEGS, BALL / 2, R, "concave"),
            "v": three_ball_reading(*LEGS, BALL / 2, R, "convex")}
    out = []
    for i, p in enumerate(plan):
        t = 5.0 * i
        out.append(Seating(i, t, t + 2.0, zero + drift_per_s * (t + 1.0) + sign * push[p], 0.0002, 20))
    return out


@pytest.mark.parametrize("sense", ["in-positive", "out-positive"])
@pytest.mark.parametrize("plan,told", [("cvcvcvcvcvcv", True), ("fffcvcvcvcvcvfff", False),
                                       ("ffcvcvcvcvcvcvcvff", True)])
def test_exact_construction_of_both_pieces(sense, plan, told):
    # Source: exact construction (tests/helpers/exact_construction.py) of the spherometer on a concave
    # and on a convex sphere of one radius; a linear drift of the zero and a flat that bulges by
    # 0.003 mm, which the pair's radius must not see and each piece's radius must (textbook: the
    # flat's bulge adds to the concave reading and takes from the convex one).
    R, e = 2400.0, 0.003
    prof = _profile(sense)
    res = analyse(_seatings(plan, R, e if "f" in plan else 0.0, prof.indicator.sign), prof,
                  AnalysisSettings(pair=told))
    s = res.summary
    assert s["surface"] == "pair" and s["status"] == "ok", s["message"]
    assert s["pair_radius_mm"] == pytest.approx(R, rel=1e-9) and s["radius_mm"] == s["pair_radius_mm"]
    phases = [d.phase for d in res.decisions]
    assert phases == [{"f": "flat", "c": "concave", "v": "convex"}[p] for p in plan]
    assert s["seatings_surface"] == sum(p != "f" for p in plan) and s["seatings_rejected"] == 0
    if "f" in plan:
        r, rho = prof.contact_mm("concave")
        s_cc = three_ball_reading(*LEGS, BALL / 2, R, "concave") + e
        assert s["concave_radius_mm"] == pytest.approx(geometry.radius_from_sagitta_mm(s_cc, r, rho, "concave"),
                                                       rel=1e-9)
        assert s["concave_radius_mm"] < R < s["convex_radius_mm"]
        assert s["flat_error_mm"] == pytest.approx(e, abs=1e-9)
    else:
        assert "flat_error_mm" not in s and s["zero_mm"] is None


def test_two_levels_without_being_told_stay_an_ordinary_run():
    # Source: what the readings alone can tell: two levels are a flat and a surface unless the user
    # says the run is a pair (docs/measurement.md); the misreading the --pair option exists for.
    prof = _profile()
    s = analyse(_seatings("cvcvcvcvcvcv", 2400.0, 0.0, 1), prof, AnalysisSettings()).summary
    assert s["surface"] == "convex" and s["radius_mm"] == pytest.approx(1200, rel=0.01)  # mirror taken for the flat


def _pair_R(total, legs, d):
    """Vectorised inversion of the exact forward relation by bisection (test side, no root finder of ours)."""
    r = geometry.circumradius_mm(*legs)
    lo, hi = r + d / 2, np.full_like(total, 1e6)
    lo = np.broadcast_to(lo, total.shape).copy()
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        f = geometry.pair_sagitta_sum_mm(mid, (r, d / 2), (r, d / 2)) - total
        lo, hi = np.where(f > 0, mid, lo), np.where(f > 0, hi, mid)
    return 0.5 * (lo + hi)


def test_pair_budget_vs_monte_carlo():
    # Source: JCGM 101:2008 Monte Carlo through the exact relation vs the GUM budget (JCGM 100 5.1.2):
    # standard deviation within 3 %, the 95 % half-width within 5 %; the abrasive rectangular (6.4.2).
    prof = _profile()
    prof = parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": list(LEGS),
                                                        "ball_diameter": BALL}, "indicator": {"resolution": 0.001},
                          "uncertainty": {"leg_spacing": 0.012, "ball_diameter": 0.002, "flat_flatness": 0,
                                          "indicator_error": 0, "probe_offset": 0, "caliper_common": 0}}, "t")
    # (the rig's other sources: tests/analysis/test_pair_sources.py)
    total = geometry.pair_sagitta_sum_mm(2400.0, prof.contact_mm("concave"), prof.contact_mm("convex"))
    terms = [Component("scatter", 0.0004, dof=math.inf), Component("resolution", 0.001 / math.sqrt(12),
                                                                   distribution="rectangular")]
    budget = pair_budget(prof.spherometer, total, terms, abrasive_mm=0.02)
    rng = np.random.default_rng(3)
    n = 100_000
    half_step = 0.0005
    t = total + 0.0004 * rng.normal(size=n) + rng.uniform(-half_step, half_step, n)
    legs = [x + 0.012 * rng.normal(size=n) for x in LEGS]
    d = BALL + 0.002 * rng.normal(size=n)
    R = _pair_R(t, legs, d) + rng.uniform(-0.01, 0.01, n)  # abrasive: half-width g/2
    assert R.std() == pytest.approx(budget.u_c, rel=0.03)
    half = (np.quantile(R, 0.97725) - np.quantile(R, 0.02275)) / 2
    assert half == pytest.approx(budget.U, rel=0.05)
    assert budget.value == pytest.approx(2400.0, rel=1e-10)
    # the abrasive: the pair's radius lies between the pieces', which differ by up to the grain g, so
    # a rectangular term of half-width g/2: u = (g/2)/sqrt(3) (GUM 4.3.7)
    coarse = pair_budget(prof.spherometer, total, terms, abrasive_mm=0.2)
    grain = [c for c in coarse.components if c.name.startswith("abrasive")]
    assert grain[0].contribution == pytest.approx(0.1 / math.sqrt(3), rel=1e-12)


def variants():
    """(label, scenario, told it is a pair, seatings scatter by more than one count).

    Below one count the step terms stay in the budget (the one rule in
    uncertainty.reading_components), which makes U conservative; above it
    the fit's own covariance is all there is, and the normalised errors
    must scatter by about 1.
    """
    no_flat, flat = load_scenario("mirror-tool-pair"), load_scenario("mirror-tool-pair-flat")
    yield "no flat", no_flat, True, False
    yield "flat not flat", flat, False, False
    yield "flat, grit on a piece", flat.with_overrides(grit_seatings=(9,)), False, False
    yield "no flat, scatter 1.2 counts", no_flat.with_overrides(scatter_mm=0.0012), True, True
    yield "flat not flat, scatter 1.2 counts", flat.with_overrides(scatter_mm=0.0012), False, True
    # the rig's errors drawn per session from the profile's tolerances (logger/simulator/systematics.py)
    yield "no flat, rig errors drawn", no_flat.with_overrides(systematics=True), True, None
    yield "flat not flat, rig errors drawn", flat.with_overrides(systematics=True), False, None


def _budgeted_as_simulated(scenario):
    """The profile the session is analysed with: the rig's other sources only when the simulator draws them."""
    prof = scenario.profile
    if scenario.systematics:
        return prof
    return dataclasses.replace(prof, spherometer=dataclasses.replace(prof.spherometer, systematic_mm={}))


SEEDS = range(40)


@pytest.mark.parametrize("label,scenario,told,above_count", list(variants()),
                         ids=lambda v: v if isinstance(v, str) else "")
def test_pair_coverage_over_seeded_sessions(label, scenario, told, above_count):
    # Source: the meaning of a coverage interval (JCGM 100 6.2): the stated U covers the true radius
    # in about 95 % of sessions; exact counts of accepted seatings as the simulator planned them.
    covered, flat_covered, z = 0, 0, []
    for seed in SEEDS:
        run = simulate(scenario, seed)
        s = analyse_run(run, _budgeted_as_simulated(scenario), AnalysisSettings(pair=told))
        c = run.truth["counts"]
        assert (s["seatings_flat"], s["seatings_surface"]) == (c["expected_accepted_flat"],
                                                               c["expected_accepted_surface"]), f"{label} {seed}"
        assert s["surface"] == "pair"
        covered += abs(s["pair_radius_mm"] - 2400.0) <= s["pair_radius_U_mm"]
        z.append((s["pair_radius_mm"] - 2400.0) / s["pair_radius_u_mm"])
        if "flat_error_mm" in s:
            flat_covered += abs(s["flat_error_mm"] - run.truth["flat_error_mm"]) <= 2.1 * s["flat_error_u_mm"]
    n = len(SEEDS)
    assert covered >= 0.9 * n, f"{label}: U covered the true radius in {covered} of {n}"
    # with the rig's errors drawn the rectangles that cover them are wider than what one draw shows: no lower bound
    assert (0.75 if above_count else 0.0) < float(np.std(z)) < 1.25, f"{label}: normalised errors scatter by {np.std(z):.2f}"
    if scenario.flat_before:
        assert flat_covered >= 0.85 * n, f"{label}: the flat's error was covered in {flat_covered} of {n}"
