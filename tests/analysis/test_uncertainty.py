"""The GUM budget against scipy, the GUM's own tables, hand-worked sums, sympy and Monte Carlo."""

import json
import math
from fractions import Fraction

import numpy as np
import pytest
import sympy
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from logger.errors import UserError
from logger.config.profile import parse_profile
from logger.analysis.uncertainty import (
    Budget,
    Component,
    coverage_factor,
    quantisation_bias_rms_mm,
    radius_budget,
    reading_components,
    resolution_component,
    scatter_component,
    seatings_needed,
)
from logger.analysis import geometry
from logger.analysis.montecarlo import monte_carlo_radius
from tests.helpers.quantisation import bias_rms_direct


# The rig's other sources switched off, so these checks see the inputs they are about alone
# (systematic_components has its own tests below).
NO_RIG = {"flat_flatness": 0, "indicator_error": 0, "probe_offset": 0, "caliper_common": 0}


def _three_ball(u_leg=0.012, u_ball=0.002):
    return parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": [70.02, 69.98, 70.01],
                                                        "ball_diameter": 6.35},
                          "indicator": {"resolution": 0.001},
                          "uncertainty": {"leg_spacing": u_leg, "ball_diameter": u_ball, **NO_RIG}}, "test").spherometer


def _ring(u_edge=0.02, u_diam=0.0):
    return parse_profile({"unit": "mm", "spherometer": {"kind": "ring", "inner_diameter": 70.0,
                                                        "outer_diameter": 76.0, "edge_radius": 0.5},
                          "indicator": {"resolution": 0.001},
                          "uncertainty": {"edge_radius": u_edge, "ring_diameter": u_diam, **NO_RIG}}, "test").spherometer


@settings(max_examples=100, deadline=None)
@given(dof=st.floats(1.0, 1e4), p=st.sampled_from([0.6827, 0.90, 0.95, 0.9545, 0.99, 0.9973]))
def test_coverage_factor_vs_scipy(dof, p):
    # Source: reference library scipy.stats.t.ppf, two-sided interval (GUM G.3.4).
    assert coverage_factor(p, dof) == pytest.approx(stats.t.ppf((1 + p) / 2, dof), rel=1e-12)


# GUM (JCGM 100:2008) Table G.2, t_p(nu), recalled from memory, two decimals as printed.
GUM_TABLE_G2 = [
    (0.9545, 1, 13.97), (0.9545, 2, 4.53), (0.9545, 3, 3.31), (0.9545, 4, 2.87), (0.9545, 5, 2.65),
    (0.9545, 10, 2.28), (0.9545, 20, 2.13), (0.9545, 50, 2.05), (0.9545, math.inf, 2.00),
    (0.95, 1, 12.71), (0.95, 2, 4.30), (0.95, 10, 2.23), (0.95, 20, 2.09), (0.95, math.inf, 1.960),
    (0.99, 1, 63.66), (0.99, 10, 3.17), (0.99, math.inf, 2.576),
]


@pytest.mark.parametrize("p,dof,t_table", GUM_TABLE_G2)
def test_coverage_factor_vs_gum_table_g2(p, dof, t_table):
    # Source: JCGM 100:2008 Table G.2 (from memory), printed to two or three decimals.
    assert coverage_factor(p, dof) == pytest.approx(t_table, abs=0.006)


def test_welch_satterthwaite_hand_worked():
    # Source: hand-worked example of GUM eq. (G.2b).  Contributions |c_i| u_i = 3, 4, 12 (the
    # sensitivities are not 1, to check they are applied), dof 4, 9, inf:
    #   u_c = sqrt(9 + 16 + 144) = 13
    #   nu_eff = 13^4 / (3^4/4 + 4^4/9) = 28561 / (1753/36) = 1028196/1753 = 586.535...
    comps = (
        Component("x1", 1.5, sensitivity=2.0, dof=4, kind="A", distribution="t"),
        Component("x2", 8.0, sensitivity=-0.5, dof=9, kind="A", distribution="t"),
        Component("x3", 12.0),
        Component("zero term, ignored", 0.0, dof=1, kind="A", distribution="t"),
    )
    b = Budget("y", 100.0, comps)
    assert b.u_c == pytest.approx(13.0, rel=1e-15)
    assert b.nu_eff == pytest.approx(float(Fraction(1028196, 1753)), rel=1e-12)
    assert b.k == pytest.approx(stats.t.ppf(0.5 + 0.9545 / 2, b.nu_eff), rel=1e-12)
    assert b.U == pytest.approx(b.k * 13.0, rel=1e-15)


