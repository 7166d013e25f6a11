"""Exact constructions of a spherometer seated on a sphere, written for the tests.

Nothing here uses logger's formulas: the ball centres are placed in space
from the leg lengths (law of cosines), the probe axis is found by solving
for the point equidistant from the three centres, the sphere's centre is
placed where every ball touches it, and the reading is where the probe's
axis meets the sphere, relative to where it met a flat.  For rings, the
ring's rounded bottom is lowered onto the sphere and the first contact is
found by a numerical maximisation over the ring's cross-section.  All lengths
in one unit (whatever the caller uses).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import minimize_scalar


def ball_centres(a: float, b: float, c: float) -> np.ndarray:
    """Three points in the plane z = 0 with |P2P3| = a, |P1P3| = b, |P1P2| = c."""
    x3 = (b * b + c * c - a * a) / (2.0 * c)
    y3 = math.sqrt(b * b - x3 * x3)
    return np.array([[0.0, 0.0, 0.0], [c, 0.0, 0.0], [x3, y3, 0.0]])


def probe_axis(P: np.ndarray) -> np.ndarray:
    """The (x, y) point equidistant from the three ball centres: where the probe sits."""
    A = 2.0 * (P[1:, :2] - P[0, :2])
    rhs = (P[1:, :2] ** 2).sum(axis=1) - (P[0, :2] ** 2).sum()
    return np.linalg.solve(A, rhs)


def three_ball_reading(a: float, b: float, c: float, foot_radius: float, R: float, surface: str) -> float:
    """The probe's travel from the flat zero when the balls rest on a sphere of radius R.

    On the flat the balls stand foot_radius above it, so the tip is at
    z = -foot_radius.  On a sphere each ball touches it: its centre is
    R - rho (concave, sphere's centre above) or R + rho (convex, below) from
    the sphere's centre.
    """
    P = ball_centres(a, b, c)
    O = probe_axis(P)
    d2 = float(((P[0, :2] - O) ** 2).sum())
    if surface == "concave":
        Rb = R - foot_radius
        C = np.array([O[0], O[1], math.sqrt(Rb * Rb - d2)])
    else:
        Rb = R + foot_radius
        C = np.array([O[0], O[1], -math.sqrt(Rb * Rb - d2)])
    dist = np.linalg.norm(P - C, axis=1)
    assert np.allclose(dist, Rb, rtol=1e-12, atol=0), "construction: a ball does not touch the sphere"
    if surface == "concave":
        tip_z = C[2] - R  # the bowl's bottom, straight below the centre on the axis
        return float(-foot_radius - tip_z)  # spindle runs out
    tip_z = C[2] + R  # the dome's top
    return float(tip_z + foot_radius)  # spindle pushed in


def _arc_lift(surface_z, centre_rho: float, e: float, outward: bool) -> float:
    """max over a quarter-circle bottom edge of (surface height - edge height)."""
    sign = 1.0 if outward else -1.0

    def minus_gap(theta):
        rho = centre_rho + sign * e * math.sin(theta)
        return -(surface_z(rho) - (e - e * math.cos(theta)))

    ends = [-minus_gap(0.0), -minus_gap(math.pi / 2)]
    if e == 0:
        return ends[0]
    best = minimize_scalar(minus_gap, bounds=(0.0, math.pi / 2), method="bounded", options={"xatol": 1e-12})
    return max(ends + [-best.fun])


def ring_reading(inner_d: float, outer_d: float, e: float, R: float, surface: str) -> float:
    """Lower a ring (flat bottom with both edges rounded to radius e) onto a sphere; return the probe's travel.

    The sphere's vertex is at height 0 on the axis; the ring's bottom plane
    starts at height H where its first point touches, H being the largest
    (surface - ring profile) over the cross-section.  On the flat, H = 0 and
    the tip is level with the bottom, so the travel is |H|.
    """
    if surface == "concave":
        surface_z = lambda rho: R - math.sqrt(R * R - rho * rho)  # noqa: E731
    else:
        surface_z = lambda rho: math.sqrt(R * R - rho * rho) - R  # noqa: E731
    inner_c, outer_c = inner_d / 2 + e, outer_d / 2 - e
    H = max(
        _arc_lift(surface_z, outer_c, e, outward=True),
        _arc_lift(surface_z, inner_c, e, outward=False),
        surface_z(inner_c),  # the flat part's two ends (the surface is monotonic across it)
        surface_z(outer_c),
    )
    return abs(H)


def reading_off_axis(R: float, r: float, rho: float, e: float) -> float:
    """Concave sphere R, balls of radius rho with centres a distance r from the axis, the probe e off it.

    Vertex at the origin, the sphere's centre at (0, 0, R): the ball centres lie on the sphere of
    radius R - rho, at height R - sqrt((R - rho)^2 - r^2); their bottoms rho lower are where the tip
    stood on the flat.  The tip now touches the sphere at height R - sqrt(R^2 - e^2).
    """
    centres = R - math.sqrt((R - rho) ** 2 - r * r)
    tip = R - math.sqrt(R * R - e * e)
    return (centres - rho) - tip


def three_ball_reading_probe_off(a: float, b: float, c: float, foot_radius: float, R: float, surface: str,
                                 offset_xy) -> tuple[float, np.ndarray]:
    """The reading with the probe's tip moved `offset_xy` (in the balls' plane) from the circumcentre,
    and the tip's distances to the three ball centres (in that plane).

    Built as `three_ball_reading`: the sphere's centre C straight above (concave) or below (convex)
    the circumcentre, where every ball touches it; the probe's line, square to the balls' plane
    through Q, meets the sphere at z = C_z -+ sqrt(R^2 - |Q - O|^2) (the near branch).
    """
    P = ball_centres(a, b, c)
    O = probe_axis(P)
    Q = O + np.asarray(offset_xy, dtype=float)
    d2 = float(((P[0, :2] - O) ** 2).sum())
    q2 = float(((Q - O) ** 2).sum())
    if surface == "concave":
        Cz = math.sqrt((R - foot_radius) ** 2 - d2)
        reading = -foot_radius - (Cz - math.sqrt(R * R - q2))
    else:
        Cz = -math.sqrt((R + foot_radius) ** 2 - d2)
        reading = Cz + math.sqrt(R * R - q2) + foot_radius
    return reading, np.linalg.norm(P[:, :2] - Q, axis=1)
