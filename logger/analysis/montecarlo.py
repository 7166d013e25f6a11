"""The Monte Carlo propagation of a radius's inputs (JCGM 101:2008), and the coverage interval it gives.

The GUM budget (logger.analysis.uncertainty) linearises; these draws go
through the exact relation, with every input from its own distribution, so
the tests can confirm the budget and a run can take U from the draws when
rectangular terms make the output far from normal.  Every length in mm.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from logger.analysis.uncertainty import LEG_INPUTS, Budget, Component, probe_bias_mm
from logger.errors import UserError


def _draw(rng: np.random.Generator, c: Component, n: int) -> np.ndarray:
    """n draws of an input's error, zero mean, per JCGM 101:2008 6.4."""
    if c.distribution == "rectangular":  # 6.4.2: half-width a = sqrt(3) u
        a = math.sqrt(3.0) * c.u
        return rng.uniform(-a, a, n)
    if c.distribution == "t":  # 6.4.9: scaled and shifted t, scale s/sqrt(n) = u, nu = n - 1
        return c.u * rng.standard_t(c.dof, n)
    return rng.normal(0.0, c.u, n)  # 6.4.7


def monte_carlo_radius(
    spherometer, surface: str, sagitta_mm: float, sagitta_components: Sequence[Component], n: int = 200_000, seed: int = 0
) -> np.ndarray:
    """Samples of R from the exact relation with every input drawn from its distribution (JCGM 101:2008).

    Sagitta errors enter with their own sensitivities dS/dx; the spherometer's
    inputs (the probe's distances to the balls among them, when given) are
    drawn normal with their standard uncertainties.
    """
    if n < 1:
        raise UserError(f"Monte Carlo needs at least one trial, got {n}")
    rng = np.random.default_rng(seed)
    s = np.full(n, float(sagitta_mm))
    for c in sagitta_components:
        s = s + c.sensitivity * _draw(rng, c, n)
    sys_mm = spherometer.systematic_mm
    for key in ("flat_flatness", "indicator_error"):  # rectangular, half-width as stated
        s = s + rng.uniform(-1.0, 1.0, n) * sys_mm.get(key, 0.0)
    common = rng.normal(0.0, sys_mm.get("caliper_common", 0.0), n)  # one draw shared by the three legs
    params = {
        name: x + (rng.normal(0.0, spherometer.u_mm.get(name, 0.0), n) if spherometer.u_mm.get(name, 0.0) > 0 else 0.0)
        + (common if name in LEG_INPUTS else 0.0)
        for name, x in spherometer.params_mm.items()
    }
    R = np.broadcast_to(spherometer.radius_mm(s, surface, params), (n,)).copy()
    if spherometer.probe_offset_mm() is not None:  # corrected: the distances were drawn with the other inputs
        return R
    e = sys_mm.get("probe_offset", 0.0)  # as in systematic_components: +-R e^2 / r^2, rectangular
    return R + rng.uniform(-1.0, 1.0, n) * probe_bias_mm(spherometer, surface, R, e)


MC_TRIALS = 20_000  # for the coverage interval: its 95 % ends are then known to about 1 %


def coverage_interval_U(budget: Budget, spherometer, surface: str, sagitta_mm: float,
                        sagitta_components: Sequence[Component]) -> tuple[float, str]:
    """The expanded uncertainty, and how it was found.

    When rectangular terms carry most of u_c^2, the output is far from normal
    and k = 2 overstates U (a rectangle's 95 % half-width is 1.65 u); the
    probabilistically symmetric coverage interval of the Monte Carlo then
    gives U as half its width (JCGM 101:2008 7.7), drawn with a fixed seed so
    that a replay repeats it exactly.  Otherwise, or when draws fall where the
    relation has no sphere (a sagitta not clear of its own scatter), the GUM's k u_c.
    """
    rect = math.fsum(c.contribution**2 for c in budget.components if c.distribution == "rectangular")
    if budget.u_c == 0 or rect <= 0.5 * budget.u_c**2:
        return budget.U, "GUM k u_c"
    try:
        draws = monte_carlo_radius(spherometer, surface, sagitta_mm, sagitta_components, n=MC_TRIALS, seed=0)
    except UserError:  # draws beyond any sphere (a sagitta barely above its own scatter): no interval to take
        return budget.U, "GUM k u_c"
    lo, hi = np.quantile(draws, [(1 - budget.p) / 2, (1 + budget.p) / 2])
    return float(hi - lo) / 2.0, "Monte Carlo coverage interval (JCGM 101)"
