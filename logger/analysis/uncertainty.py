"""Uncertainty of the radius per the GUM (JCGM 100:2008), checked by Monte Carlo (JCGM 101:2008).

A `Budget` is a list of `Component`s, each the standard uncertainty of one
input with its sensitivity coefficient.  They combine in quadrature (GUM
5.1.2, inputs taken as uncorrelated), the effective degrees of freedom come
from the Welch-Satterthwaite formula (GUM G.4.1), and the expanded
uncertainty uses the Student t factor for the coverage probability (GUM
G.3, G.4).  `radius_budget` builds the budget of a radius from a sagitta and
a spherometer; logger.analysis.montecarlo propagates the same inputs through
the exact, non-linear relation so the tests can confirm the linearised budget.
Every length is in millimetres.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy import stats

from logger.analysis import geometry
from logger.errors import UserError
from logger.units import from_mm

DISTRIBUTIONS = ("normal", "rectangular", "t")

# Labels for the spherometer's inputs (keys of Spherometer.params_mm).
_INPUT_LABELS = {
    "a": "leg spacing a",
    "b": "leg spacing b",
    "c": "leg spacing c",
    **{f"{how}_{x}": f"caliper reading {x} ({how} the balls)" for how in ("outside", "inside") for x in "abc"},
    "ball_diameter": "ball diameter",
    "inner_diameter": "ring inner diameter",
    "outer_diameter": "ring outer diameter",
    "edge_radius": "ring edge radius",
    "ring_radius": "ring radius",
    **{f"probe_{x}": f"probe distance to ball {x.upper()}" for x in "abc"},
}


@dataclass(frozen=True)
class Component:
    """One input's standard uncertainty and how strongly the result depends on it."""

    name: str
    u: float  # standard uncertainty of the input quantity (mm)
    sensitivity: float = 1.0  # dY/dx
    dof: float = math.inf  # degrees of freedom
    kind: str = "B"  # "A" (statistics of repeated seatings) or "B" (anything else)
    distribution: str = "normal"  # for the Monte Carlo: "normal", "rectangular" or "t"

    def __post_init__(self):
        if not (math.isfinite(self.u) and self.u >= 0):
            raise ValueError(f"{self.name}: standard uncertainty must be finite and >= 0, got {self.u!r}")
        if not (self.dof > 0):
            raise ValueError(f"{self.name}: degrees of freedom must be positive, got {self.dof!r}")
        if self.kind not in ("A", "B"):
            raise ValueError(f"{self.name}: kind must be 'A' or 'B', got {self.kind!r}")
        if self.distribution not in DISTRIBUTIONS:
            raise ValueError(f"{self.name}: distribution must be one of {DISTRIBUTIONS}, got {self.distribution!r}")
        if self.distribution == "t" and not math.isfinite(self.dof):
            raise ValueError(f"{self.name}: a t distribution needs finite degrees of freedom")

    @property
    def contribution(self) -> float:
        """|c_i| u(x_i): this input's share of u_c (GUM 5.1.3)."""
        return abs(self.sensitivity) * self.u


def resolution_component(name: str, resolution_mm: float) -> Component:
    """One reading's quantisation: rectangular of full width q, u = q / sqrt(12) (GUM F.2.2.1)."""
    return Component(name, resolution_mm / math.sqrt(12.0), distribution="rectangular")


def scatter_component(scatter_mm: float, n: int, name: str = "seating scatter") -> Component:
    """Type A: the standard uncertainty of a mean of n seatings, s / sqrt(n), with n - 1 dof (GUM 4.2.3, G.3.3)."""
    if n < 2:
        raise UserError(f"a scatter needs at least 2 seatings, got {n}")
    return Component(name, scatter_mm / math.sqrt(n), dof=n - 1, kind="A", distribution="t")


