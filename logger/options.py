"""Command-line options shared by `replay`, `capture` and `demo`.

Lengths on the command line are in the profile's unit; they are converted to
millimetres here, once, so nothing downstream sees inches.
"""

from __future__ import annotations

import functools
import math

import click

from . import geometry
from .errors import UserError
from .outliers import METHODS
from .pipeline import RunSettings
from .profile import Profile, load_profile
from .seating import DetectorSettings
from .session import AnalysisSettings
from .units import to_mm


def analysis_options(f):
    """Thresholds, rejection and target options, as one decorator so every command offers the same."""
    opts = [
        click.option("--profile", "profile_path", required=True, type=click.Path(dir_okay=False),
                     help="Spherometer profile (TOML)."),
        click.option("--label", default="", help="Free text kept with the run, e.g. 'mirror' or 'tool'."),
        click.option("--rejection", type=click.Choice(METHODS), default="modified-z", show_default=True,
                     help="Outlier test within each phase."),
        click.option("--z-cut", type=float, default=3.5, show_default=True,
                     help="Modified z-score beyond which a seating is rejected."),
        click.option("--flat-first", type=click.IntRange(1), default=None,
                     help="Take the first N seatings as the flat, whatever they read (very shallow curves)."),
        click.option("--phase-gap", type=float, default=None,
                     help="How far from the zero a seating must be to count as the surface [profile unit]; "
                          "default 10 counts, at least 0.01 mm."),
        click.option("--max-spread", type=float, default=None,
                     help="Reject seatings whose samples wander more than this [profile unit]."),
        click.option("--settle", type=float, default=None,
                     help="Seconds a reading must hold to count as seated (default 0.4)."),
        click.option("--band", type=float, default=None,
                     help="How still 'holding' is [profile unit]; default 4 counts, at least 0.003 mm."),
        click.option("--lift", type=float, default=None,
                     help="A jump larger than this ends a seating [profile unit]; default 20 counts, at least 0.05 mm."),
        click.option("--target-radius", type=float, default=None, help="Wanted radius of curvature [profile unit]."),
        click.option("--focal-length", type=float, default=None, help="Wanted focal length [profile unit]."),
        click.option("--focal-ratio", type=float, default=None, help="Wanted focal ratio (needs --diameter)."),
        click.option("--diameter", type=float, default=None, help="Mirror diameter [profile unit]."),
    ]
    for opt in reversed(opts):
        f = opt(f)

    @functools.wraps(f)
    def wrapper(**kw):
        profile = load_profile(kw.pop("profile_path"))
        kw["profile"] = profile
        kw["run_settings"] = run_settings_from(profile, kw)
        return f(**kw)

    return wrapper


_ANALYSIS_KEYS = ("label", "rejection", "z_cut", "flat_first", "phase_gap", "max_spread", "settle", "band", "lift",
                  "target_radius", "focal_length", "focal_ratio", "diameter")


def run_settings_from(profile: Profile, kw: dict) -> RunSettings:
    """Pop the shared options from `kw` and turn them into RunSettings (mm inside)."""
    o = {k: kw.pop(k) for k in _ANALYSIS_KEYS}
    unit = profile.unit

    def mm(name, value):
        if value is None:
            return None
        if not (math.isfinite(value) and value > 0):
            raise UserError(f"--{name.replace('_', '-')}: must be a positive number, got {value:g}")
        return to_mm(value, unit)

    diameter = mm("diameter", o["diameter"])
    target = mm("target_radius", o["target_radius"])
    given = [k for k in ("target_radius", "focal_length", "focal_ratio") if o[k] is not None]
    if len(given) > 1:
        raise UserError("give only one of --target-radius, --focal-length, --focal-ratio")
    if o["focal_length"] is not None:
        target = geometry.radius_from_focal_length_mm(mm("focal_length", o["focal_length"]))
    if o["focal_ratio"] is not None:
        if not (math.isfinite(o["focal_ratio"]) and o["focal_ratio"] > 0):
            raise UserError(f"--focal-ratio: must be positive, got {o['focal_ratio']:g}")
        if diameter is None:
            raise UserError("--focal-ratio needs --diameter")
        target = geometry.radius_from_focal_length_mm(o["focal_ratio"] * diameter)
    if o["settle"] is not None and not (math.isfinite(o["settle"]) and o["settle"] > 0):
        raise UserError(f"--settle: must be a positive number of seconds, got {o['settle']:g}")
    if not (math.isfinite(o["z_cut"]) and o["z_cut"] > 0):
        raise UserError(f"--z-cut: must be a positive number, got {o['z_cut']:g}")
    if target is not None:
        option = "--" + given[0].replace("_", "-")
        for surface in geometry.SURFACES:  # the target must be a sphere this spherometer can sit on
            r, rho = profile.contact_mm(surface)
            try:
                geometry.probe_sagitta_mm(target, r, rho, surface)
            except UserError as exc:
                raise UserError(f"{option}: {exc}") from None
    detector = DetectorSettings.for_step(
        profile.indicator.resolution_mm, settle_s=o["settle"], band_mm=mm("band", o["band"]),
        lift_mm=mm("lift", o["lift"]))
    analysis = AnalysisSettings(
        rejection=o["rejection"], z_cut=o["z_cut"], flat_first=o["flat_first"],
        phase_gap_mm=mm("phase_gap", o["phase_gap"]), max_spread_mm=mm("max_spread", o["max_spread"]),
        target_radius_mm=target, diameter_mm=diameter, label=o["label"])
    return RunSettings(detector, analysis)
