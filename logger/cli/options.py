"""Options and parameter types shared by the commands.

Lengths on the command line are in the profile's unit; they are converted to
millimetres here, once, so nothing downstream sees inches.
"""

from __future__ import annotations

import contextlib
import functools
import sys

import click

from logger.analysis import geometry
from logger.analysis.outliers import METHODS
from logger.analysis.seating import DetectorSettings
from logger.analysis.session import AnalysisSettings
from logger.checks import is_positive
from logger.config.profile import Profile, load_profile
from logger.errors import UserError
from logger.live.bells import Bells
from logger.live.panel import LivePanel
from logger.live.pipeline import RunSettings
from logger.live.plainlog import PlainLog
from logger.units import to_mm


class PositiveNumber(click.ParamType):
    """A finite number greater than zero (or zero too, with `allow_zero`): the one check every option uses."""

    def __init__(self, allow_zero: bool = False):
        self.allow_zero = allow_zero
        self.name = "number>=0" if allow_zero else "number>0"

    def convert(self, value, param, ctx):
        if isinstance(value, float):
            number = value
        else:
            try:
                number = float(value)
            except (TypeError, ValueError):
                self.fail(f"{value!r} is not a number", param, ctx)
        if not is_positive(number, self.allow_zero):
            self.fail(f"must be a {'non-negative' if self.allow_zero else 'positive'} number, got {value}", param, ctx)
        return number


POSITIVE = PositiveNumber()
NON_NEGATIVE = PositiveNumber(allow_zero=True)

PROFILE_HELP = "Spherometer profile: a TOML file, or the name of a shipped profile (e.g. example-three-ball)."


def profile_option(f):
    return click.option("--profile", "profile_path", required=True, metavar="FILE|NAME", help=PROFILE_HELP)(f)


def view_option(f):
    return click.option("--view", type=click.Choice(["auto", "live", "plain"]), default="auto", show_default=True,
                        help="Live panel on a terminal, timestamped lines otherwise.")(f)


def terminal_watchers(view: str, unit: str, device: str, bells: bool):
    """The listeners a terminal run shows (panel or plain log, and the bells) and the context the panel needs."""
    live = view == "live" or (view == "auto" and sys.stdout.isatty())
    shown = LivePanel(unit, device) if live else PlainLog(unit)
    watchers = [shown] + ([Bells()] if bells else [])
    return watchers, (shown if live else contextlib.nullcontext())


def analysis_options(f):
    """Thresholds, rejection and target options, as one decorator so every command offers the same."""
    opts = [
        click.option("--profile", "profile_path", required=True, metavar="FILE|NAME", help=PROFILE_HELP),
        click.option("--label", default="", help="Free text kept with the run, e.g. 'mirror' or 'tool'."),
        click.option("--rejection", type=click.Choice(METHODS), default="modified-z", show_default=True,
                     help="Outlier test within each phase."),
        click.option("--z-cut", type=POSITIVE, default=None,
                     help="--rejection modified-z: the modified z-score beyond which a seating is rejected "
                          "(default 3.5)."),
        click.option("--alpha", type=click.FloatRange(0, 1, min_open=True, max_open=True), default=None,
                     metavar="0<NUMBER<1",
                     help="--rejection grubbs: the significance level of Grubbs' test (default 0.05). "
                          "Chauvenet's criterion takes no parameter."),
        click.option("--flat-first", type=click.IntRange(1), default=None, metavar="N",
                     help="Take the first N seatings as the flat, whatever they read (very shallow curves)."),
        click.option("--phase-gap", type=POSITIVE, default=None,
                     help="How far from the zero a seating must be to count as the surface [profile unit]; "
                          "default 10 counts, at least 0.01 mm."),
        click.option("--max-spread", type=POSITIVE, default=None,
                     help="Reject seatings whose samples wander more than this [profile unit]."),
        click.option("--settle", type=POSITIVE, default=None,
                     help="Seconds a reading must hold to count as seated (default 0.4)."),
        click.option("--band", type=POSITIVE, default=None,
                     help="How still 'holding' is [profile unit]; default 4 counts, at least 0.003 mm."),
        click.option("--lift", type=POSITIVE, default=None,
                     help="A jump larger than this ends a seating [profile unit]; default 20 counts, at least 0.05 mm."),
        click.option("--target-radius", type=POSITIVE, default=None, help="Wanted radius of curvature [profile unit]."),
        click.option("--focal-length", type=POSITIVE, default=None, help="Wanted focal length [profile unit]."),
        click.option("--focal-ratio", type=POSITIVE, default=None, help="Wanted focal ratio (needs --diameter)."),
        click.option("--diameter", type=POSITIVE, default=None, help="Mirror diameter [profile unit]."),
        click.option("--pair", is_flag=True,
                     help="A mirror and its tool seated alternately: two levels without a flat are the two pieces "
                          "(with a flat, the three levels are found without this)."),
        click.option("--abrasive", type=POSITIVE, default=None,
                     help="Grain size of the last abrasive on a mirror-and-tool pair [profile unit]: how far the "
                          "two radii may differ (a term in the pair's budget)."),
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


_ANALYSIS_KEYS = ("label", "rejection", "z_cut", "alpha", "flat_first", "phase_gap", "max_spread", "settle", "band", "lift",
                  "target_radius", "focal_length", "focal_ratio", "diameter")


def run_settings_from(profile: Profile, kw: dict) -> RunSettings:
    """Pop the shared options from `kw` and turn them into RunSettings (mm inside)."""
    o = {k: kw.pop(k) for k in _ANALYSIS_KEYS}
    o.update(pair=kw.pop("pair", False), abrasive=kw.pop("abrasive", None))  # absent where a caller builds kw itself
    unit = profile.unit

    def mm(value):
        return None if value is None else to_mm(value, unit)

    diameter = mm(o["diameter"])
    target = mm(o["target_radius"])
    given = [k for k in ("target_radius", "focal_length", "focal_ratio") if o[k] is not None]
    if len(given) > 1:
        raise UserError("give only one of --target-radius, --focal-length, --focal-ratio")
    if o["focal_length"] is not None:
        target = geometry.radius_from_focal_length_mm(mm(o["focal_length"]))
    if o["focal_ratio"] is not None:
        if diameter is None:
            raise UserError("--focal-ratio needs --diameter")
        target = geometry.radius_from_focal_length_mm(o["focal_ratio"] * diameter)
    if target is not None:
        option = "--" + given[0].replace("_", "-")
        for surface in geometry.SURFACES:  # the target must be a sphere this spherometer can sit on
            r, rho = profile.contact_mm(surface)
            try:
                geometry.probe_sagitta_mm(target, r, rho, surface)
            except UserError as exc:
                raise UserError(f"{option}: {exc}") from None
    detector = DetectorSettings.for_step(
        profile.indicator.resolution_mm, settle_s=o["settle"], band_mm=mm(o["band"]),
        lift_mm=mm(o["lift"]))
    analysis = AnalysisSettings(
        rejection=o["rejection"], z_cut=o["z_cut"], alpha=o["alpha"], flat_first=o["flat_first"],
        phase_gap_mm=mm(o["phase_gap"]), max_spread_mm=mm(o["max_spread"]),
        target_radius_mm=target, diameter_mm=diameter, label=o["label"], pair=o["pair"],
        abrasive_mm=mm(o["abrasive"]) or 0.0)
    return RunSettings(detector, analysis)
