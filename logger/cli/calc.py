"""Commands that compute without a device: `radius`, `plan` and `new-profile`.

They are thin: read options in the profile's unit, convert to millimetres,
call geometry/uncertainty, convert back.  Every problem the user can cause
becomes a UserError naming the option or file.
"""

from __future__ import annotations

import json
from datetime import datetime, timezone
from pathlib import Path

import click

from logger.cli.options import NON_NEGATIVE, POSITIVE, profile_option
from logger.analysis import geometry
from logger.errors import UserError, already_exists
from logger.config.profile import DEFAULT_U_MM, SENSES, load_profile, parse_profile
from logger.run.writer import write_atomic
from logger.analysis.uncertainty import (Component, radius_budget, reading_components, seatings_needed,
                                         systematic_components)
from logger.units import UNITS, from_mm, to_mm
from logger.words import plain_number


def _echo_json(data: dict) -> None:
    click.echo(json.dumps(data, indent=2, allow_nan=False))


@click.command("radius")
@profile_option
@click.option("--sagitta", type=POSITIVE, required=True, help="Reading relative to the flat zero, in the profile's unit.")
@click.option("--surface", type=click.Choice(geometry.SURFACES), default="concave", show_default=True)
@click.option("--scatter", type=NON_NEGATIVE, help="Standard deviation of single seatings (profile's unit): adds a budget.")
@click.option("--mean-of", "mean_of", type=int, metavar="N",
              help="The sagitta is the mean of N seatings (with --scatter).")
@click.option("--seatings", "old_seatings", type=int, hidden=True)
@click.option("--zero-u", type=NON_NEGATIVE, help="Standard uncertainty of the zero (profile's unit), if known.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON for scripts.")
def radius(profile_path, sagitta, surface, scatter, mean_of, old_seatings, zero_u, as_json):
    """Radius of curvature and focal length from one sagitta (feet correction included; the probe's offset
    too when the profile gives its distances to the balls)."""
    if old_seatings is not None:  # capture's stop-after-N; here the count of a mean has its own name
        raise UserError(f"--seatings {old_seatings}: radius takes --mean-of {old_seatings} "
                        "(the sagitta is the mean of that many seatings)")
    profile = load_profile(profile_path)
    unit = profile.unit
    if (scatter is None) != (mean_of is None):
        raise UserError("--scatter and --mean-of go together: give both or neither")
    if mean_of is not None and mean_of < 2:
        raise UserError(f"--mean-of: a scatter needs at least 2 seatings, got {mean_of}")
    s_mm = to_mm(sagitta, unit)
    ring_mm, foot_mm = profile.contact_mm(surface)
    try:
        R_mm = profile.spherometer.radius_mm(s_mm, surface)
    except UserError as exc:
        raise UserError(f"--sagitta {sagitta:g} {unit}: {exc}") from None
    q_mm = profile.indicator.resolution_mm
    comps = reading_components(q_mm, None if scatter is None else to_mm(scatter, unit), mean_of)
    if zero_u is not None:
        comps.append(Component("zero (flat seatings)", to_mm(zero_u, unit)))
    budget = radius_budget(profile.spherometer, surface, s_mm, comps)
    out = {
        "radius": from_mm(R_mm, unit),
        "focal_length": from_mm(geometry.focal_length_mm(R_mm), unit),
        "unit": unit,
        "surface": surface,
        "sagitta": sagitta,
        "ring_radius": from_mm(ring_mm, unit),
        "foot_radius": from_mm(foot_mm, unit),
    }
    if scatter is not None or zero_u is not None:
        out.update(radius_u=from_mm(budget.u_c, unit), radius_U=from_mm(budget.U, unit), budget=budget.as_dict(unit))
    if as_json:
        _echo_json(out)
        return
    sign = "+" if surface == "concave" else "-"
    click.echo(f"radius of curvature  {out['radius']:.7g} {unit}  ({surface}; feet {sign}{out['foot_radius']:.6g} {unit} included)")
    click.echo(f"focal length         {out['focal_length']:.7g} {unit}")
    if "budget" in out:
        click.echo(f"radius               {out['radius']:.7g} +- {out['radius_U']:.3g} {unit} (U, k = {budget.k:.2f})")
        click.echo("")
        click.echo(budget.table(unit))


