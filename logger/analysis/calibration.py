"""Calibration on a reference of known radius: the effective ring radius and its GUM budget.

A run on a reference sphere (a test plate, a precision ball, a lens surface)
of certified radius R gives a mean sagitta s; inverting the exact relation
gives the ring radius, r^2 = s (2 (R -+ rho) - s) (geometry.ring_radius_from_reference_mm).
Each reference's r has three inputs: its sagitta (the run's own budget), the
certificate's radius and the ball.  Several references combine by
generalised least squares (GUM 5.2: correlated inputs), because every run
shares the one ball, and runs on one reference share its certificate.  The
ball's share is kept apart in the written profile as a coefficient dr/dd,
so a later measurement varies r and rho together and the ball's error
cancels where it should (see docs/measurement.md, "Calibrating on a reference").
Every length is in millimetres.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats

from logger.analysis import geometry
from logger.analysis.uncertainty import Budget, Component

BALL = "ball diameter"


@dataclass(frozen=True)
class Reference:
    """One run on a reference: what its summary says and what its certificate says."""

    run: str
    radius_mm: float  # certified radius
    radius_u_mm: float  # its standard uncertainty
    surface: str
    sagitta_mm: float
    sagitta_u_mm: float
    sagitta_dof: float


@dataclass(frozen=True)
class Input:
    """A physical input of the calibration, shared by every reference that depends on it."""

    key: str
    u_mm: float
    dof: float = math.inf
    distribution: str = "normal"


def ring_terms(ref: Reference, foot_radius_mm: float, ball_u_mm: float) -> tuple[float, dict, dict]:
    """A reference's ring radius, its inputs by key, and r's sensitivity to each (dr/dd for the ball)."""
    r = geometry.ring_radius_from_reference_mm(ref.radius_mm, ref.sagitta_mm, foot_radius_mm, ref.surface)
    c = geometry.ring_radius_sensitivities(ref.radius_mm, ref.sagitta_mm, foot_radius_mm, ref.surface)
    sag_key = f"sagitta, {ref.run}"
    cert_key = f"reference {ref.radius_mm:.9g} +- {ref.radius_u_mm:.3g} mm (certificate)"  # one per reference
    dist = "t" if math.isfinite(ref.sagitta_dof) else "normal"
    inputs = {sag_key: Input(sag_key, ref.sagitta_u_mm, ref.sagitta_dof, dist),
              cert_key: Input(cert_key, ref.radius_u_mm), BALL: Input(BALL, ball_u_mm)}
    sens = {sag_key: c["sagitta"], cert_key: c["reference_radius"], BALL: c["foot_radius"] / 2.0}
    return r, inputs, sens


@dataclass(frozen=True)
class Calibration:
    ring_radius_mm: float
    budget: Budget  # of the combined ring radius: one component per shared input
    ball_coefficient: float  # dr/dd of the combined ring radius (unit-free)
    weights: tuple[float, ...]  # of each reference in the mean (they add up to 1)
    rings_mm: tuple[float, ...]  # each reference's own ring radius
    ring_u_mm: tuple[float, ...]  # and its standard uncertainty
    chi2: float | None  # (r - r_hat)' V^-1 (r - r_hat), n - 1 dof; None for one reference
    references: tuple[Reference, ...]

    @property
    def u_mm(self) -> float:
        return self.budget.u_c

    @property
    def u_without_ball_mm(self) -> float:
        """What the written profile states as u(ring_radius): every term but the ball's, which the
        profile carries through the coefficient instead."""
        return math.sqrt(math.fsum(c.contribution**2 for c in self.budget.components if c.name != BALL))

    @property
    def birge_ratio(self) -> float | None:
        n = len(self.references)
        return None if self.chi2 is None else math.sqrt(self.chi2 / (n - 1))

    @property
    def consistent(self) -> bool:
        """False when the references disagree beyond their uncertainties: chi2 above its 95 % quantile."""
        n = len(self.references)
        return self.chi2 is None or self.chi2 <= float(stats.chi2.ppf(0.95, n - 1))

    @property
    def sagitta_range_mm(self) -> tuple[float, float]:
        s = [ref.sagitta_mm for ref in self.references]
        return min(s), max(s)


def calibrate(references: list[Reference], foot_radius_mm: float, ball_u_mm: float) -> Calibration:
    """Every reference's r, then their generalised-least-squares mean (GUM 5.2, C.3.4).

    V_ij = sum over inputs k of c_ik c_jk u_k^2 (the ball and a shared
    certificate make it non-diagonal); weights w = V^-1 1 / (1' V^-1 1);
    r_hat = w . r.  The combined sensitivity to input k is sum_i w_i c_ik,
    so the budget of r_hat lists each physical input once and its u_c^2
    equals 1 / (1' V^-1 1).
    """
    terms = [ring_terms(ref, foot_radius_mm, ball_u_mm) for ref in references]
    inputs: dict[str, Input] = {}
    for _, inp, _ in terms:
        inputs.update(inp)
    keys = list(inputs)
    rings = np.array([r for r, _, _ in terms])
    C = np.array([[sens.get(k, 0.0) for k in keys] for _, _, sens in terms])  # n x inputs
    u = np.array([inputs[k].u_mm for k in keys])
    V = (C * u**2) @ C.T
    ones = np.ones(len(rings))
    Vinv_1 = np.linalg.solve(V, ones)
    w = Vinv_1 / (ones @ Vinv_1)
    r_hat = float(w @ rings)
    combined = w @ C
    comps = tuple(Component(k, inputs[k].u_mm, float(ck), inputs[k].dof, "A" if k.startswith("sagitta") else "B",
                            inputs[k].distribution) for k, ck in zip(keys, combined))
    resid = rings - r_hat
    chi2 = float(resid @ np.linalg.solve(V, resid)) if len(rings) > 1 else None
    return Calibration(r_hat, Budget("effective ring radius", r_hat, comps), float(combined[keys.index(BALL)]),
                       tuple(float(x) for x in w), tuple(float(x) for x in rings), tuple(float(math.sqrt(V[i, i])) for i in range(len(rings))),
                       chi2, tuple(references))


def sagitta_dof(summary: dict) -> float:
    """The sagitta's effective degrees of freedom (Welch-Satterthwaite, GUM G.4.1) from a run's budget.

    Only the Type A terms have finite dof, and each is a sagitta term:
    its u is contribution / |sensitivity| in the radius budget.
    """
    u_sag = summary.get("sagitta_u_mm") or 0.0
    denom = 0.0
    for c in summary.get("budget") or []:
        dof, sens = c.get("dof"), c.get("sensitivity")
        if dof and sens:
            denom += (c["contribution_mm"] / abs(sens)) ** 4 / dof
    return math.inf if denom == 0 or u_sag == 0 else u_sag**4 / denom


def calibration_note(calibrated_range_mm: tuple[float, float] | None, sagitta_mm: float | None) -> str | None:
    """A warning for a measurement far from the sagittas it was calibrated at (common practice:
    calibrate near the working point; the indicator's scale and linearity errors do not cancel far away)."""
    if calibrated_range_mm is None or sagitta_mm is None:
        return None
    lo, hi = calibrated_range_mm
    if lo / 3.0 <= sagitta_mm <= 3.0 * hi:
        return None
    return (f"sagitta {sagitta_mm:.4f} mm is outside a third to three times the calibrated range "
            f"{lo:.4f}..{hi:.4f} mm: the indicator's scale error is not calibrated out here")
