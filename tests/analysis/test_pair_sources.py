"""The rig's other sources in the mirror-and-tool budget: flatness, indicator, probe offset, common caliper.

Seatings come from exact constructions of both pieces (tests/helpers/exact_construction.py); the
budget's terms are checked against what those constructions do to the pair's radius, and the whole
budget against a Monte Carlo written here (JCGM 101:2008) with the legs' shared caliper error drawn
once for all three (GUM 5.2).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from logger.analysis import geometry
from logger.analysis.pair import pair_budget
from logger.analysis.seating import Seating
from logger.analysis.session import AnalysisSettings, analyse
from logger.analysis.uncertainty import Component
from logger.config.profile import parse_profile
from tests.helpers.exact_construction import three_ball_reading, three_ball_reading_probe_off

LEGS, BALL, R = (70.02, 69.98, 70.01), 6.35, 2400.0
NONE = {"leg_spacing": 0, "ball_diameter": 0, "flat_flatness": 0, "indicator_error": 0, "probe_offset": 0,
        "caliper_common": 0}
FLATNESS, INDICATOR, PROBE, COMMON = ("reference flat's flatness over the ring", "indicator's error of indication",
                                      "probe offset from the circumcentre", "caliper error common to the legs")


def _profile(distances=None, **uncertainty):
    sph = {"kind": "three-ball", "leg_spacings": list(LEGS), "ball_diameter": BALL}
    if distances is not None:
        sph["probe_distances"] = [float(d) for d in distances]
    return parse_profile({"unit": "mm", "spherometer": sph, "indicator": {"resolution": 0.001},
                          "uncertainty": {**NONE, **uncertainty}}, "test")


def _session(plan, push, profile, scale=0.0):
    """Seatings 'f' flat, 'c' mirror, 'v' tool from the pieces' push-in `push` (in-positive, a drifting
    zero, an indicator whose display moves by 1 + scale per unit of travel); the analysed summary."""
    out = []
    for i, p in enumerate(plan):
        t = 5.0 * i
        out.append(Seating(i, t, t + 2.0, 0.3 + 2e-6 * (t + 1.0) + (1 + scale) * push[p], 0.0002, 20))
    s = analyse(out, profile, AnalysisSettings(pair="f" not in plan)).summary
    assert s["surface"] == "pair" and s["status"] == "ok", s["message"]
    return s


def _push(flat_mm=0.0, offset_xy=(0.0, 0.0)):
    cc, _ = three_ball_reading_probe_off(*LEGS, BALL / 2, R, "concave", offset_xy)
    cv, _ = three_ball_reading_probe_off(*LEGS, BALL / 2, R, "convex", offset_xy)
    return {"f": flat_mm, "c": -cc, "v": cv}


def _half_width(summary, name):
    (c,) = [c for c in summary["budget"] if c["name"] == name]
    return c["contribution_mm"] * math.sqrt(3)  # a rectangle's half-width is sqrt(3) u (GUM 4.3.7)


@pytest.mark.parametrize("plan", ["cvcvcvcvcvcv", "ffcvcvcvcvcvcvff"])
def test_the_flats_departure_is_not_in_the_pair(plan):
    # Source: exact construction; textbook: a flat that bulges by F over the ring sets the zero F too
    # high, so the concave piece reads F deeper and the convex one F shallower, and their sum, the
    # pair's signal, is the same (without a flat there is no zero at all).  So the pair's budget has
    # no flatness term, while each piece's own radius (with a flat) carries it.
    prof = _profile(flat_flatness=0.001, indicator_error=0.001)
    bulged, true = _session(plan, _push(0.003), prof), _session(plan, _push(0.0), prof)
    assert bulged["pair_sagitta_sum_mm"] == pytest.approx(true["pair_sagitta_sum_mm"], abs=1e-12)
    assert bulged["pair_radius_mm"] == pytest.approx(R, rel=1e-9)
    names = {c["name"] for c in bulged["budget"]}
    assert INDICATOR in names and FLATNESS not in names
    if "f" in plan:
        from logger.analysis.uncertainty import radius_budget

        own = radius_budget(prof.spherometer, "concave", bulged["concave_sagitta_mm"], [])
        assert FLATNESS in {c.name for c in own.components}
        assert abs(bulged["concave_radius_mm"] - R) > 10  # 3 um of bulge: many mm on one piece


def test_the_indicators_error_over_the_travel_of_the_sum():
    # Source: exact construction; an indicator whose scale is off by g reads every travel (1 + g) times
    # (the simulator's model, logger/simulator/systematics.py), so at the bound g s_cc = E the sum is
    # off by g (s_cc + s_cv), about 2 E: the term's half-width 2 E |dR/dsum| must cover the shift it
    # makes in R, and not by much (the sum's travel is the two pieces' together).
    E = 0.001
    prof = _profile(indicator_error=E)
    s_cc = three_ball_reading(*LEGS, BALL / 2, R, "concave")
    for g in (E / s_cc, -E / s_cc):
        s = _session("cvcvcvcvcvcv", _push(), prof, scale=g)
        shift, half = abs(s["pair_radius_mm"] - R), _half_width(s, INDICATOR)
        # to first order (GUM 5.1.2): R's curvature in the sum adds about 2 E / sum = 0.3 % to a shortening
        assert 0.97 * half < shift <= 1.004 * half


def test_the_probe_offset_on_both_pieces():
    # Source: exact construction of both pieces with the probe's tip 1.5 mm off the circumcentre: each
    # reads short by R - sqrt(R^2 - e^2), so the pair reads long by about R e^2 / r^2, like one piece
    # (twice the shift, half the slope).  Without the distances the rectangle of half-width R e^2 / r^2
    # at the profile's bound covers it; with the distances the pair's radius is exact and the
    # distances' terms replace the rectangle.
    e, r = 1.5, geometry.circumradius_mm(*LEGS)
    push = _push(offset_xy=(0.9, 1.2))
    plain = _session("cvcvcvcvcvcv", push, _profile(probe_offset=e))
    assert plain["pair_radius_mm"] - R == pytest.approx(R * e * e / r**2, rel=0.03)
    assert plain["pair_radius_mm"] - R <= _half_width(plain, PROBE)
    _, d = three_ball_reading_probe_off(*LEGS, BALL / 2, R, "concave", (0.9, 1.2))
    told = _session("cvcvcvcvcvcv", push, _profile(d, probe_offset=e, probe_distance=0.05))
    assert told["pair_radius_mm"] == pytest.approx(R, rel=1e-9)
    names = {c["name"] for c in told["budget"]}
    assert PROBE not in names and {f"probe distance to ball {x}" for x in "ABC"} <= names


def test_the_pair_budget_with_the_rigs_sources_vs_monte_carlo():
    # Source: JCGM 101:2008 Monte Carlo through the exact pair relation (inverted here by bisection)
    # vs the GUM budget (JCGM 100 5.1.2, and 5.2 for the caliper error the three legs share, drawn once
    # for all three): the SD within 3 %.  The indicator's bound 2 E on the sum is drawn rectangular
    # (6.4.2); the flat's flatness is stated but, as worked out above, not in the pair.
    u_leg, u_ball, common, E = 0.012, 0.002, 0.02, 0.0002  # the shared error large enough to tell in the SD
    prof = _profile(leg_spacing=u_leg, ball_diameter=u_ball, caliper_common=common, indicator_error=E,
                    flat_flatness=0.001)
    total = geometry.pair_sagitta_sum_mm(R, prof.contact_mm("concave"), prof.contact_mm("convex"))
    terms = [Component("scatter", 0.0002)]
    budget = pair_budget(prof.spherometer, total, terms, abrasive_mm=0.0)
    assert {c.name for c in budget.components} >= {INDICATOR, COMMON} and FLATNESS not in {
        c.name for c in budget.components}
    rng = np.random.default_rng(11)
    n = 100_000
    t = total + 0.0002 * rng.normal(size=n) + rng.uniform(-2 * E, 2 * E, n)
    shared = common * rng.normal(size=n)
    legs = [x + u_leg * rng.normal(size=n) + shared for x in LEGS]
    d = BALL + u_ball * rng.normal(size=n)
    ring = geometry.circumradius_mm(*legs)
    lo, hi = ring + d / 2, np.full(n, 1e6)
    for _ in range(80):
        mid = 0.5 * (lo + hi)
        above = geometry.pair_sagitta_sum_mm(mid, (ring, d / 2), (ring, d / 2)) > t
        lo, hi = np.where(above, mid, lo), np.where(above, hi, mid)
    Rs = 0.5 * (lo + hi)
    assert Rs.std() == pytest.approx(budget.u_c, rel=0.03)
    assert budget.value == pytest.approx(R, rel=1e-10)
