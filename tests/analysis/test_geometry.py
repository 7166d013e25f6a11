"""Geometry against exact constructions, sympy and textbook relations."""

import math

import numpy as np
import pytest
import sympy
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from sympy.geometry import Triangle

from tests.helpers.exact_construction import ball_centres, probe_axis, ring_reading, three_ball_reading
from logger.analysis import geometry
from logger.errors import UserError
from logger.config.profile import parse_profile
from logger.units import to_mm

SURFACES = st.sampled_from(["concave", "convex"])


@st.composite
def triangles(draw, lo=20.0, hi=150.0):
    """Leg spacings of a triangle that is not too close to flat (any shape otherwise)."""
    a = draw(st.floats(lo, hi))
    b = draw(st.floats(lo, hi))
    c = draw(st.floats(abs(a - b) + 0.2 * min(a, b), a + b - 0.2 * min(a, b)))
    return a, b, c


def _profile_three_ball(legs, ball_d, unit):
    return parse_profile({"unit": unit, "spherometer": {"kind": "three-ball", "leg_spacings": list(legs),
                                                        "ball_diameter": ball_d},
                          "indicator": {"resolution": 0.001}}, "test")


@settings(max_examples=200, deadline=None)
@given(legs=triangles(), rho_frac=st.floats(0.0, 0.15), ratio=st.floats(1.05, 300.0), surface=SURFACES,
       unit=st.sampled_from(["mm", "in"]))
def test_three_ball_exact_construction(legs, rho_frac, ratio, surface, unit):
    # Source: exact construction (tests/helpers/exact_construction.py): balls placed on a sphere in 3-D,
    # reading taken where the probe axis meets the sphere.  Lengths drawn in the profile's unit.
    legs_u = [x / 25.4 for x in legs] if unit == "in" else list(legs)
    legs_mm = [to_mm(x, unit) for x in legs_u]
    ring_mm = float(np.linalg.norm(ball_centres(*legs_mm)[0, :2] - probe_axis(ball_centres(*legs_mm))))
    ball_d = 2 * rho_frac * min(legs_u) / 2
    prof = _profile_three_ball(legs_u, ball_d, unit)
    rho_mm = to_mm(ball_d, unit) / 2  # the foot radius is half the ball diameter given here (not the code's)
    r_mm, rho_code_mm = prof.contact_mm(surface)
    R_ball_sphere = ratio * ring_mm
    R_mm = R_ball_sphere + rho_mm if surface == "concave" else R_ball_sphere - rho_mm
    reading_mm = three_ball_reading(*legs_mm, rho_mm, R_mm, surface)
    assert rho_code_mm == pytest.approx(rho_mm, rel=1e-12)
    assert r_mm == pytest.approx(ring_mm, rel=1e-11)  # circumradius vs the constructed axis distance
    assert geometry.radius_from_sagitta_mm(reading_mm, r_mm, rho_mm, surface) == pytest.approx(R_mm, rel=1e-9)
    assert geometry.probe_sagitta_mm(R_mm, r_mm, rho_mm, surface) == pytest.approx(reading_mm, rel=1e-8)


@pytest.mark.parametrize("ball_d", [6.35, 3.0, 12.7])
def test_feet_sign_by_construction(ball_d):
    # Source: exact construction (balls of radius ball_d / 2 placed on a sphere in space).  A widely
    # copied source has the concave sign reversed (README.md; the derivation in logger/analysis/geometry.py):
    # with feet the concave radius is LARGER than the point-contact formula (r^2 + s^2) / (2 s), the
    # convex one SMALLER, both by exactly the foot radius.
    legs, R = (60.0, 60.0, 60.0), 1000.0
    rho = ball_d / 2  # from the ball diameter given to this test
    r = 60.0 / math.sqrt(3)  # equilateral triangle: circumradius a / sqrt(3) (textbook)
    for surface, sign in (("concave", +1), ("convex", -1)):
        s = three_ball_reading(*legs, rho, R, surface)
        point_contact = (r * r + s * s) / (2 * s)
        assert R - point_contact == pytest.approx(sign * rho, rel=1e-9)  # the construction itself
        assert geometry.radius_from_sagitta_mm(s, r, rho, surface) == pytest.approx(R, rel=1e-12)
        assert geometry.probe_sagitta_mm(R, r, rho, surface) == pytest.approx(s, rel=1e-10)
        prof = _profile_three_ball(legs, ball_d, "mm")  # the profile turns the diameter into this radius
        assert prof.contact_mm(surface) == pytest.approx((r, rho), rel=1e-14)


