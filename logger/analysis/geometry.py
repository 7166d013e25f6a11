"""Spherometer geometry: pure functions, every length in millimetres.

Derivation of the feet correction (the sign matters; docs/measurement.md has it in words).
Let the feet be balls of radius rho whose centres lie on a circle of radius r,
and let the probe sit on the axis.  On a flat the ball centres stand rho above
the surface, and the indicator is zeroed there.

* Concave surface of radius R: each ball touches the sphere from inside, so
  its centre is R - rho from the sphere's centre.  The ball centres therefore
  lie on a sphere of radius R' = R - rho, and the probe (on the axis, at the
  vertex) runs out by exactly the sagitta of that sphere over r:
  s = R' - sqrt(R'^2 - r^2), hence R = (r^2 + s^2) / (2 s) + rho.
* Convex surface: the ball centres are R + rho from the centre, R' = R + rho,
  the probe is pushed in by the sagitta of R', hence R = (r^2 + s^2)/(2 s) - rho.

A ring's rounded edge of radius e touches a sphere centred on the axis along
a circle, exactly like a ball of radius e centred on the edge's centre circle,
so rings use the same relation with rho = e.
"""

from __future__ import annotations

import math

import numpy as np

from logger.errors import UserError

SURFACES = ("concave", "convex")


def _check_surface(surface: str) -> None:
    if surface not in SURFACES:
        raise UserError(f"surface must be 'concave' or 'convex', not {surface!r}")


def circumradius_mm(a, b, c):
    """Radius of the circle through three points with side lengths a, b, c.

    r = abc / (4K) with the triangle's area K from Heron's formula, in the
    form that stays accurate for needle-shaped triangles (W. Kahan, 'Miscalculating
    Area and Angles of a Needle-like Triangle', 2014; from memory).
    Takes floats or numpy arrays (the Monte Carlo check feeds it samples);
    floats in give a float out.
    """
    sides = np.sort(np.stack(np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in (a, b, c)))), axis=0)[::-1]
    if not np.all(np.isfinite(sides)) or np.any(sides[2] <= 0):
        raise UserError(f"leg spacings must be positive numbers, got {a}, {b}, {c}")
    x, y, z = sides  # x >= y >= z
    if np.any(z - (x - y) <= 0):
        raise UserError(
            f"leg spacings {a}, {b}, {c} do not form a triangle "
            "(the longest is not shorter than the other two together)"
        )
    area4 = np.sqrt((x + (y + z)) * (z - (x - y)) * (z + (x - y)) * (x + (y - z)))
    # area4 is 4K.  Reject triangles so flat that the ring radius is meaningless.
    if np.any(area4 <= 1e-6 * x * x):  # height under 5e-7 of the longest side
        raise UserError(f"leg spacings {a}, {b}, {c} make a degenerate (flat) triangle")
    return _out(x * y * z / area4)


def _out(value):
    """A 0-d result as a plain float, an array as it is."""
    return float(value) if np.ndim(value) == 0 else value


def sagitta_of_sphere_mm(radius_mm: float, ring_radius_mm: float) -> float:
    """Height of the cap of a sphere of radius R over a circle of radius r.

    s = R - sqrt(R^2 - r^2), written as r^2 / (R + sqrt(R^2 - r^2)) to avoid
    cancellation when R >> r.
    """
    R, r = float(radius_mm), float(ring_radius_mm)
    if r <= 0 or R <= 0:
        raise UserError("radius and ring radius must be positive")
    if R < r:
        raise UserError(f"a sphere of radius {R:g} mm cannot span a ring of radius {r:g} mm")
    return r * r / (R + math.sqrt((R - r) * (R + r)))


def probe_sagitta_mm(radius_mm: float, ring_radius_mm: float, foot_radius_mm: float, surface: str) -> float:
    """What the indicator reads (relative to the flat) on a sphere of radius R.

    Always positive: the magnitude of the probe's travel from the flat zero.
    """
    _check_surface(surface)
    ball_sphere = radius_mm - foot_radius_mm if surface == "concave" else radius_mm + foot_radius_mm
    if ball_sphere <= 0:
        raise UserError(f"a concave radius of {radius_mm:g} mm is smaller than the foot radius")
    return sagitta_of_sphere_mm(ball_sphere, ring_radius_mm)


