"""`saglog calibrate`: the effective ring radius from runs on references of known radius.

Each run folder is an ordinary capture or replay on the flat and a reference;
its summary gives the mean sagitta and its standard uncertainty, its
settings.json the instrument (or `--profile` overrides it).  The arithmetic
and the budget live in logger.analysis.calibration; this module reads the
runs, checks them, and writes a profile of kind "calibrated" with a
[calibration] record.  Nothing is written unless every run passes.
"""

from __future__ import annotations

import json
from datetime import datetime, timezone
from pathlib import Path

import click

from logger import __version__
from logger.analysis import geometry
from logger.analysis.calibration import Calibration, Reference, calibrate, sagitta_dof
from logger.cli.calc import profile_text, toml_value
from logger.cli.options import NON_NEGATIVE, POSITIVE, PROFILE_HELP
from logger.config.profile import Indicator, Profile, Spherometer, load_profile, parse_profile
from logger.errors import UserError, already_exists
from logger.run.load import load_run
from logger.run.writer import write_atomic
from logger.units import from_mm, to_mm
from logger.words import plural

# The rig's sources that a calibrated profile keeps from the one it was calibrated with; a caliper error
# common to the legs has no legs left to act on (the ring radius now comes from the references).
CARRIED = ("flat_flatness", "indicator_error", "probe_offset")
RING_GUARD = 0.05  # a reference whose ring radius is this far (relative) from the profile's is the wrong one


def _run_profile(run) -> Profile:
    """The instrument a run was analysed with, from its settings.json.

    The rig's other error sources (`systematic_mm`) and a calibrated profile's ball coupling are
    rebuilt too, so a calibration from a run folder carries the same sources as one from the
    profile; a folder written before they were recorded has none, and the calibrated profile then
    falls back to the defaults (logger.config.profile.DEFAULT_SYSTEMATIC_MM)."""
    st = run.settings
    try:
        sph, ind = st["spherometer"], st["indicator"]
        spherometer = Spherometer(sph["kind"], dict(sph["params_mm"]), dict(sph["u_mm"]),
                                  float(sph.get("ball_coupling", 0.0)), dict(sph.get("systematic_mm", {})))
        return Profile(st["profile_unit"], spherometer,
                       Indicator(float(ind["resolution_mm"]), ind["sense"], ind["unit"]), source=str(st["profile"]))
    except (KeyError, TypeError, ValueError):
        raise UserError(f"{run.path / 'settings.json'}: no profile recorded; give --profile") from None


def _instrument(profile: Profile) -> tuple:
    """What two runs must share to calibrate one instrument: the feet, the legs, the indicator."""
    s = profile.spherometer
    return s.kind, sorted(s.params_mm.items()), sorted(s.u_mm.items()), profile.indicator


def _per_run(values: tuple, n: int, option: str, default=None) -> list:
    if len(values) == n:
        return list(values)
    if len(values) == 1 and option != "--reference-radius":
        return list(values) * n
    if not values and default is not None:
        return [default] * n
    allowed = "one per RUN_DIR" if option == "--reference-radius" else "one for all or one per RUN_DIR"
    raise UserError(f"{option}: {len(values)} given for {n} run {plural(n, 'folder')} ({allowed})")


def _reference(run, radius: float, u: float, surface: str | None, profile: Profile) -> Reference:
    """One run as a reference seating, with every check that can refuse it."""
    where, s = str(run.path), run.summary
    unit = profile.unit
    if not s.get("seatings_surface"):
        raise UserError(f"{where}: no accepted seatings on the reference surface")
    if s.get("surface") not in geometry.SURFACES:
        raise UserError(f"{where}: not a run on one reference surface (surface {s.get('surface')!r})")
    if surface is not None and s["surface"] != surface:
        raise UserError(f"{where}: the run reads a {s['surface']} surface, the reference is {surface}")
    if s.get("sagitta_mm") is None or s.get("sagitta_u_mm") is None:
        raise UserError(f"{where}: the sagitta has no uncertainty yet (seat the reference at least twice)")
    ref = Reference(where, to_mm(radius, unit), to_mm(u, unit), s["surface"], float(s["sagitta_mm"]),
                    float(s["sagitta_u_mm"]), sagitta_dof(s))
    ring_nominal, rho = profile.contact_mm(ref.surface)
    try:
        r = geometry.ring_radius_from_reference_mm(ref.radius_mm, ref.sagitta_mm, rho, ref.surface)
    except UserError:
        raise UserError(f"{where}: a sagitta of {from_mm(ref.sagitta_mm, unit):.6g} {unit} cannot come from a "
                        f"{ref.surface} reference of radius {radius:g} {unit}") from None
    if abs(r / ring_nominal - 1) > RING_GUARD:
        raise UserError(f"{where}: a {ref.surface} reference of radius {radius:g} {unit} gives a ring radius of "
                        f"{from_mm(r, unit):.5g} {unit}, far from the profile's {from_mm(ring_nominal, unit):.5g} "
                        f"{unit}: check the reference radius, its unit and the surface")
    return ref