@st.composite
def rings(draw):
    outer = draw(st.floats(20.0, 200.0))
    inner = draw(st.floats(0.3 * outer, 0.95 * outer))
    e = draw(st.floats(0.0, 0.45)) * (outer - inner) / 2
    return inner, outer, e


@settings(max_examples=100, deadline=None)
@given(ring=rings(), ratio=st.floats(1.3, 200.0), surface=SURFACES, unit=st.sampled_from(["mm", "in"]))
def test_ring_exact_construction(ring, ratio, surface, unit):
    # Source: exact construction: the rounded ring is lowered onto the sphere and the first contact
    # found numerically; the trade fact (common practice) that a concave surface bears on the outer
    # edge and a convex one on the inner edge is what contact_mm must reproduce.
    inner, outer, e = (x / 25.4 for x in ring) if unit == "in" else ring
    prof = parse_profile({"unit": unit, "spherometer": {"kind": "ring", "inner_diameter": inner,
                                                        "outer_diameter": outer, "edge_radius": e},
                          "indicator": {"resolution": 0.001}}, "test")
    R_mm = ratio * to_mm(outer, unit) / 2
    reading_mm = ring_reading(to_mm(inner, unit), to_mm(outer, unit), to_mm(e, unit), R_mm, surface)
    assume(reading_mm > 1e-3 * to_mm(outer, unit) / 200)
    r_mm, rho_mm = prof.contact_mm(surface)
    assert geometry.radius_from_sagitta_mm(reading_mm, r_mm, rho_mm, surface) == pytest.approx(R_mm, rel=1e-6)


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 400), st.integers(1, 400), st.integers(1, 400))
def test_circumradius_vs_sympy(a, b, c):
    # Source: reference library, sympy.geometry.Triangle(sss=...).circumradius (exact arithmetic).
    x, y, z = sorted((a, b, c))
    if x + y <= z:
        with pytest.raises(UserError):
            geometry.circumradius_mm(a, b, c)
        return
    expected = float(Triangle(sss=(a, b, c)).circumradius.evalf(30))
    try:
        got = geometry.circumradius_mm(a, b, c)
    except UserError:  # only a nearly flat triangle may be refused
        assert (x + y - z) / z < 1e-8
        return
    assert got == pytest.approx(expected, rel=1e-12)


def test_circumradius_needle_triangle_vs_sympy():
    # Source: sympy exact; needle-like triangles where plain Heron, sqrt(k (k-a)(k-b)(k-c)) with
    # k = (a+b+c)/2, loses digits (Kahan, from memory): 1.6e-12, 4e-11, 3e-11 off on these three.  The
    # stable form keeps the result within a few units in the last place, so the bound is 1e-14.
    for a, b, c in ((100.0, 99.99, 0.02), (100.0, 99.9999, 0.0002), (100.0, 99.99999, 0.0001001)):
        exact = Triangle(sss=tuple(sympy.Rational(x) for x in (a, b, c)))  # Rational(float): its exact binary value
        expected = float(exact.circumradius.evalf(40))
        assert geometry.circumradius_mm(a, b, c) == pytest.approx(expected, rel=1e-14, abs=0)


@pytest.mark.parametrize("legs", [(1, 2, 3), (1, 1, 5), (0, 1, 1), (-1, 2, 2), (math.nan, 1, 1), (math.inf, 1, 1),
                                  (1.0, 1.0, 2.0 - 1e-14)])
