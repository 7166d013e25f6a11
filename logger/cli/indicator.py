"""`saglog indicator-check`: the indicator's error of indication, from gauge blocks under the probe.

Zero the indicator on the flat, then seat gauge blocks of known lengths (or
stacks) on the flat under the probe alone, spanning at least the sagittas
you measure, and note each reading.  A straight-line fit of reading against
length gives the scale error g (the reading grows by (1 + g) per unit of
travel) and the residuals, the non-linearity left over.  Over a travel T
the error of indication is bounded by (|g| + 2 u(g)) T + max |residual|:
that is the `[uncertainty] indicator_error` to put in the profile.  Gauge
blocks' own tolerances (well under a micrometre for the usual grades, common
practice) are left out.
"""

from __future__ import annotations

import json
import math

import click
import numpy as np

from logger.cli.options import POSITIVE, profile_option
from logger.config.profile import load_profile
from logger.errors import UserError
from logger.units import from_mm, to_mm


def _pairs(blocks: tuple[str, ...], unit: str, sign: int) -> tuple[np.ndarray, np.ndarray]:
    """LENGTH:READING pairs in the profile's unit -> (length_mm, travel_mm read by the indicator)."""
    lengths, reads = [], []
    for text in blocks:
        try:
            length, reading = (float(x.replace(",", ".")) for x in text.split(":"))
        except ValueError:
            raise UserError(f"--block {text!r}: give LENGTH:READING, two numbers in {unit}") from None
        if not (math.isfinite(length) and math.isfinite(reading) and length >= 0):
            raise UserError(f"--block {text!r}: the length must be a number >= 0 and the reading a number")
        lengths.append(to_mm(length, unit))
        reads.append(sign * to_mm(reading, unit))
    if len(set(lengths)) < 3:
        raise UserError(f"--block: give at least three different lengths (got {len(set(lengths))})")
    return np.array(lengths), np.array(reads)


def fit_scale(length_mm: np.ndarray, read_mm: np.ndarray) -> dict:
    """Least squares reading = offset + (1 + g) length; g, its standard error, and the residuals."""
    X = np.column_stack([np.ones(len(length_mm)), length_mm])
    beta, *_ = np.linalg.lstsq(X, read_mm, rcond=None)
    resid = read_mm - X @ beta
    dof = len(read_mm) - 2
    sd = float(math.sqrt(resid @ resid / dof)) if dof > 0 else 0.0
    u_slope = sd * math.sqrt(float(np.linalg.inv(X.T @ X)[1, 1]))
    return dict(offset_mm=float(beta[0]), scale_error=float(beta[1] - 1.0), scale_error_u=u_slope,
                residual_max_mm=float(np.max(np.abs(resid))), residual_sd_mm=sd, dof=dof)


@click.command("indicator-check")
@profile_option
@click.option("--block", "blocks", multiple=True, required=True, metavar="LENGTH:READING",
              help="A gauge block's length and the indicator's reading on it (zeroed on the flat), profile unit; "
                   "at least three lengths.")
@click.option("--travel", type=POSITIVE, help="Travel the measurement uses (your sagittas), profile unit; "
                                              "default: the longest block.")
@click.option("--json", "as_json", is_flag=True, help="Print JSON for scripts.")
def indicator_check(profile_path, blocks, travel, as_json):
    """Fit the indicator's scale error from gauge blocks; print the indicator_error for the profile."""
    profile = load_profile(profile_path)
    unit = profile.unit
    length_mm, read_mm = _pairs(blocks, unit, profile.indicator.sign)
    fit = fit_scale(length_mm, read_mm)
    travel_mm = to_mm(travel, unit) if travel else float(length_mm.max())
    bound_mm = (abs(fit["scale_error"]) + 2 * fit["scale_error_u"]) * travel_mm + fit["residual_max_mm"]
    out = {"scale_error": fit["scale_error"], "scale_error_u": fit["scale_error_u"],
           "offset": from_mm(fit["offset_mm"], unit), "residual_max": from_mm(fit["residual_max_mm"], unit),
           "travel": from_mm(travel_mm, unit), "indicator_error": from_mm(bound_mm, unit), "unit": unit}
    if as_json:
        click.echo(json.dumps(out, indent=2, allow_nan=False))
        return
    click.echo(f"scale error {100 * out['scale_error']:+.3f} % (u {100 * out['scale_error_u']:.3f} %), "
               f"largest residual {out['residual_max']:.3g} {unit}")
    click.echo(f"error of indication over {out['travel']:g} {unit}: within {out['indicator_error']:.3g} {unit}")
    click.echo(f"put in the profile's [uncertainty]: indicator_error = {out['indicator_error']:.3g}")