def test_all_infinite_dof_gives_normal_k():
    # Source: GUM G.3.4 / G.6.6: with nu_eff infinite, k is the normal quantile (2 for 95.45 %).
    b = Budget("y", 1.0, (Component("a", 0.3), Component("b", 0.4)))
    assert math.isinf(b.nu_eff)
    assert b.u_c == pytest.approx(0.5, rel=1e-15)  # 3-4-5 hand sum
    assert b.k == pytest.approx(2.0, abs=1e-4)
    assert Budget("y", 1.0, (Component("a", 0.3),), p=0.95).k == pytest.approx(stats.norm.ppf(0.975), rel=1e-12)


def test_component_rules():
    # Source: GUM 4.2.3 (s/sqrt(n), n - 1 dof) and F.2.2.1 (resolution q, u = q/sqrt(12)), from memory.
    assert scatter_component(0.002, 9).u == pytest.approx(0.002 / 3, rel=1e-15)
    assert scatter_component(0.002, 9).dof == 8
    assert resolution_component("q", 0.001).u == pytest.approx(0.001 / math.sqrt(12), rel=1e-15)
    assert Component("c", 2.0, sensitivity=-3.0).contribution == 6.0
    with pytest.raises(UserError):
        scatter_component(0.002, 1)
    for bad in (dict(u=-1.0), dict(u=math.nan), dict(u=1.0, dof=0), dict(u=1.0, kind="C"),
                dict(u=1.0, distribution="triangular"), dict(u=1.0, distribution="t")):
        with pytest.raises(ValueError):
            Component("bad", **bad)


@pytest.mark.parametrize("sigma", [0.0, 0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.7])
def test_quantisation_bias_against_the_direct_expectation(sigma):
    # Source: the expected count of a Gaussian input, summed bin by bin from scipy.stats.norm
    # (tests/helpers/quantisation.py), against the Widrow-Kollar series in the code.
    q = 0.001
    want = bias_rms_direct(q, sigma * q)
    assert quantisation_bias_rms_mm(q, sigma * q) == pytest.approx(want, rel=1e-3, abs=1e-9 * q)


def test_quantisation_bias_against_simulated_quantised_means():
    # Source: a direct numpy simulation: at 64 offsets over a step, the mean of 40000 rounded noisy
    # readings minus the offset; RMS over the offsets.  The figures the issue quotes from the series
    # (q / sqrt(12) with no noise, about 0.04 q at 0.3 q) come out of the simulation too.
    rng = np.random.default_rng(5)
    q = 1.0
    for sigma, tol in ((0.0, 0.01), (0.15, 0.01), (0.3, 0.005)):
        x = (np.arange(64) + 0.5) / 64
        reads = np.round((x[:, None] + rng.normal(0, sigma, (64, 40000))) / q) * q
        sim = float(np.sqrt(np.mean((reads.mean(axis=1) - x) ** 2)))
        assert abs(quantisation_bias_rms_mm(q, sigma) - sim) < tol, sigma
    assert quantisation_bias_rms_mm(q, 0.0) == pytest.approx(1 / math.sqrt(12), rel=1e-12)  # GUM F.2.2.1
    assert quantisation_bias_rms_mm(q, 0.3) == pytest.approx(0.04, abs=0.003)


@settings(max_examples=200, deadline=None)
@given(s1=st.floats(0.0, 3.0), ds=st.floats(0.0, 0.05), w=st.floats(0.0, 1.0))
def test_step_term_has_no_jump_and_falls_as_the_scatter_grows(s1, ds, w):
    # Property of the series: each amplitude falls with sigma, and |d RMS / d sigma| < 1.5 (it peaks
    # near 1 at small sigma); the dither sqrt(s^2 - q^2/12 + w'^2) moves by at most
    # sqrt((s + ds)^2 - s^2) (a square root is 1/2-Hoelder), so the term has no jump and never grows.
    q = 0.001
    def u(s):
        return {c.name: c.u for c in reading_components(q, s * q, 8, within_sd_mm=w * q)}["resolution, surface reading"]
    assert u(s1 + ds) <= u(s1) + 1e-15
    assert u(s1) - u(s1 + ds) <= 1.5 * q * math.sqrt(ds * (2 * s1 + ds)) * (1 + 1e-9) + 1e-15
    assert u(s1) <= q / math.sqrt(12) * (1 + 1e-12)