def radius_from_sagitta_mm(sagitta_mm, ring_radius_mm, foot_radius_mm, surface: str):
    """Radius of curvature from the probe's sagitta (exact; s^2 term and feet kept).

    Floats or numpy arrays of samples (for the Monte Carlo check).
    """
    _check_surface(surface)
    s, r, rho = (np.asarray(v, dtype=float) for v in (sagitta_mm, ring_radius_mm, foot_radius_mm))
    if not np.all(np.isfinite(s) & (s > 0)):
        raise UserError(f"sagitta must be a positive number, got {_show(sagitta_mm)}")
    if not np.all(r > 0):
        raise UserError(f"ring radius must be positive, got {_show(ring_radius_mm)}")
    if np.any(s >= r):
        raise UserError(
            f"sagitta {_show(sagitta_mm)} mm is at or beyond the ring radius {_show(ring_radius_mm)} mm: "
            "no sphere gives that reading"
        )
    ball_sphere = (r * r + s * s) / (2.0 * s)
    R = ball_sphere + rho if surface == "concave" else ball_sphere - rho
    if np.any(R <= 0):
        raise UserError(
            f"sagitta {_show(sagitta_mm)} mm on a convex surface implies a radius no larger than the foot radius"
        )
    return _out(R)


def _show(value) -> str:
    """A number for a message; for an array of samples, its range."""
    v = np.asarray(value, dtype=float)
    return f"{float(v):g}" if v.ndim == 0 else f"{v.min():g}..{v.max():g} (samples)"


def dradius_dsagitta(sagitta_mm: float, ring_radius_mm: float) -> float:
    """dR/ds = (s^2 - r^2) / (2 s^2): negative, about -r^2 / (2 s^2)."""
    s, r = float(sagitta_mm), float(ring_radius_mm)
    return (s * s - r * r) / (2.0 * s * s)


def radius_per_count_mm(sagitta_mm: float, ring_radius_mm: float, count_mm: float) -> float:
    """How far R moves for one indicator count at this sagitta (linearised, |dR/ds| q)."""
    return abs(dradius_dsagitta(sagitta_mm, ring_radius_mm)) * count_mm


def focal_length_mm(radius_mm: float) -> float:
    """Paraxial focal length of a spherical mirror, f = R / 2 (textbook mirror relation)."""
    return radius_mm / 2.0


def radius_from_focal_length_mm(focal_length_mm_: float) -> float:
    return 2.0 * focal_length_mm_


def focal_ratio(focal_length_mm_: float, diameter_mm: float) -> float:
    """N = f / D."""
    if diameter_mm <= 0:
        raise UserError(f"diameter must be positive, got {diameter_mm!r}")
    return focal_length_mm_ / diameter_mm


def aperture_depth_mm(radius_mm: float, diameter_mm: float) -> float:
    """Depth of the curve over the full aperture D: R - sqrt(R^2 - (D/2)^2)."""
    if diameter_mm <= 0:
        raise UserError(f"diameter must be positive, got {diameter_mm!r}")
    return sagitta_of_sphere_mm(radius_mm, diameter_mm / 2.0)


def ring_radius_from_reference_mm(
    reference_radius_mm: float, sagitta_mm: float, foot_radius_mm: float, surface: str
) -> float:
    """The inverse: effective ring radius from a seating on a sphere of known radius.

    E.g. a precision steel ball (ISO 3290-1 grades; convex) or a test plate.
    From s = R' - sqrt(R'^2 - r^2): r^2 = s (2 R' - s), with R' = R -+ rho.
    """
    _check_surface(surface)
    s = float(sagitta_mm)
    ball_sphere = reference_radius_mm - foot_radius_mm if surface == "concave" else reference_radius_mm + foot_radius_mm
    if not (s > 0) or ball_sphere <= 0 or s >= ball_sphere:
        raise UserError(
            f"sagitta {sagitta_mm!r} mm cannot come from a {surface} reference of radius {reference_radius_mm!r} mm"
        )
    return math.sqrt(s * (2.0 * ball_sphere - s))
