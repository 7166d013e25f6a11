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
    x, y, z = _sorted_down(*(np.asarray(v, dtype=float) for v in (a, b, c)))  # x >= y >= z
    if not np.all(np.isfinite((x, y, z))) or np.any(z <= 0):
        raise UserError(f"leg spacings must be positive numbers, got {a}, {b}, {c}")
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


def _sorted_down(a, b, c):
    """The three values largest first, element by element: a sorting network of maxima and minima.

    The same values as np.sort of the stacked arrays (each output is one of
    the inputs, no arithmetic), at a twentieth of the time for the Monte
    Carlo check's samples, which a sort along the stacking axis reads with a
    stride.  A NaN anywhere makes at least the largest NaN, which the caller rejects.
    """
    low, high = np.minimum(a, b), np.maximum(a, b)
    middle_or_low = np.minimum(high, c)
    return np.maximum(high, c), np.maximum(low, middle_or_low), np.minimum(low, middle_or_low)


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


def probe_sagitta_mm(radius_mm: float, ring_radius_mm: float, foot_radius_mm: float, surface: str,
                     probe_offset_mm: float = 0.0) -> float:
    """What the indicator reads (relative to the flat) on a sphere of radius R.

    Always positive: the magnitude of the probe's travel from the flat zero.
    A probe e off the axis reads sag(R, e) less (`_on_axis_radius` says why).
    """
    ball_sphere = _ball_sphere_mm(radius_mm, foot_radius_mm, surface)
    if ball_sphere <= 0:
        raise UserError(f"a concave radius of {radius_mm:g} mm is smaller than the foot radius")
    s = sagitta_of_sphere_mm(ball_sphere, ring_radius_mm)
    return s - sagitta_of_sphere_mm(radius_mm, probe_offset_mm) if probe_offset_mm > 0 else s