@click.command("plan")
@profile_option
@click.option("--diameter", type=POSITIVE, required=True, help="Mirror diameter D, in the profile's unit.")
@click.option("--focal-ratio", type=POSITIVE, help="Wanted focal ratio N = f / D.")
@click.option("--focal-length", type=POSITIVE, help="Wanted focal length f, in the profile's unit.")
@click.option("--scatter", type=NON_NEGATIVE, help="Standard deviation of single seatings (profile's unit).")
@click.option("--radius-u", type=POSITIVE, help="Wanted standard uncertainty (k = 1) of the radius (profile's unit).")
@click.option("--json", "as_json", is_flag=True, help="Print JSON for scripts.")
def plan(profile_path, diameter, focal_ratio, focal_length, scatter, radius_u, as_json):
    """What to grind for a wanted focal length: target radius, readings, depth, resolution."""
    profile = load_profile(profile_path)
    unit = profile.unit
    if (focal_ratio is None) == (focal_length is None):
        raise UserError("give exactly one of --focal-ratio and --focal-length")
    if (scatter is None) != (radius_u is None):
        raise UserError("--scatter and --radius-u go together: give both or neither")
    D_mm = to_mm(diameter, unit)
    f_mm = to_mm(focal_length, unit) if focal_length is not None else focal_ratio * D_mm
    R_mm = geometry.radius_from_focal_length_mm(f_mm)
    target = "--focal-ratio" if focal_ratio is not None else "--focal-length"
    try:
        depth_mm = geometry.aperture_depth_mm(R_mm, D_mm)
    except UserError as exc:
        raise UserError(f"--diameter {diameter:g} {unit}: too large for the target radius ({exc})") from None
    ring_cc = profile.contact_mm("concave")[0]
    try:
        s_mm = profile.spherometer.reading_mm(R_mm, "concave")
        tool_mm = profile.spherometer.reading_mm(R_mm, "convex")
    except UserError as exc:
        raise UserError(f"{target}: the target radius is too short for this spherometer ({exc})") from None
    q_mm = profile.indicator.resolution_mm
    out = {
        "target_radius": from_mm(R_mm, unit),
        "target_sagitta": from_mm(s_mm, unit),
        "aperture_sagitta": from_mm(depth_mm, unit),
        "radius_per_count": from_mm(geometry.radius_per_count_mm(s_mm, ring_cc, q_mm), unit),
        "tool_sagitta": from_mm(tool_mm, unit),
        "focal_length": from_mm(f_mm, unit),
        "focal_ratio": f_mm / D_mm,
        "diameter": diameter,
        "resolution": from_mm(q_mm, unit),
        "rig_terms": _rig_terms(profile, s_mm, R_mm),
        "unit": unit,
    }
    if scatter is not None:
        scatter_mm = to_mm(scatter, unit)
        # Every term but the scatter of the mean: the step terms, dithered by that scatter.
        other_terms = [c for c in reading_components(q_mm, scatter_mm, 2) if c.kind == "B"]
        other = radius_budget(profile.spherometer, "concave", s_mm, other_terms)
        out["radius_u_without_scatter"] = from_mm(other.u_c, unit)
        # as many seatings on the flat as on the surface, same scatter: the zero's Type A term equals the surface's
        out["seatings_needed"] = seatings_needed(to_mm(radius_u, unit), scatter_mm, s_mm, ring_cc, other.u_c,
                                                 zero_factor=1.0)
    if as_json:
        _echo_json(out)
        return
    g = lambda key: f"{plain_number(out[key])} {unit}"  # noqa: E731 - an inch count: 0.00005 in, not 5e-05 in
    click.echo(f"target: R = {g('target_radius')}, f = {g('focal_length')} "
               f"(f/{out['focal_ratio']:.4g} over {g('diameter')})")
    click.echo(f"depth of the curve over the aperture: {g('aperture_sagitta')}")
    click.echo(f"this spherometer reads {g('target_sagitta')} on the mirror (concave)"
               f" and {g('tool_sagitta')} on the matching convex tool")
    click.echo(f"one indicator count ({g('resolution')}) moves R by {g('radius_per_count')} at the target")
    if out["rig_terms"]:
        click.echo("the rig's other sources, u(R) at the target: " + ", ".join(
            f"{name} {plain_number(v, 3)} {unit}" for name, v in out["rig_terms"].items())
            + " ([uncertainty] in the profile)")
    if scatter is not None:
        n = out["seatings_needed"]
        want = f"u(R) = {plain_number(radius_u)} {unit} with {plain_number(scatter)} {unit} scatter"
        if n is None:
            click.echo(f"{want}: not reachable; resolution, spherometer and rig terms alone give u(R) = "
                       f"{g('radius_u_without_scatter')}")
        else:
            click.echo(f"seatings needed for {want}: {n} on the mirror and {n} on the flat")