def test_reading_components_hold_scatter_and_two_step_terms():
    names = lambda comps: [c.name for c in comps]  # noqa: E731
    assert names(reading_components(0.001)) == ["resolution, surface reading", "resolution, zero reading"]
    assert all(c.u == pytest.approx(0.001 / math.sqrt(12)) for c in reading_components(0.001))
    assert names(reading_components(0.001, 0.002, 5))[0] == "seating scatter"


def test_budget_as_dict_is_json_safe_and_table_converts_units():
    # Source: RFC 8259 (JSON has no NaN/inf) via json.dumps(allow_nan=False); 25.4 mm per inch exactly.
    b = radius_budget(_three_ball(), "concave", 0.5, reading_components(0.001, 0.0005, 10))
    d = b.as_dict("in")
    json.dumps(d, allow_nan=False)
    assert d["U_in"] == pytest.approx(b.U / 25.4, rel=1e-15)
    assert [c["dof"] for c in d["components"]][:2] == [9, None]
    text = b.table("in")
    assert f"{b.U / 25.4:.4g} in" in text and "leg spacing a" in text and "seating scatter" in text
    assert json.loads(json.dumps(b.as_dict()))["value_mm"] == b.value


def test_leg_sensitivity_vs_sympy():
    # Source: sympy differentiation of R = (r^2 + s^2)/(2s) + d/2 with r = abc / sqrt((a+b+c)(-a+b+c)(a-b+c)(a+b-c)).
    a, b, c, d, s = sympy.symbols("a b c d s", positive=True)
    r = a * b * c / sympy.sqrt((a + b + c) * (-a + b + c) * (a - b + c) * (a + b - c))
    R = (r**2 + s**2) / (2 * s) + d / 2
    vals = {a: 70.02, b: 69.98, c: 70.01, d: 6.35, s: 0.5}
    budget = radius_budget(_three_ball(), "concave", 0.5, [])
    by_name = {comp.name: comp.sensitivity for comp in budget.components}
    assert by_name["leg spacing a"] == pytest.approx(float(sympy.diff(R, a).subs(vals)), rel=1e-6)
    assert by_name["leg spacing c"] == pytest.approx(float(sympy.diff(R, c).subs(vals)), rel=1e-6)
    assert by_name["ball diameter"] == pytest.approx(float(sympy.diff(R, d).subs(vals)), rel=1e-6)
    assert budget.value == pytest.approx(float(R.subs(vals)), rel=1e-12)


@pytest.mark.parametrize("surface", ["concave", "convex"])
def test_ring_edge_radius_enters_twice_vs_sympy(surface):
    # Source: sympy.  The edge radius e moves the contact circle (r = o/2 - e concave, i/2 + e convex)
    # and is the foot radius: R = (r^2 + s^2)/(2s) +- e.
    e, s, o, i = sympy.symbols("e s o i", positive=True)
    R = (((o / 2 - e) ** 2 + s**2) / (2 * s) + e) if surface == "concave" else (((i / 2 + e) ** 2 + s**2) / (2 * s) - e)
    vals = {e: 0.5, s: 0.3, o: 76.0, i: 70.0}
    budget = radius_budget(_ring(), surface, 0.3, [])
    (edge,) = [comp for comp in budget.components if comp.name == "ring edge radius"]
    assert edge.sensitivity == pytest.approx(float(sympy.diff(R, e).subs(vals)), rel=1e-6)
    assert budget.value == pytest.approx(float(R.subs(vals)), rel=1e-12)


@pytest.mark.parametrize("surface", ["concave", "convex"])
def test_gum_agrees_with_monte_carlo_three_ball(surface):
    # Source: JCGM 101:2008 (Monte Carlo) validating the JCGM 100:2008 law of propagation; agreement
    # within a few per cent is expected for this nearly linear model.
    sph = _three_ball()
    comps = [Component("seating scatter", 0.0008), resolution_component("resolution", 0.001)]
    b = radius_budget(sph, surface, 0.5, comps)
    R = monte_carlo_radius(sph, surface, 0.5, comps, n=200_000, seed=1)
    assert R.shape == (200_000,)
    assert np.std(R, ddof=1) == pytest.approx(b.u_c, rel=0.03)
    assert abs(np.mean(R) - b.value) < 0.05 * b.u_c
    lo, hi = np.quantile(R, [0.5 - b.p / 2, 0.5 + b.p / 2])  # probabilistically symmetric interval (JCGM 101 7.7)
    assert (hi - lo) / 2 == pytest.approx(b.U, rel=0.05)