def quantisation_bias_rms_mm(step_mm: float, dither_sd_mm: float) -> float:
    """RMS, over the reading's unknown offset within a step, of the bias of a mean of quantised readings.

    A rounding quantiser of step q fed x + Gaussian noise of SD sigma has
    E[Q(x)] - x = (q / pi) sum_k (-1)^(k+1) / k exp(-2 pi^2 k^2 sigma^2 / q^2) sin(2 pi k x / q)
    (Widrow and Kollar, Quantization Noise, 2008: the characteristic-function
    series).  A mean of many such readings keeps this bias whatever n is, so
    it is a Type B term.  Over an offset x uniform within a step the sines are
    orthogonal, and the RMS is sqrt(sum of squared amplitudes / 2): q / sqrt(12)
    at no noise (GUM F.2.2.1), about 0.04 q at sigma = 0.3 q, 0.002 q at 0.5 q.
    It falls smoothly as sigma grows; no step is ever switched on or off.
    """
    q, sigma = float(step_mm), float(dither_sd_mm)
    if not (q > 0 and sigma >= 0 and math.isfinite(sigma)):
        raise ValueError(f"quantisation: step must be > 0 and noise >= 0, got {step_mm!r}, {dither_sd_mm!r}")
    if sigma == 0.0:
        return q / math.sqrt(12.0)
    a = 4.0 * math.pi**2 * sigma**2 / q**2  # squared amplitude k: (q/pi)^2 exp(-a k^2) / k^2
    kmax = int(min(200_000, 6.0 / math.sqrt(a) + 20))  # exp(-a k^2) < e^-36 beyond
    k = np.arange(1, kmax + 1, dtype=float)
    total = math.fsum(np.exp(-a * k * k) / (k * k))
    total += math.exp(-a * kmax * kmax) / (kmax + 0.5)  # the 1/k^2 tail when sigma is tiny (< 3e-5 q)
    return q / math.pi * math.sqrt(total / 2.0)


def dither_sd_mm(step_mm: float, scatter_mm: float | None, within_sd_mm: float = 0.0) -> float:
    """The noise that dithers the step for a mean of seatings: between seatings and within each one.

    A seating's value is a mean of samples dithered by the within-seating
    noise; the seatings' own scatter dithers them again, and two Gaussian
    dithers add in quadrature.  Both SDs are measured on quantised readings,
    whose variance averaged over the offset is sigma^2 + q^2 / 12
    (Sheppard's correction), so q^2 / 12 comes off each first (floored at
    zero): this errs towards less dither, that is a larger term.
    """
    q2 = step_mm * step_mm / 12.0
    between = 0.0 if scatter_mm is None else max(scatter_mm * scatter_mm - q2, 0.0)
    within = max(within_sd_mm * within_sd_mm - q2, 0.0)
    return math.sqrt(between + within)


def reading_components(resolution_mm: float, scatter_mm: float | None = None, n: int | None = None,
                       zero_scatter_mm: float | None = None, within_sd_mm: float = 0.0) -> list[Component]:
    """The sagitta's own terms: the seating scatter of a mean of n (when known) and each reading's step.

    The sagitta is a surface reading minus a zero reading, each a mean of
    quantised readings at its own unknown offset within a step, so each keeps
    its own quantisation bias (`quantisation_bias_rms_mm`), dithered by
    `dither_sd_mm` of its scatter (`scatter_mm` for the surface,
    `zero_scatter_mm` for the zero, else the same) and of `within_sd_mm`,
    the noise within a seating.  With no scatter known the whole step stays.
    Rectangular for the Monte Carlo: the bias is bounded, and a rectangle of
    the same u is the wider of the shapes it takes (sawtooth to sine).
    """
    comps = [] if scatter_mm is None else [scatter_component(scatter_mm, n)]
    zero_sd = scatter_mm if zero_scatter_mm is None else zero_scatter_mm
    for which, sd in (("surface", scatter_mm), ("zero", zero_sd)):
        u = quantisation_bias_rms_mm(resolution_mm, dither_sd_mm(resolution_mm, sd, within_sd_mm))
        comps.append(Component(f"resolution, {which} reading", u, distribution="rectangular"))
    return comps


def coverage_factor(p: float, dof: float) -> float:
    """k such that +-k u_c covers p: Student t at dof, the normal quantile at infinity (GUM G.3.4)."""
    if not 0 < p < 1:
        raise ValueError(f"coverage probability must be in (0, 1), got {p!r}")
    q = 0.5 + p / 2.0
    return float(stats.norm.ppf(q) if math.isinf(dof) else stats.t.ppf(q, dof))