def _rig_terms(profile, s_mm: float, R_mm: float) -> dict:
    """Each of the rig's other sources as its share of u(R) at the target, in the profile's unit."""
    sph = profile.spherometer
    comps = systematic_components(sph, "concave", lambda params: sph.radius_mm(s_mm, "concave", params), R_mm,
                                  geometry.dradius_dsagitta(s_mm, sph.contact_mm("concave")[0]))
    return {c.name: from_mm(c.contribution, profile.unit) for c in comps}


def toml_value(value) -> str:
    if isinstance(value, str):
        return json.dumps(value)  # a JSON string is a valid TOML basic string
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return repr(float(value))


def profile_text(data: dict, comment: str) -> str:
    """A profile's TOML text: the top-level keys, [spherometer], [indicator], and the default uncertainties."""
    lines = [f"# {line}" for line in comment.splitlines()]
    for key in ("name", "unit"):
        if key in data:
            lines.append(f"{key} = {toml_value(data[key])}")
    for table in ("spherometer", "indicator", "uncertainty"):
        if table in data:
            lines += ["", f"[{table}]"] + [f"{k} = {toml_value(v)}" for k, v in data[table].items()]
    if "uncertainty" not in data:
        lines += ["", "# Standard uncertainties (k = 1) in this file's unit; these are the defaults."]
        lines += ["# [uncertainty]"] + [f"# {k} = {from_mm(v, data['unit']):.4g}" for k, v in DEFAULT_U_MM.items()]
    return "\n".join(lines) + "\n"


@click.command("new-profile")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False), metavar="FILE.toml",
              help="The profile file to write (TOML).")
@click.option("--unit", required=True, type=click.Choice(UNITS), help="Unit of every length given here and in the file.")
@click.option("--outside", type=POSITIVE, nargs=3, help="Caliper readings outside-to-outside of each pair of balls.")
@click.option("--inside", type=POSITIVE, nargs=3, help="Caliper readings inside-to-inside of each pair of balls.")
@click.option("--leg-spacings", "--centres", "centres", type=POSITIVE, nargs=3, metavar="A B C",
              help="The leg spacings: centre-to-centre distances of the balls (the profile's leg_spacings).")
@click.option("--ball", type=POSITIVE, help="Ball diameter (three-ball; optional for --ring-radius).")
@click.option("--probe-distances", type=POSITIVE, nargs=3, metavar="DA DB DC",
              help="Three-ball, optional: the probe tip's distances to the centres of balls A, B, C (ball A faces "
                   "leg spacing a), in the balls' plane; the radius is then corrected for the probe's offset "
                   "from the centre.")