def test_gum_agrees_with_monte_carlo_ring_edge():
    # Source: JCGM 101:2008 vs the linearised budget, for the input that enters both r and rho.
    sph = _ring(u_edge=0.02, u_diam=0.004)
    b = radius_budget(sph, "concave", 0.3, [])
    R = monte_carlo_radius(sph, "concave", 0.3, [], n=100_000, seed=2)
    assert np.std(R, ddof=1) == pytest.approx(b.u_c, rel=0.03)


def test_monte_carlo_t_component_variance():
    # Source: JCGM 101:2008 6.4.9.4 (from memory): the scaled-shifted t with nu dof and scale u has
    # variance u^2 nu / (nu - 2); its GUM u is u.  Rectangular half-width sqrt(3) u (6.4.2.1).
    sph = _three_ball(u_leg=0.0, u_ball=0.0)
    nu = 6
    comps = [Component("scatter", 0.001, dof=nu, kind="A", distribution="t")]
    dRds = geometry.dradius_dsagitta(0.5, sph.contact_mm("concave")[0])
    R = monte_carlo_radius(sph, "concave", 0.5, comps, n=200_000, seed=3)
    assert np.std(R, ddof=1) == pytest.approx(abs(dRds) * 0.001 * math.sqrt(nu / (nu - 2)), rel=0.03)
    flat = monte_carlo_radius(sph, "concave", 0.5, [Component("q", 0.001, distribution="rectangular")], n=100_000)
    assert np.max(np.abs(flat - np.median(flat))) <= abs(dRds) * 0.001 * math.sqrt(3) * 1.01
    assert np.std(flat, ddof=1) == pytest.approx(abs(dRds) * 0.001, rel=0.03)


def test_monte_carlo_is_reproducible_and_refuses_zero_trials():
    sph = _three_ball()
    comps = [Component("s", 0.001)]
    assert np.array_equal(monte_carlo_radius(sph, "concave", 0.5, comps, n=1000, seed=7),
                          monte_carlo_radius(sph, "concave", 0.5, comps, n=1000, seed=7))
    with pytest.raises(UserError):
        monte_carlo_radius(sph, "concave", 0.5, comps, n=0)


def test_seatings_needed_hand_worked():
    # Source: hand-worked from GUM 4.2.3.  r = 40, s = 0.4: dR/ds = (0.16 - 1600)/0.32 = -4999.5;
    # scatter 0.002 gives 9.999 mm per seating; target 5, other 3: room 25 - 9 = 16;
    # n >= 9.999^2 / 16 = 6.249 -> 7.
    assert seatings_needed(5.0, 0.002, 0.4, 40.0, 3.0) == 7
    assert seatings_needed(5.0, 0.002, 0.4, 40.0, 5.0) is None
    # the zero seated as often with the same scatter doubles the Type A variance: n >= 12.497 -> 13
    assert seatings_needed(5.0, 0.002, 0.4, 40.0, 3.0, zero_factor=1.0) == 13
    assert seatings_needed(5.0, 0.0, 0.4, 40.0) == 1
    with pytest.raises(UserError):
        seatings_needed(0.0, 0.002, 0.4, 40.0)


@settings(max_examples=200, deadline=None)
@given(target=st.floats(0.1, 50.0), scatter=st.floats(1e-5, 0.01), other_frac=st.floats(0.0, 0.99))
def test_seatings_needed_is_the_least_that_works(target, scatter, other_frac):
    # Source: definition, u(R)^2 = (dR/ds s/sqrt(n))^2 + other^2 (GUM eq. 10 with 4.2.3).
    s, r = 0.4, 40.0
    other = other_frac * target
    n = seatings_needed(target, scatter, s, r, other)
    u = lambda k: math.hypot(geometry.dradius_dsagitta(s, r) * scatter / math.sqrt(k), other)  # noqa: E731
    assert u(n) <= target * (1 + 1e-9)
    assert n == 1 or u(n - 1) > target * (1 - 1e-9)