def test_circumradius_refuses_impossible_or_flat(legs):
    # Source: triangle inequality (Euclid I.20); a (nearly) flat triangle has no usable circumcircle.
    with pytest.raises(UserError):
        geometry.circumradius_mm(*legs)


def test_circumradius_arrays_match_scalars():
    # Source: the scalar results (sympy-checked above) element by element.
    a = np.array([60.0, 70.0, 50.0])
    got = geometry.circumradius_mm(a, 65.0, 62.0)
    assert [float(x) for x in got] == [geometry.circumradius_mm(float(x), 65.0, 62.0) for x in a]


@settings(max_examples=100, deadline=None)
@given(R=st.floats(10.0, 1e5), frac=st.floats(0.01, 0.999))
def test_aperture_depth_vs_exact_sphere(R, frac):
    # Source: textbook sphere: the rim point (D/2, depth) lies on x^2 + (z - R)^2 = R^2, nearer root
    # (solved exactly by sympy).
    D = 2 * frac * R
    z, Rs, h = sympy.symbols("z R h", positive=True)
    roots = sympy.solve(sympy.Eq(h**2 + (z - Rs) ** 2, Rs**2), z)
    exact = min(float(rt.subs({Rs: sympy.Float(R, 30), h: sympy.Float(D / 2, 30)}).evalf(30)) for rt in roots)
    assert geometry.aperture_depth_mm(R, D) == pytest.approx(exact, rel=1e-10)


def test_aperture_depth_refuses_bad_diameter():
    with pytest.raises(UserError):
        geometry.aperture_depth_mm(1000.0, 0.0)
    with pytest.raises(UserError):
        geometry.aperture_depth_mm(1000.0, 2001.0)  # wider than the sphere


@settings(max_examples=50, deadline=None)
@given(R=st.floats(100.0, 1e5))
def test_focal_length_is_half_radius_by_ray_trace(R):
    # Source: textbook mirror relation R = 2f, confirmed by tracing a paraxial ray: a ray parallel to
    # the axis at height h hits the sphere, reflects about the normal, and crosses the axis.
    h = 1e-5 * R
    centre = np.array([0.0, R])  # mirror vertex at the origin, concave upward
    hit = np.array([h, R - math.sqrt(R * R - h * h)])
    n = (centre - hit) / np.linalg.norm(centre - hit)
    d = np.array([0.0, -1.0])
    out = d - 2 * np.dot(d, n) * n
    t = -hit[0] / out[0]
    focus_z = hit[1] + t * out[1]
    assert geometry.focal_length_mm(R) == pytest.approx(focus_z, rel=1e-8)
    assert geometry.radius_from_focal_length_mm(geometry.focal_length_mm(R)) == pytest.approx(R, rel=1e-15)
    # Focal ratio N = f / D (textbook definition).
    assert geometry.focal_ratio(R / 2, R / 10) == pytest.approx(5.0, rel=1e-15)
    with pytest.raises(UserError):
        geometry.focal_ratio(R / 2, 0.0)


def test_dradius_dsagitta_vs_sympy():
    # Source: sympy differentiation of R = (r^2 + s^2)/(2 s) +- rho (the relation in docs/measurement.md).
    s, r, rho = sympy.symbols("s r rho", positive=True)
    for sign in (+1, -1):
        dR = sympy.diff((r**2 + s**2) / (2 * s) + sign * rho, s)
        for sv, rv in ((0.5, 40.0), (0.01, 25.0), (3.0, 60.0)):
            expected = float(dR.subs({s: sv, r: rv, rho: 3.0}))
            assert geometry.dradius_dsagitta(sv, rv) == pytest.approx(expected, rel=1e-12)
            assert geometry.radius_per_count_mm(sv, rv, 0.001) == pytest.approx(abs(expected) * 0.001, rel=1e-12)