def radius_from_sagitta_mm(sagitta_mm, ring_radius_mm, foot_radius_mm, surface: str, probe_offset_mm=0.0):
    """Radius of curvature from the probe's sagitta (exact; s^2 term and feet kept).

    Floats or numpy arrays of samples (for the Monte Carlo check).  With
    `probe_offset_mm` e, the probe's known distance from the axis through the
    circumcentre of the ball centres, the reading is first made the on-axis
    one (`_on_axis_radius`).
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
    R = _on_axis_radius(s, r, rho, surface, np.asarray(probe_offset_mm, dtype=float))
    if np.any(R <= 0):
        raise UserError(
            f"sagitta {_show(sagitta_mm)} mm on a convex surface implies a radius no larger than the foot radius"
        )
    return _out(R)


def _on_axis_radius(s, r, rho, surface: str, e):
    """R from a reading s taken with the probe a distance e off the axis (e = 0: on it).

    The three ball centres lie on a sphere of radius R' = R -+ rho about the
    surface's centre, so the axis through that centre square to their plane
    passes through their circumcentre; a probe square to that plane but e off
    the axis meets the surface sag(R, e) = R - sqrt(R^2 - e^2) nearer the
    balls' plane than the vertex, on a concave and a convex surface alike.
    Hence the reading is s = sag(R', r) - sag(R, e) exactly (a point tip; a tip
    ball of radius t makes it sag(R -+ t, e), a change of e^2 t / (2 R^2): a
    fraction t / R of the correction, left out), and R solves
    R = R'(s + sag(R, e)) -+ rho.  That is a contraction with factor about
    e^2 / r^2, so a fixed-point iteration from the uncorrected R converges
    (to the last digits in a few steps for e under r / 2).
    """
    def from_on_axis(s_on_axis):
        ball_sphere = (r * r + s_on_axis * s_on_axis) / (2.0 * s_on_axis)
        return ball_sphere + rho if surface == "concave" else ball_sphere - rho

    R = from_on_axis(s)
    if not np.any(e > 0):
        return R
    if np.any(e >= r):
        raise UserError(f"a probe {_show(e)} mm off the axis is outside the ring of radius {_show(r)} mm")
    for _ in range(200):
        if np.any(R < e):
            raise UserError(f"sagitta {_show(s)} mm with the probe {_show(e)} mm off the axis gives no sphere")
        R_next = from_on_axis(s + e * e / (R + np.sqrt((R - e) * (R + e))))
        if np.all(np.abs(R_next - R) <= 1e-15 * np.abs(R_next)):
            return R_next
        R = R_next
    return R


def probe_offset_from_distances_mm(legs_mm, distances_mm):
    """How far the probe sits from the circumcentre of the ball centres, from its distances to them.

    Balls A, B, C with leg spacings a = |BC|, b = |CA|, c = |AB| (a faces
    ball A); distances d_A, d_B, d_C from the probe's tip to the ball centres,
    in their plane.  A at the origin, B at (c, 0), C at (x_C, y_C) by the law
    of cosines; the circumcentre at (c / 2, (b^2 - c x_C) / (2 y_C)).  The
    probe's position P satisfies |P - X|^2 = d_X^2 for each ball; subtracting
    the first equation from the other two leaves two linear ones (the radical
    centre of the three circles), exact for consistent distances and the
    point of equal power when three measured distances over-determine the two
    coordinates.  Floats or numpy arrays (the Monte Carlo check).
    """
    a, b, c = (np.asarray(v, dtype=float) for v in legs_mm)
    dA, dB, dC = (np.asarray(v, dtype=float) for v in distances_mm)
    xC = (b * b + c * c - a * a) / (2.0 * c)
    yC = np.sqrt(np.maximum(b * b - xC * xC, 0.0))
    if np.any(yC <= 0):
        raise UserError(f"leg spacings {_show(a)}, {_show(b)}, {_show(c)} make a degenerate (flat) triangle")
    x = (dA * dA - dB * dB + c * c) / (2.0 * c)
    y = (dA * dA - dC * dC + b * b - 2.0 * xC * x) / (2.0 * yC)
    return _out(np.hypot(x - c / 2.0, y - (b * b - c * xC) / (2.0 * yC)))


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
    h = diameter_mm / 2.0
    if radius_mm < h:  # said here: sagitta_of_sphere_mm would call D/2 a ring, which it is not
        raise UserError(f"a sphere of radius {radius_mm:g} mm cannot span an aperture of radius {h:g} mm, "
                        "half the diameter")
    return sagitta_of_sphere_mm(radius_mm, h)


def ring_radius_from_reference_mm(
    reference_radius_mm: float, sagitta_mm: float, foot_radius_mm: float, surface: str
) -> float:
    """The inverse: effective ring radius from a seating on a sphere of known radius.

    E.g. a precision steel ball (ISO 3290-1 grades; convex) or a test plate.
    From s = R' - sqrt(R'^2 - r^2): r^2 = s (2 R' - s), with R' = R -+ rho.
    """
    s = float(sagitta_mm)
    ball_sphere = _ball_sphere_mm(reference_radius_mm, foot_radius_mm, surface)
    if not (s > 0) or ball_sphere <= 0 or s >= ball_sphere:
        raise UserError(
            f"sagitta {sagitta_mm!r} mm cannot come from a {surface} reference of radius {reference_radius_mm!r} mm"
        )
    return math.sqrt(s * (2.0 * ball_sphere - s))


def _ball_sphere_mm(reference_radius_mm: float, foot_radius_mm: float, surface: str) -> float:
    """R' = R - rho (concave) or R + rho (convex): the sphere the ball centres lie on."""
    _check_surface(surface)
    return reference_radius_mm - foot_radius_mm if surface == "concave" else reference_radius_mm + foot_radius_mm


def ring_radius_sensitivities(reference_radius_mm: float, sagitta_mm: float, foot_radius_mm: float,
                              surface: str) -> dict:
    """dr/ds, dr/dR and dr/drho of r = sqrt(s (2 R' - s)), R' = R -+ rho (derivation in docs/measurement.md).

    dr/ds = (R' - s)/r, dr/dR = s/r, dr/drho = -s/r concave, +s/r convex.
    """
    r = ring_radius_from_reference_mm(reference_radius_mm, sagitta_mm, foot_radius_mm, surface)
    s = float(sagitta_mm)
    R_ball = _ball_sphere_mm(reference_radius_mm, foot_radius_mm, surface)
    return {"sagitta": (R_ball - s) / r, "reference_radius": s / r,
            "foot_radius": (-s if surface == "concave" else s) / r}


def pair_sagitta_sum_mm(radius_mm, contact_concave_mm, contact_convex_mm, probe_offset_mm=0.0):
    """s_cc + s_cv: the probe sagittas of a concave and a convex piece of one radius R.

    Each contact is (ring radius, foot radius) for that surface (a ring
    bears on its outer edge on the concave piece, on its inner edge on the
    convex one).  The ball centres lie on spheres of radius R - rho and
    R + rho; each sagitta is written r^2 / (R' + sqrt(R'^2 - r^2)) to avoid
    cancellation.  A probe a known e off the axis reads each piece sag(R, e)
    short (`_on_axis_radius`).  Floats or numpy arrays (the Monte Carlo check
    feeds it samples).
    """
    R = np.asarray(radius_mm, dtype=float)
    total = 0.0
    for (ring, foot), sign in ((contact_concave_mm, -1.0), (contact_convex_mm, +1.0)):
        r, X = np.asarray(ring, dtype=float), R + sign * np.asarray(foot, dtype=float)
        if np.any(X < r * (1 - 1e-12)):  # (a rounding below r at the bracket's end is r itself)
            raise UserError(f"a pair of radius {_show(radius_mm)} mm cannot carry the feet over a ring of radius "
                            f"{_show(ring)} mm")
        total = total + r * r / (X + np.sqrt(np.maximum((X - r) * (X + r), 0.0)))
    if probe_offset_mm > 0:
        e = probe_offset_mm
        total = total - 2.0 * e * e / (R + np.sqrt((R - e) * (R + e)))
    return _out(total)


def radius_from_pair_mm(sagitta_sum_mm: float, contact_concave_mm, contact_convex_mm,
                        probe_offset_mm: float = 0.0) -> float:
    """The one radius R of a concave and a convex piece whose sagittas add up to `sagitta_sum_mm`.

    s_cc + s_cv falls monotonically from its largest value, where the
    smallest sphere just carries the feet, towards 0 as R grows, so a
    bracketed root finder (Brent) finds R.  Upper bracket: each sagitta is
    below r^2 / R', so at R = rho + 2 r_max^2 / sum the total is below the target
    (the more so with the probe off the axis, which only takes from it).
    """
    from scipy.optimize import brentq

    total = float(sagitta_sum_mm)
    (r_cc, rho_cc), (r_cv, rho_cv) = contact_concave_mm, contact_convex_mm
    if not (math.isfinite(total) and total > 0):
        raise UserError(f"the pieces' sagittas must add up to a positive number, got {sagitta_sum_mm!r} mm")
    lo = max(r_cc + rho_cc, r_cv - rho_cv, rho_cv)
    contacts = (contact_concave_mm, contact_convex_mm, probe_offset_mm)
    if total >= pair_sagitta_sum_mm(lo, *contacts):
        raise UserError(f"sagittas adding up to {total:g} mm are too deep for a ring of radius {r_cc:g} mm: "
                        "no pair of one radius gives them")
    hi = lo + 2.0 * max(r_cc, r_cv) ** 2 / total
    return float(brentq(lambda R: pair_sagitta_sum_mm(R, *contacts) - total, lo, hi,
                        xtol=1e-13 * hi, rtol=1e-15, maxiter=200))


def dradius_dpair_sum(radius_mm: float, contact_concave_mm, contact_convex_mm) -> float:
    """dR/d(s_cc + s_cv) = 1 / (p'(R - rho) + p'(R + rho)), p'(X) = 1 - X / sqrt(X^2 - r^2); about -R^2 / r^2."""
    slope = 0.0
    for (r, rho), sign in ((contact_concave_mm, -1.0), (contact_convex_mm, +1.0)):
        X = radius_mm + sign * rho
        slope += 1.0 - X / math.sqrt(X * X - r * r)
    return 1.0 / slope