@click.option("--ring-inner", type=POSITIVE, help="Ring spherometer: inner diameter of the ring.")
@click.option("--ring-outer", type=POSITIVE, help="Ring spherometer: outer diameter of the ring.")
@click.option("--edge-radius", type=NON_NEGATIVE, help="Ring spherometer: radius of the rounded edges (default 0).")
@click.option("--ring-radius", type=POSITIVE, help="A calibrated ring radius (e.g. from a reference sphere).")
@click.option("--resolution", type=POSITIVE, required=True, help="One indicator count, in --unit.")
@click.option("--sense", type=click.Choice(SENSES), default="in-positive", show_default=True)
@click.option("--indicator-unit", type=click.Choice(UNITS), help="Unit of stream lines that carry none (default: --unit).")
@click.option("--name", default="", help="A label for the instrument.")
@click.option("--force", is_flag=True, help="Replace FILE.toml if it exists.")
def new_profile(out_path, unit, outside, inside, centres, ball, probe_distances, ring_inner, ring_outer, edge_radius,
                ring_radius, resolution, sense, indicator_unit, name, force):
    """Write a spherometer profile from caliper readings.

    Outside-to-outside of two balls is the centre distance plus one ball
    diameter; inside-to-inside is the centre distance minus one (common practice).
    """
    out = Path(out_path)
    readings = {k: v for k, v in (("--outside", outside), ("--inside", inside), ("--leg-spacings", centres)) if v}
    ring_opts = {k: v for k, v in (("--ring-inner", ring_inner), ("--ring-outer", ring_outer),
                                   ("--edge-radius", edge_radius)) if v is not None}
    kinds = [k for k, used in (("three-ball", readings), ("ring", ring_opts), ("calibrated", ring_radius is not None))
             if used]
    if len(kinds) != 1 or len(readings) > 1:
        raise UserError("give exactly one of --outside, --inside, --leg-spacings (three-ball), "
                        "--ring-inner/--ring-outer (ring) or --ring-radius (calibrated)")
    kind = kinds[0]
    if probe_distances and kind != "three-ball":
        raise UserError("--probe-distances: only a three-ball spherometer has balls to measure the probe from")
    if kind == "three-ball":
        (option, values), = readings.items()
        if ball is None:
            raise UserError("--ball: the ball diameter is needed for a three-ball spherometer")
        if option == "--outside" and min(values) <= ball:
            raise UserError(f"{option}: a reading of {min(values):g} {unit} is not larger than the ball diameter")
        if option == "--leg-spacings":
            sph = {"kind": kind, "leg_spacings": list(values), "ball_diameter": ball}
        else:  # kept as read: the legs then share the ball's error in the budget
            sph = {"kind": kind, "leg_readings": list(values), "readings": option[2:], "ball_diameter": ball}
        how = f"{option[2:]} readings {' '.join(f'{v:g}' for v in values)} {unit}, ball {ball:g} {unit}"
        if probe_distances:
            sph["probe_distances"] = list(probe_distances)
            how += f", probe distances {' '.join(f'{v:g}' for v in probe_distances)} {unit}"
    elif kind == "ring":
        if ring_inner is None or ring_outer is None:
            raise UserError("--ring-inner and --ring-outer are both needed for a ring spherometer")
        if ball is not None:
            raise UserError("--ball: a ring spherometer has no balls (use --edge-radius)")
        sph = {"kind": kind, "inner_diameter": ring_inner, "outer_diameter": ring_outer,
               "edge_radius": edge_radius or 0.0}
        how = f"ring {ring_inner:g}/{ring_outer:g} {unit}, edge radius {edge_radius or 0.0:g} {unit}"
    else:
        sph = {"kind": kind, "ring_radius": ring_radius, **({"ball_diameter": ball} if ball is not None else {})}
        how = f"calibrated ring radius {ring_radius:g} {unit}"
    ind = {"resolution": resolution, "sense": sense}
    if indicator_unit is not None:
        ind["unit"] = indicator_unit
    data = {**({"name": name} if name else {}), "unit": unit, "spherometer": sph, "indicator": ind}
    parse_profile(data, "new-profile options")  # every check the reader makes, before anything is written
    stamp = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")
    text = profile_text(data, f"Written by saglog new-profile at {stamp} from {how}.")
    if out.exists() and not force:
        raise already_exists(out)
    write_atomic(out, text)
    load_profile(out)  # what was written reads back
    profile = parse_profile(data)
    (r_mm, rho_mm), (r_convex_mm, _) = profile.contact_mm("concave"), profile.contact_mm("convex")
    ring = f"ring radius {from_mm(r_mm, unit):.6g} {unit}"
    if r_convex_mm != r_mm:  # a ring sits on its outer edge on a concave surface, its inner edge on a convex one
        ring += f" on a concave surface, {from_mm(r_convex_mm, unit):.6g} {unit} on a convex one"
    elif kind == "three-ball":
        ring += " (the circle through the ball centres)"
    click.echo(f"wrote {out}: {kind}, {ring}, foot radius {from_mm(rho_mm, unit):.6g} {unit}")