@dataclass(frozen=True)
class Budget:
    """An uncertainty budget: the result, its components, and the coverage wanted."""

    quantity: str
    value: float
    components: tuple[Component, ...]
    p: float = 0.9545

    @property
    def u_c(self) -> float:
        """Combined standard uncertainty, uncorrelated inputs (GUM eq. 10)."""
        return math.sqrt(math.fsum(c.contribution**2 for c in self.components))

    @property
    def nu_eff(self) -> float:
        """Welch-Satterthwaite effective degrees of freedom (GUM eq. G.2b)."""
        denom = math.fsum(c.contribution**4 / c.dof for c in self.components if c.contribution > 0)
        u_c = self.u_c
        return math.inf if denom == 0 or u_c == 0 else u_c**4 / denom

    @property
    def k(self) -> float:
        return coverage_factor(self.p, self.nu_eff)

    @property
    def U(self) -> float:
        """Expanded uncertainty k u_c (GUM 6.2)."""
        return self.k * self.u_c

    def table(self, unit: str = "mm") -> str:
        """A budget a user can print; lengths in `unit`, sensitivities are unit-free (length/length)."""
        f = lambda v: from_mm(v, unit)  # noqa: E731
        rows = [("component", "type", "distribution", f"u(x) [{unit}]", "c", f"|c| u(x) [{unit}]", "dof")]
        for c in self.components:
            rows.append((c.name, c.kind, c.distribution, f"{f(c.u):.4g}", f"{c.sensitivity:.5g}",
                         f"{f(c.contribution):.4g}", _dof_text(c.dof)))
        widths = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
        lines = [f"Uncertainty budget: {self.quantity} = {f(self.value):.6g} {unit}"]
        for j, r in enumerate(rows):
            lines.append("  ".join(x.ljust(w) if i < 3 else x.rjust(w) for i, (x, w) in enumerate(zip(r, widths))))
            if j == 0:
                lines.append("  ".join("-" * w for w in widths))
        lines += [
            f"combined standard uncertainty u_c = {f(self.u_c):.4g} {unit}",
            f"effective degrees of freedom (Welch-Satterthwaite) = {_dof_text(self.nu_eff)}",
            f"coverage factor k = {self.k:.3f} (p = {100 * self.p:.2f} %)",
            f"expanded uncertainty U = {f(self.U):.4g} {unit}",
        ]
        return "\n".join(lines)

    def as_dict(self, unit: str = "mm") -> dict:
        """JSON-safe (no NaN or inf: infinite dof is None); length keys carry the unit as a suffix."""
        sfx = f"_{unit}"
        return {
            "quantity": self.quantity,
            "value" + sfx: from_mm(self.value, unit),
            "u_c" + sfx: from_mm(self.u_c, unit),
            "U" + sfx: from_mm(self.U, unit),
            "k": self.k,
            "p": self.p,
            "nu_eff": _dof_json(self.nu_eff),
            "components": [
                {
                    "name": c.name,
                    "kind": c.kind,
                    "distribution": c.distribution,
                    "u" + sfx: from_mm(c.u, unit),
                    "sensitivity": c.sensitivity,
                    "contribution" + sfx: from_mm(c.contribution, unit),
                    "dof": _dof_json(c.dof),
                }
                for c in self.components
            ],
        }


def _dof_text(dof: float) -> str:
    return "inf" if math.isinf(dof) else f"{dof:.1f}"


def _dof_json(dof: float):
    return None if math.isinf(dof) else dof


def sensitivity(radius_of, params: dict, names) -> float:
    """dR/dx by a central difference, every input in `names` moved together by the same x.

    `radius_of(params)` is the result as a function of the instrument's
    inputs (the reading held fixed): through `Spherometer.radius_mm` an input
    that enters both the ring radius and the foot radius (a ring's edge
    radius), or the probe's offset too (a leg), is handled right.  Several
    names moved together give the sensitivity to an error they share.
    """
    h = 1e-6 * max(max(abs(params[x]) for x in names), 1.0)
    Rs = [radius_of(dict(params, **{x: params[x] + d for x in names})) for d in (h, -h)]
    return (Rs[0] - Rs[1]) / (2.0 * h)


def input_components(spherometer, radius_of) -> list[Component]:
    """One Type B component per spherometer input with a non-zero standard uncertainty."""
    return [Component(_INPUT_LABELS.get(name, name), u, sensitivity(radius_of, spherometer.params_mm, [name]))
            for name, u in spherometer.u_mm.items() if u > 0]


def radius_budget(spherometer, surface: str, sagitta_mm: float, sagitta_components: Sequence[Component]) -> Budget:
    """The GUM budget of the radius of curvature from one sagitta.

    `sagitta_components` are the uncertainties of the sagitta (seating
    scatter, resolution, zero, ...), each with its sensitivity dS/dx
    (usually 1); they are scaled by dR/ds.  One Type B component is added per
    spherometer input with a non-zero standard uncertainty (the probe's
    distances to the balls among them, when given), and the rig's other sources.
    """
    value = spherometer.radius_mm(sagitta_mm, surface)
    dR_ds = geometry.dradius_dsagitta(sagitta_mm, spherometer.contact_mm(surface)[0])
    comps = [
        Component(c.name, c.u, c.sensitivity * dR_ds, c.dof, c.kind, c.distribution) for c in sagitta_components
    ]
    radius_of = lambda params: spherometer.radius_mm(sagitta_mm, surface, params)  # noqa: E731
    comps += input_components(spherometer, radius_of)
    comps += systematic_components(spherometer, surface, radius_of, value, dR_ds)
    return Budget("radius of curvature", value, tuple(comps))