def test_legs_from_readings_share_the_ball_error_and_monte_carlo_agrees():
    # Legs measured outside-to-outside are reading - d: all three move with the ball diameter d.
    # The budget (central differences through the contact geometry) and a JCGM 101 Monte Carlo
    # that draws the readings and d independently must agree, and u(R) from the instrument must
    # exceed the value that treats legs and ball as independent (GUM 5.2: correlated inputs).
    from logger.config.profile import parse_profile

    def prof(sph):
        return parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "ball_diameter": 6.35, **sph},
                              "indicator": {"resolution": 0.001},
                              "uncertainty": {"leg_spacing": 0.01, "ball_diameter": 0.01, **NO_RIG}}, "t")

    reads = prof({"leg_readings": [76.37, 76.33, 76.36], "readings": "outside"}).spherometer
    centres = prof({"leg_spacings": [70.02, 69.98, 70.01]}).spherometer
    s = 0.34
    comps = [Component("seating scatter", 0.0003, kind="A")]  # normal: the comparison is about the legs
    b_reads = radius_budget(reads, "concave", s, comps)
    b_centres = radius_budget(centres, "concave", s, comps)
    assert b_reads.value == pytest.approx(b_centres.value, rel=1e-12)
    inst = lambda b: math.sqrt(sum(c.contribution ** 2 for c in b.components if c.kind == "B"))  # noqa: E731
    assert inst(b_reads) > 1.5 * inst(b_centres)
    draws = monte_carlo_radius(reads, "concave", s, comps, n=200_000, seed=3)
    assert float(np.std(draws)) == pytest.approx(b_reads.u_c, rel=0.03)


def _independent_monte_carlo(legs, ball_d, u_leg, u_ball, s, u_s, surface, n, seed):
    """JCGM 101:2008 written here, not logger's: each leg, the ball and the sagitta drawn normal
    (6.4.7) and pushed through the textbook relations: r = abc / sqrt((a+b+c)(-a+b+c)(a-b+c)(a+b-c))
    (circumradius from Heron) and R = (r^2 + s^2) / (2 s) +- d / 2 (feet: + concave, - convex)."""
    rng = np.random.default_rng(seed)
    a, b, c = (rng.normal(x, u_leg, n) for x in legs)
    d = rng.normal(ball_d, u_ball, n)
    sag = rng.normal(s, u_s, n)
    r = a * b * c / np.sqrt((a + b + c) * (-a + b + c) * (a - b + c) * (a + b - c))
    return (r * r + sag * sag) / (2 * sag) + (d / 2 if surface == "concave" else -d / 2)


@pytest.mark.parametrize("surface", ["concave", "convex"])
def test_monte_carlo_where_the_legs_dominate(surface):
    # Source: JCGM 101:2008, an independent Monte Carlo written in this test (above).  Caliper-measured
    # legs of u = 0.05 mm and a sagitta known to 0.1 um: the instrument's Type B terms carry almost
    # all of u_c, so leaving them out of the budget, or drawing them wrongly in the code's Monte Carlo,
    # shows.  With 400 000 trials the standard deviation is known to about 0.1 % (sd of a sample sd:
    # 1/sqrt(2 n)); the model is nearly linear here, so 1 % is an honest bound.
    legs, ball_d, u_leg, u_ball, s, u_s = (70.02, 69.98, 70.01), 6.35, 0.05, 0.02, 0.5, 0.0001
    sph = _three_ball(u_leg=u_leg, u_ball=u_ball)
    comps = [Component("sagitta", u_s)]
    ref = _independent_monte_carlo(legs, ball_d, u_leg, u_ball, s, u_s, surface, 400_000, seed=11)
    sagitta_only = _independent_monte_carlo(legs, ball_d, 0.0, 0.0, s, u_s, surface, 400_000, seed=12)
    assert np.std(sagitta_only) < 0.3 * np.std(ref)  # the legs dominate, by the test's own propagation
    b = radius_budget(sph, surface, s, comps)
    assert b.u_c == pytest.approx(float(np.std(ref, ddof=1)), rel=0.01)
    code_mc = monte_carlo_radius(sph, surface, s, comps, n=400_000, seed=13)
    assert float(np.std(code_mc, ddof=1)) == pytest.approx(float(np.std(ref, ddof=1)), rel=0.01)
    assert float(np.mean(code_mc)) == pytest.approx(float(np.mean(ref)), abs=0.02 * b.u_c)