def _profile_data(cal: Calibration, profile: Profile, name: str) -> dict:
    """The calibrated profile as TOML tables, in the profile's unit."""
    u = profile.unit
    ball_mm = 2.0 * profile.contact_mm("concave")[1]
    ball_u_mm = profile.spherometer.u_mm.get("ball_diameter", 0.0)
    ind = profile.indicator
    lo, hi = cal.sagitta_range_mm
    return {
        "name": name, "unit": u,
        "spherometer": {"kind": "calibrated", "ring_radius": from_mm(cal.ring_radius_mm, u),
                        "ball_diameter": from_mm(ball_mm, u)},
        "indicator": {"resolution": from_mm(ind.resolution_mm, u), "sense": ind.sense, "unit": ind.unit},
        "uncertainty": {"ring_radius": from_mm(cal.u_without_ball_mm, u), "ball_diameter": from_mm(ball_u_mm, u),
                        **{k: from_mm(v, u) for k, v in profile.spherometer.systematic_mm.items() if k in CARRIED}},
        "calibration": {
            "ring_radius_per_ball_diameter": cal.ball_coefficient, "ring_radius_u": from_mm(cal.u_mm, u),
            "sagitta_min": from_mm(lo, u), "sagitta_max": from_mm(hi, u),
            **({} if cal.birge_ratio is None else {"birge_ratio": cal.birge_ratio}),
            "date": datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ"), "saglog_version": __version__,
        },
    }


def _references_text(cal: Calibration, unit: str) -> list[str]:
    lines = []
    for ref, r, ur in zip(cal.references, cal.rings_mm, cal.ring_u_mm):
        row = {"run": ref.run, "surface": ref.surface, "radius": from_mm(ref.radius_mm, unit),
               "radius_u": from_mm(ref.radius_u_mm, unit), "sagitta": from_mm(ref.sagitta_mm, unit),
               "sagitta_u": from_mm(ref.sagitta_u_mm, unit), "ring_radius": from_mm(r, unit),
               "ring_radius_u": from_mm(ur, unit)}
        lines += ["", "[[calibration.references]]"] + [f"{k} = {toml_value(v)}" for k, v in row.items()]
    return lines


def _profile_toml(data: dict, cal: Calibration, source: str) -> str:
    n = len(cal.references)
    head = profile_text({k: v for k, v in data.items() if k != "calibration"},
                        f"Written by saglog calibrate from {n} reference {plural(n, 'run')}, calibrated "
                        f"from {source}.\n[uncertainty] ring_radius leaves out the ball's share, which the "
                        "profile carries as\nring_radius_per_ball_diameter (docs/measurement.md).")
    cal_lines = ["", "[calibration]"] + [f"{k} = {toml_value(v)}" for k, v in data["calibration"].items()]
    return head + "\n".join(cal_lines + _references_text(cal, data["unit"])) + "\n"


def _result(cal: Calibration, unit: str, out: Path) -> dict:
    b = cal.budget
    return {"ring_radius": from_mm(cal.ring_radius_mm, unit), "ring_radius_u": from_mm(cal.u_mm, unit),
            "ring_radius_U": from_mm(b.U, unit), "coverage_factor": b.k, "unit": unit,
            "ring_radius_per_ball_diameter": cal.ball_coefficient, "birge_ratio": cal.birge_ratio,
            "consistent": cal.consistent, "profile": str(out),
            "references": [{"run": ref.run, "surface": ref.surface, "ring_radius": from_mm(r, unit),
                            "ring_radius_u": from_mm(ur, unit)}
                           for ref, r, ur in zip(cal.references, cal.rings_mm, cal.ring_u_mm)],
            "budget": b.as_dict(unit)}


