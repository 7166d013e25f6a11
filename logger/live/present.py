"""Human-readable text of a run's result, in the profile's unit (files stay in mm)."""

from __future__ import annotations

from logger.units import from_mm
from logger.words import plural


def length_text(x_mm, unit: str, digits: int = 4) -> str:
    """`0.3403 mm`; a value that rounds to zero shows as 0 without a sign (never -0.0000)."""
    if x_mm is None:
        return "not estimable"
    d = digits + 1 if unit == "in" else digits
    return f"{from_mm(x_mm, unit) + 0.0:.{d}f} {unit}".replace(f"-{0:.{d}f} ", f"{0:.{d}f} ")


def to_go(summary: dict, key: str) -> float | None:
    """A `*_to_go_mm` of the summary as shown beside `to_go_words`: without its sign once past the target."""
    x = summary.get(key)
    return abs(x) if x is not None and past_target(summary) else x


def past_target(summary: dict) -> bool:
    """Ground past the target radius (radius_to_go_mm < 0; the sagitta's and the depth's go with it)."""
    x = summary.get("radius_to_go_mm")
    return x is not None and x < 0


def to_go_words(summary: dict) -> tuple[str, str]:
    """What the radius and sagitta beside it are, and what the depth is: ahead of the target or past it."""
    if past_target(summary):
        return "past the target by", "depth ground past the target"
    return "still to go", "depth still to grind"


def bad_lines_words(bad, lines) -> str:
    """The summary's line counts in words: '1 bad line of 601', '0 bad lines of 1146' (either may be 'n/a')."""
    return f"{bad} bad {plural(bad, 'line')} of {lines}"


def result_lines(summary: dict) -> list[str]:
    """The few lines a person wants at the end of a run."""
    unit = summary.get("unit") or "mm"
    out = [f"{summary.get('status')}: {summary.get('message')}"]
    out.append(
        f"seatings: {summary.get('seatings_flat', 0)} flat, {summary.get('seatings_surface', 0)} surface accepted, "
        f"{summary.get('seatings_rejected', 0)} rejected; "
        f"{bad_lines_words(summary.get('bad_lines', 0), summary.get('lines', 0))}"
    )
    if summary.get("zero_mm") is not None:
        drift = summary.get("drift_mm_per_min") or 0.0
        out.append(f"zero: {length_text(summary['zero_mm'], unit)}  drift {from_mm(drift, unit) * 1000:.2f} "
                   f"{'thou' if unit == 'in' else 'um'}/min ({summary.get('drift_model')})")
    if summary.get("sagitta_mm") is not None:
        u = summary.get("sagitta_u_mm")
        u_txt = f" +- {length_text(u, unit, 5)} (standard)" if u is not None else " (uncertainty not estimable)"
        out.append(f"surface: {summary.get('surface')}  sagitta {length_text(summary['sagitta_mm'], unit, 5)}{u_txt}")
    if summary.get("radius_mm") is not None:
        U = summary.get("radius_U_mm")
        U_txt = (f" +- {length_text(U, unit, 1)} (expanded, k = {summary.get('coverage_factor'):.2f}, ~95 %)"
                 if U is not None else " (uncertainty not estimable)")
        out.append(f"radius of curvature: {length_text(summary['radius_mm'], unit, 1)}{U_txt}")
        out.append(f"focal length: {length_text(summary['focal_length_mm'], unit, 1)}"
                   + (f"  focal ratio f/{summary['focal_ratio']:.2f}" if summary.get("focal_ratio") else ""))
    if summary.get("flat_error_mm") is not None:  # a mirror against its tool, with a flat
        out.append(f"each piece on the flat: concave {length_text(summary.get('concave_radius_mm'), unit, 1)}, "
                   f"convex {length_text(summary.get('convex_radius_mm'), unit, 1)}; the flat bulges by "
                   f"{length_text(summary['flat_error_mm'], unit, 5)} +- "
                   f"{length_text(summary['flat_error_u_mm'], unit, 5)} over the ring (standard; negative: hollow)")
    if summary.get("calibration_note"):
        out.append(f"calibration: {summary['calibration_note']}")
    words, depth_words = to_go_words(summary)
    if summary.get("target_radius_mm") is not None and summary.get("radius_to_go_mm") is not None:
        out.append(f"target radius {length_text(summary['target_radius_mm'], unit, 1)}: "
                   f"radius {words} {length_text(to_go(summary, 'radius_to_go_mm'), unit, 1)}, "
                   f"sagitta {words} {length_text(to_go(summary, 'sagitta_to_go_mm'), unit, 5)}")
    if summary.get("depth_to_go_mm") is not None:  # in the panel's words (logger/live/panel.py)
        out.append(f"{depth_words}: {length_text(to_go(summary, 'depth_to_go_mm'), unit, 4)} +- "
                   f"{length_text(summary.get('depth_to_go_U_mm'), unit, 4)} at the centre (sphere)")
    return out