@settings(max_examples=100, deadline=None)
@given(legs=triangles(5.0, 30.0), ball_radius=st.floats(5.0, 60.0), surface=SURFACES)
def test_ring_radius_from_reference_sphere(legs, ball_radius, surface):
    # Source: exact construction on a reference sphere of known radius (e.g. a precision steel ball,
    # ISO 3290-1, convex; or a concave test plate).
    rho = 1.0
    r = float(np.linalg.norm(ball_centres(*legs)[0, :2] - probe_axis(ball_centres(*legs))))
    R = max(ball_radius, 1.2 * r + 2 * rho)
    s = three_ball_reading(*legs, rho, R, surface)
    assert geometry.ring_radius_from_reference_mm(R, s, rho, surface) == pytest.approx(r, rel=1e-8)


@pytest.mark.parametrize("s", [0.0, -0.1, math.nan, math.inf, 40.0, 41.0])
def test_radius_from_sagitta_refuses_impossible_readings(s):
    # Source: a sagitta must be positive and below the ring radius (beyond it no sphere seats the feet).
    with pytest.raises(UserError):
        geometry.radius_from_sagitta_mm(s, 40.0, 3.0, "concave")


def test_convex_radius_below_foot_radius_refused_and_bad_surface():
    # Source: exact relation; a convex sphere no larger than the feet cannot carry them.
    with pytest.raises(UserError):
        geometry.radius_from_sagitta_mm(39.0, 40.0, 50.0, "convex")
    with pytest.raises(UserError):
        geometry.radius_from_sagitta_mm(0.5, 40.0, 3.0, "flat")


@settings(max_examples=150, deadline=None)
@given(legs=triangles(), rho_frac=st.floats(0.0, 0.15), ratio=st.floats(1.2, 300.0), surface=SURFACES)
def test_ring_radius_and_sensitivities_vs_construction(legs, rho_frac, ratio, surface):
    # Source: exact construction (balls placed on a reference sphere in 3-D); the sensitivities
    # against central differences of the construction itself (reading -> r needs no formula of ours:
    # r is the constructed distance from the probe axis to a ball centre).
    r = float(np.linalg.norm(ball_centres(*legs)[0, :2] - probe_axis(ball_centres(*legs))))
    rho = 0.02 + rho_frac * min(legs) / 2  # away from 0: the rho difference below is central
    R = ratio * r + (rho if surface == "concave" else 0.0)
    s = three_ball_reading(*legs, rho, R, surface)
    assume(s > 1e-6 * r)
    assert geometry.ring_radius_from_reference_mm(R, s, rho, surface) == pytest.approx(r, rel=1e-7)
    sens = geometry.ring_radius_sensitivities(R, s, rho, surface)
    # dr/dR at fixed s and rho: how r must change to keep the same reading on a sphere of R + h.
    h = 1e-5 * R
    k = 1 + 1e-5  # scale all legs: r scales with them
    ds_dR = (three_ball_reading(*legs, rho, R + h, surface) - three_ball_reading(*legs, rho, R - h, surface)) / (2 * h)
    ds_dr = (three_ball_reading(*(x * k for x in legs), rho, R, surface)
             - three_ball_reading(*(x / k for x in legs), rho, R, surface)) / (r * (k - 1 / k))
    ds_drho = (three_ball_reading(*legs, rho + 0.01, R, surface) - three_ball_reading(*legs, rho - 0.01, R, surface)) / 0.02
    # implicit function theorem on s(r, R, rho) = s_measured
    assert sens["sagitta"] == pytest.approx(1 / ds_dr, rel=1e-3)
    assert sens["reference_radius"] == pytest.approx(-ds_dR / ds_dr, rel=1e-3, abs=1e-9)
    assert sens["foot_radius"] == pytest.approx(-ds_drho / ds_dr, rel=1e-3, abs=1e-9)


