"""A real rig's systematic errors, drawn once per session from the tolerances its profile states.

The budget (logger.analysis.uncertainty.systematic_components) claims to
cover a flat that is not flat, an indicator whose scale is off, a probe off
the circumcentre and calipers that read every leg a little wrong together.
A simulator that never makes these errors cannot test that claim, so a
scenario with `systematics = True` has each of them drawn per session:

- the flat's departure over the ring, uniform within +-flat_flatness;
- the indicator's scale error g, uniform so that g s stays within
  +-indicator_error at the session's sagitta s;
- the probe's offset e, uniform over the disc of radius probe_offset;
- the true legs: the profile's less one error common to the three
  (normal, caliper_common) and one per leg (normal, the leg's u), and the
  ball diameter less its own error (normal, its u).
"""

from __future__ import annotations

import math

import numpy as np

from logger.analysis import geometry


def draw_systematics(scenario, seed: int):
    """A copy of `scenario` with the session's systematic errors set, and what was drawn (mm)."""
    sph = scenario.profile.spherometer
    tol = sph.systematic_mm
    rng = np.random.default_rng([seed, 7])
    surface = "concave" if scenario.surface == "pair" else scenario.surface
    s_mm = geometry.probe_sagitta_mm(scenario.radius_mm, *scenario.profile.contact_mm(surface), surface)
    drawn = {
        "flat_error_mm": rng.uniform(-1, 1) * tol.get("flat_flatness", 0.0),
        "indicator_scale_error": rng.uniform(-1, 1) * tol.get("indicator_error", 0.0) / s_mm,
        "probe_offset_mm": tol.get("probe_offset", 0.0) * math.sqrt(rng.uniform()),
    }
    if sph.kind == "three-ball" and "a" in sph.params_mm:
        common = rng.normal(0.0, tol.get("caliper_common", 0.0))
        drawn["true_legs_mm"] = tuple(sph.params_mm[x] - common - rng.normal(0.0, sph.u_mm.get(x, 0.0))
                                      for x in "abc")
        drawn["true_ball_mm"] = sph.params_mm["ball_diameter"] - rng.normal(0.0, sph.u_mm.get("ball_diameter", 0.0))
    return scenario.with_overrides(systematics=False, **drawn), drawn
