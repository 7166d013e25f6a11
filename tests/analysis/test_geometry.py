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
    r_mm, rho_mm = prof.contact_mm(surface)
    R_ball_sphere = ratio * ring_mm
    R_mm = R_ball_sphere + rho_mm if surface == "concave" else R_ball_sphere - rho_mm
    reading_mm = three_ball_reading(*legs_mm, rho_mm, R_mm, surface)
    assert r_mm == pytest.approx(ring_mm, rel=1e-11)  # circumradius vs the constructed axis distance
    assert geometry.radius_from_sagitta_mm(reading_mm, r_mm, rho_mm, surface) == pytest.approx(R_mm, rel=1e-9)
    assert geometry.probe_sagitta_mm(R_mm, r_mm, rho_mm, surface) == pytest.approx(reading_mm, rel=1e-8)


def test_feet_sign_by_construction():
    # Source: exact construction.  A widely copied source has the concave sign reversed (README.md):
    # with feet the concave radius is LARGER than the point-contact formula, the convex one SMALLER.
    legs, rho, R = (60.0, 60.0, 60.0), 3.0, 1000.0
    r = geometry.circumradius_mm(*legs)
    for surface, sign in (("concave", +1), ("convex", -1)):
        s = three_ball_reading(*legs, rho, R, surface)
        point_contact = (r * r + s * s) / (2 * s)
        assert R - point_contact == pytest.approx(sign * rho, rel=1e-9)


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
    # Source: sympy exact; a needle-like triangle where naive Heron loses digits (Kahan, from memory).
    a, b, c = 100.0, 99.99, 0.02  # sympy.Rational of a float is its exact binary value
    expected = float(Triangle(sss=tuple(sympy.Rational(x) for x in (a, b, c))).circumradius.evalf(40))
    assert geometry.circumradius_mm(a, b, c) == pytest.approx(expected, rel=1e-9)


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