@click.command("calibrate")
@click.argument("run_dirs", nargs=-1, required=True, type=click.Path(file_okay=False))
@click.option("--reference-radius", multiple=True, type=POSITIVE, required=True,
              help="Certified radius of the reference, one per RUN_DIR [profile unit].")
@click.option("--reference-u", multiple=True, type=NON_NEGATIVE,
              help="Its standard uncertainty (k = 1): one for all or one per RUN_DIR [profile unit]; default 0.")
@click.option("--reference-surface", multiple=True, type=click.Choice(geometry.SURFACES),
              help="Optional check: the reference is concave or convex (one for all or one per RUN_DIR).")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False), metavar="FILE.toml",
              help="The calibrated profile to write (TOML).")
@click.option("--profile", "profile_path", default=None, metavar="FILE|NAME",
              help=PROFILE_HELP + " Default: the one each run was analysed with.")
@click.option("--force", is_flag=True, help="Replace the output file if it exists.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON for scripts.")
def calibrate_cmd(run_dirs, reference_radius, reference_u, reference_surface, out_path, profile_path, force,
                  as_json):
    """Effective ring radius from runs on references of known radius (certificate); writes a calibrated profile."""
    n, out = len(run_dirs), Path(out_path)
    radii = _per_run(reference_radius, n, "--reference-radius")
    us = _per_run(reference_u, n, "--reference-u", 0.0)
    surfaces = _per_run(reference_surface, n, "--reference-surface", "")
    runs = [load_run(d) for d in run_dirs]
    override = load_profile(profile_path) if profile_path else None
    profiles = [override or _run_profile(run) for run in runs]
    for run, p in zip(runs[1:], profiles[1:]):
        if _instrument(p) != _instrument(profiles[0]):
            raise UserError(f"{run.path}: analysed with another instrument or indicator than {runs[0].path} "
                            "(their profiles differ); calibrate one instrument at a time")
    profile = profiles[0]
    if profile.spherometer.kind == "ring":
        raise UserError(f"{profile.source}: a ring spherometer bears on different edges for concave and convex "
                        "surfaces; calibration needs ball feet (three-ball or calibrated)")
    refs = [_reference(run, R, u, sf or None, profile) for run, R, u, sf in zip(runs, radii, us, surfaces)]
    if out.exists() and not force:
        raise already_exists(out)
    cal = calibrate(refs, profile.contact_mm("concave")[1], profile.spherometer.u_mm.get("ball_diameter", 0.0))
    base = profile.name or Path(profile.source).stem or "spherometer"
    data = _profile_data(cal, profile, f"{base}, calibrated on {n} reference {plural(n, 'run')}")
    parse_profile(data, "calibrated profile")  # every check the reader makes, before anything is written
    write_atomic(out, _profile_toml(data, cal, profile.source or "the runs' settings"))
    load_profile(out)  # what was written reads back
    result = _result(cal, profile.unit, out)
    if as_json:
        click.echo(json.dumps(result, indent=2, allow_nan=False))
    else:
        _echo_text(cal, result, profile.unit, reference_u)
    if not cal.consistent:
        click.echo(f"saglog: warning: the references disagree beyond their uncertainties (Birge ratio "
                   f"{cal.birge_ratio:.2f}); check each run and certificate", err=True)


def _echo_text(cal: Calibration, result: dict, unit: str, reference_u) -> None:
    u = unit
    click.echo(f"effective ring radius  {result['ring_radius']:.7g} {u}  u = {result['ring_radius_u']:.3g} {u} "
               f"(U = {result['ring_radius_U']:.3g} {u}, k = {result['coverage_factor']:.2f})")
    for ref in result["references"]:
        click.echo(f"  {ref['run']}: {ref['surface']}, r = {ref['ring_radius']:.7g} +- {ref['ring_radius_u']:.3g} {u}")
    if cal.birge_ratio is not None:
        verdict = "agree" if cal.consistent else "DISAGREE"
        click.echo(f"consistency: Birge ratio {cal.birge_ratio:.2f} (chi-square {cal.chi2:.2f} with "
                   f"{len(cal.references) - 1} dof): the references {verdict}")
    if not reference_u:
        click.echo("no --reference-u given: the certificate's uncertainty is taken as zero")
    click.echo("")
    click.echo(cal.budget.table(u))
    click.echo(f"wrote {result['profile']}")
    click.echo(f"(the ring radius moves by {cal.ball_coefficient:.4g} per unit of ball diameter; "
               "a measurement with this profile varies both together)")