LEG_INPUTS = ("a", "b", "c", *(f"{how}_{x}" for how in ("outside", "inside") for x in "abc"))


def systematic_components(spherometer, surface: str, radius_of, radius_mm: float, dR_dreading: float,
                          pieces: int = 1) -> list[Component]:
    """The rig's error sources beyond its measured inputs (profile [uncertainty], logger.config.profile).

    `radius_of(params)` gives R from the instrument's inputs, the reading
    held fixed; dR_dreading is R's sensitivity to that reading, which is one
    piece's sagitta against the flat (pieces = 1) or the mirror-and-tool sum
    s_cc + s_cv (pieces = 2, logger.analysis.pair).

    The flat's flatness F shifts a sagitta by up to +-F: rectangular,
    sensitivity dR/ds.  It is not in the pair's sum: with a flat it enters
    the two pieces' sagittas with opposite signs (the zero is off by F, the
    concave piece reads deeper and the convex one shallower by as much), and
    without one there is no zero at all.  The indicator's error of
    indication E bounds the error over the travel of one sagitta; the sum
    spans both pieces' (concave level, zero, convex level), so its bound is
    pieces x E.  A probe off the circumcentre by up to e makes each piece
    read short by sag(R, e), about e^2 / (2 R), and R read long by about
    R e^2 / r^2, for one piece (dR/ds about -2 R^2 / r^2) and for the pair
    alike (twice the shift, half the slope); tests/analysis/test_probe_offset.py
    builds it exactly.  Not knowing the sign of a one-sided bias that is not
    corrected, it is carried as a symmetric rectangle of that half-width,
    which covers it; when the probe's distances to the balls are given, R is
    corrected instead (Spherometer.radius_mm) and their uncertainties are
    inputs like the legs.  A caliper error common to the legs is one input
    added to each leg: GUM 5.2 with correlation u_common^2 / (u_common^2 +
    u_leg^2) between them, its sensitivity that of the legs moved together.
    """
    sys_mm = spherometer.systematic_mm
    out = []
    for key, label, times in (("flat_flatness", "reference flat's flatness over the ring", 0 if pieces > 1 else 1),
                              ("indicator_error", "indicator's error of indication", pieces)):
        if sys_mm.get(key, 0.0) > 0 and times:
            out.append(Component(label, times * sys_mm[key] / math.sqrt(3.0), dR_dreading, distribution="rectangular"))
    e = sys_mm.get("probe_offset", 0.0)
    if e > 0 and spherometer.probe_offset_mm() is None:
        out.append(Component("probe offset from the circumcentre", probe_bias_mm(spherometer, surface, radius_mm, e)
                             / math.sqrt(3.0), distribution="rectangular"))
    common = sys_mm.get("caliper_common", 0.0)
    if common > 0:
        legs = [x for x in LEG_INPUTS if x in spherometer.params_mm]
        out.append(Component("caliper error common to the legs", common,
                             sensitivity(radius_of, spherometer.params_mm, legs)))
    return out


def probe_bias_mm(spherometer, surface: str, radius_mm, e_mm: float):
    """How far R reads long with the probe up to e off the circumcentre, about R e^2 / r^2."""
    return radius_mm * e_mm * e_mm / spherometer.contact_mm(surface)[0] ** 2


def seatings_needed(
    target_u_radius_mm: float, scatter_mm: float, sagitta_mm: float, ring_radius_mm: float, other_u_radius_mm: float = 0.0,
    zero_factor: float = 0.0,
) -> int | None:
    """Seatings n on the surface so that the radius's standard uncertainty reaches the target.

    u(R)^2 = (dR/ds * scatter)^2 (1 + zero_factor) / n + other^2 <= target^2:
    the scatter term is the Type A standard uncertainty of a mean (GUM 4.2.3),
    and the zero's own Type A term is zero_factor times it (1 when the flat
    is seated as often as the surface, with the same scatter; 0 leaves the
    zero out).  None when the other terms alone already reach the target.
    """
    if not (target_u_radius_mm > 0):
        raise UserError(f"the wanted radius uncertainty must be positive, got {target_u_radius_mm!r}")
    if not (scatter_mm >= 0):
        raise UserError(f"the seating scatter must be zero or positive, got {scatter_mm!r}")
    room = target_u_radius_mm**2 - other_u_radius_mm**2
    if room <= 0:
        return None
    per_seating = (geometry.dradius_dsagitta(sagitta_mm, ring_radius_mm) * scatter_mm) ** 2 * (1.0 + zero_factor)
    # The tiny allowance keeps an exact integer ratio from rounding up by one.
    return max(1, math.ceil(per_seating / room * (1.0 - 1e-12)))