def test_caliper_error_common_to_the_legs_is_correlated_in_budget_and_monte_carlo():
    # GUM 5.2: legs sharing one caliper error u_0 are correlated with r = u_0^2 / (u_0^2 + u_leg^2).
    # Rebuilt here with eq. 16, u_c^2 = sum_ij c_i c_j u_i u_j r_ij over the legs (sensitivities by
    # sympy on the textbook circumradius, Heron), and with a Monte Carlo written here that draws one
    # shared error for the three legs (JCGM 101 6.4.7); the code's budget and Monte Carlo must agree.
    u_leg, u0 = 0.01, 0.008
    sph = parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": [70.02, 69.98, 70.01],
                                                       "ball_diameter": 6.35}, "indicator": {"resolution": 0.001},
                         "uncertainty": {"leg_spacing": u_leg, "ball_diameter": 0, **NO_RIG, "caliper_common": u0}},
                        "t").spherometer
    s = 0.34
    b = radius_budget(sph, "concave", s, [])
    a_, b_, c_, s_ = sympy.symbols("a b c s", positive=True)
    r2 = (a_ * b_ * c_) ** 2 / ((a_ + b_ + c_) * (-a_ + b_ + c_) * (a_ - b_ + c_) * (a_ + b_ - c_))
    R = (r2 + s_**2) / (2 * s_)
    vals = {a_: 70.02, b_: 69.98, c_: 70.01, s_: s}
    cs = [float(sympy.diff(R, x).subs(vals)) for x in (a_, b_, c_)]
    ui = math.hypot(u_leg, u0)
    rho = u0**2 / ui**2
    u2 = sum(ci * cj * ui * ui * (1.0 if i == j else rho) for i, ci in enumerate(cs) for j, cj in enumerate(cs))
    assert b.u_c == pytest.approx(math.sqrt(u2), rel=1e-5)
    # independence would be wrong by a wide margin here (the legs' sensitivities share a sign)
    assert math.sqrt(sum((ci * ui) ** 2 for ci in cs)) < 0.8 * b.u_c
    draws = monte_carlo_radius(sph, "concave", s, [], n=200_000, seed=2)
    rng = np.random.default_rng(8)
    common = rng.normal(0, u0, 200_000)
    a, bb, c = (rng.normal(x, u_leg, 200_000) + common for x in (70.02, 69.98, 70.01))
    r = a * bb * c / np.sqrt((a + bb + c) * (-a + bb + c) * (a - bb + c) * (a + bb - c))
    ind = (r**2 + s**2) / (2 * s) + 6.35 / 2
    assert float(np.std(draws)) == pytest.approx(float(np.std(ind)), rel=0.02)
    assert float(np.std(draws)) == pytest.approx(b.u_c, rel=0.02)


def test_flat_and_indicator_bounds_enter_as_rectangles_on_the_sagitta():
    # GUM 4.3.7: a bound +-a read as a rectangle has u = a / sqrt(3); both shift the sagitta,
    # sensitivity dR/ds (textbook: R = (r^2 + s^2) / (2 s) + rho).
    sph = parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": [70.02, 69.98, 70.01],
                                                       "ball_diameter": 6.35}, "indicator": {"resolution": 0.001},
                         "uncertainty": {"leg_spacing": 0, "ball_diameter": 0, **NO_RIG,
                                         "flat_flatness": 0.001, "indicator_error": 0.002}}, "t").spherometer
    s = 0.34
    r = geometry.circumradius_mm(70.02, 69.98, 70.01)
    dRds = (s * s - r * r) / (2 * s * s)
    b = radius_budget(sph, "concave", s, [])
    assert b.u_c == pytest.approx(abs(dRds) * math.hypot(0.001, 0.002) / math.sqrt(3), rel=1e-9)
    draws = monte_carlo_radius(sph, "concave", s, [], n=200_000, seed=4)
    assert float(np.std(draws)) == pytest.approx(b.u_c, rel=0.02)


def test_coverage_interval_falls_back_when_draws_leave_every_sphere():
    # A sagitta of 0.002 mm with a 0.003 mm rectangular term: many draws are <= 0 and give no radius
    # (R = (r^2 + s^2) / (2 s) needs s > 0); the GUM's k u_c stands rather than an error.
    from logger.analysis.montecarlo import coverage_interval_U
    sph = _three_ball(0.0, 0.0)
    comps = [Component("step", 0.003, distribution="rectangular")]
    b = radius_budget(sph, "concave", 0.002, comps)
    assert coverage_interval_U(b, sph, "concave", 0.002, comps) == (b.U, "GUM k u_c")