def test_ring_radius_sensitivities_vs_sympy():
    # Source: sympy differentiation of r = sqrt(s (2 (R -+ rho) - s)) (DESIGN.md relation).
    s, R, rho = sympy.symbols("s R rho", positive=True)
    for surface, sign in (("concave", -1), ("convex", +1)):
        r = sympy.sqrt(s * (2 * (R + sign * rho) - s))
        point = {s: 0.3, R: 2400.0, rho: 3.175}
        got = geometry.ring_radius_sensitivities(2400.0, 0.3, 3.175, surface)
        for key, sym in (("sagitta", s), ("reference_radius", R), ("foot_radius", rho)):
            assert got[key] == pytest.approx(float(sympy.diff(r, sym).subs(point)), rel=1e-12), (surface, key)


@settings(max_examples=150, deadline=None)
@given(legs=triangles(), rho_frac=st.floats(0.0, 0.15), ratio=st.floats(1.2, 300.0))
def test_pair_radius_vs_construction(legs, rho_frac, ratio):
    # Source: exact constructions of both pieces: the same spherometer seated on a concave and on a
    # convex sphere of one radius R; the two readings add up to what the pair relation inverts.
    r = float(np.linalg.norm(ball_centres(*legs)[0, :2] - probe_axis(ball_centres(*legs))))
    rho = rho_frac * min(legs) / 2
    R = ratio * r + rho
    total = three_ball_reading(*legs, rho, R, "concave") + three_ball_reading(*legs, rho, R, "convex")
    assume(total > 1e-7 * r)
    assert geometry.pair_sagitta_sum_mm(R, (r, rho), (r, rho)) == pytest.approx(total, rel=1e-8)
    assert geometry.radius_from_pair_mm(total, (r, rho), (r, rho)) == pytest.approx(R, rel=1e-7)
    # dR/dsum against a central difference of the construction (inverse function rule)
    h = 1e-6 * R
    dsum = sum(three_ball_reading(*legs, rho, R + h, f) - three_ball_reading(*legs, rho, R - h, f)
               for f in ("concave", "convex")) / (2 * h)
    assert geometry.dradius_dpair_sum(R, (r, rho), (r, rho)) == pytest.approx(1 / dsum, rel=1e-4)


def test_pair_signal_doubles():
    # Source: DESIGN.md / textbook sphere: s_cc + s_cv is about r^2 / R, twice one piece's r^2 / (2R).
    r, rho, R = 40.0, 3.0, 4000.0
    total = geometry.pair_sagitta_sum_mm(R, (r, rho), (r, rho))
    assert total == pytest.approx(r * r / R, rel=1e-3)
    assert geometry.dradius_dpair_sum(R, (r, rho), (r, rho)) == pytest.approx(-R * R / (r * r), rel=1e-3)


@pytest.mark.parametrize("total", [0.0, -0.1, math.nan, 64.0, 100.0])
def test_pair_radius_refuses_impossible_sums(total):
    # Source: the sum is positive and at most r + p(r + 2 rho) (the concave piece must carry the feet).
    with pytest.raises(UserError):
        geometry.radius_from_pair_mm(total, (40.0, 3.0), (40.0, 3.0))


@settings(max_examples=40, deadline=None)
@given(ring=rings(), ratio=st.floats(1.5, 100.0))
def test_pair_radius_on_a_ring_vs_construction(ring, ratio):
    # Source: exact construction: the rounded ring lowered onto a concave and onto a convex sphere of
    # one radius (it bears on different edges: common practice); the pair relation takes each contact.
    inner, outer, e = ring
    prof = parse_profile({"unit": "mm", "spherometer": {"kind": "ring", "inner_diameter": inner,
                                                        "outer_diameter": outer, "edge_radius": e},
                          "indicator": {"resolution": 0.001}}, "test")
    R = ratio * outer / 2
    total = ring_reading(inner, outer, e, R, "concave") + ring_reading(inner, outer, e, R, "convex")
    assume(total > 1e-5 * outer)
    got = geometry.radius_from_pair_mm(total, prof.contact_mm("concave"), prof.contact_mm("convex"))
    assert got == pytest.approx(R, rel=1e-5)
