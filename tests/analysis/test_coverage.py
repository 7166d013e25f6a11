"""The seating engine against the virtual indicator's known truth: a coverage study.

For many seeded sessions of invented scenarios (continuous and on-change,
mm and inch, concave and convex, grit, rocking, line noise, drift with an
uneven bracket, a unit switch mid-stream) the number of accepted seatings
must be exactly what the simulator planned, and the stated expanded
uncertainty U (~95 %) must cover the true radius in at least 90 % of the
sessions (the meaning of a coverage interval, JCGM 100:2008 6.2 and
JCGM 101:2008 5.3).  U must also stay honest the other way: at most twice
the ideal value, the one computed from the true seating scatter plus the
stated Type B terms.

The simulator places its seatings with logger.analysis.geometry, the same relation
the analysis inverts, so this study checks the detection, the statistics
and the budget, not the geometry; the geometry is checked against exact
constructions in tests/analysis/test_geometry.py and tests/simulator/test_simulator.py.
"""

from __future__ import annotations

import math
import re

import pytest

from logger.analysis import geometry
from logger.simulator import load_scenario, simulate
from tests.helpers.simrun import analyse_run

SEEDS = range(34)  # x 6 variants = 204 sessions
_NUMBER = re.compile(rb"([+-]?)([0-9.,]+)")


class UnitSwitch:
    """A run whose stream switches to inch lines halfway (the user pressed the unit button)."""

    def __init__(self, run):
        self.run, self.truth, self.scenario, self.duration_s = run, run.truth, run.scenario, run.duration_s

    def lines(self):
        half = self.duration_s / 2
        for t, data in self.run.lines():
            m = _NUMBER.match(data)
            if t > half and m:
                mm = float(m.group(2).replace(b",", b".")) * (-1 if m.group(1) == b"-" else 1)
                data = b"%+.5f in\r\n" % (mm / 25.4)  # 25.4 mm per inch exactly
            yield t, data


def variants():
    yield "continuous mm concave", load_scenario("mirror-150-f8-rough"), False
    yield "continuous mm convex", load_scenario("tool-150-convex"), False
    yield "on-change inch", load_scenario("inch-on-change"), False
    yield "grit, rocking, garbage", load_scenario("messy-grit-rock"), False
    yield "uneven bracket with drift", load_scenario("mirror-150-f8-rough").with_overrides(
        flat_before=6, flat_after=1, drift_mm_per_min=0.004), False
    yield "unit switch", load_scenario("mirror-150-f8-rough"), True


def _ideal_U(summary, run) -> float:
    """2 x the combined u with the TRUE seating scatter sigma and the stated Type B terms.

    Sagitta term sigma / sqrt(n); zero term sigma / sqrt(n) for a constant zero, or the
    textbook standard error of a fitted line at the surface's mean time,
    sigma sqrt(1/n + (t_s - t_f)^2 / Sxx), when flats bracket the surface.
    """
    sc, truth = run.scenario, run.truth
    r, _ = sc.profile.contact_mm(truth["surface"])
    dRds = abs(geometry.dradius_dsagitta(truth["sagitta_mm"], r))
    mid = [(s["t_start_s"] + s["t_end_s"]) / 2 for s in truth["seatings"] if s["kind"] in ("flat", "surface")]
    kinds = [s["kind"] for s in truth["seatings"] if s["kind"] in ("flat", "surface")]
    t_f = [t for t, k in zip(mid, kinds) if k == "flat"]
    t_s = [t for t, k in zip(mid, kinds) if k == "surface"]
    n_f = len(t_f)
    if min(t_f) < min(t_s) and max(t_f) > max(t_s):
        mean_f = sum(t_f) / n_f
        sxx = sum((t - mean_f) ** 2 for t in t_f)
        zero_factor = 1 / n_f + (sum(t_s) / len(t_s) - mean_f) ** 2 / sxx
    else:
        zero_factor = 1 / n_f
    scatter = dRds * sc.scatter_mm * math.sqrt(1 / len(t_s) + zero_factor)
    type_b = [b["contribution_mm"] for b in summary["budget"] if b["kind"] == "B"]
    return 2 * math.sqrt(scatter**2 + sum(x * x for x in type_b))


@pytest.mark.parametrize("label,scenario,switch", list(variants()), ids=lambda v: v if isinstance(v, str) else "")
def test_coverage_and_exact_counts(label, scenario, switch):
    covered, ratios = 0, []
    for seed in SEEDS:
        run = simulate(scenario, seed)
        summary = analyse_run(UnitSwitch(run) if switch else run)
        c = run.truth["counts"]
        assert (summary["seatings_flat"], summary["seatings_surface"]) == (
            c["expected_accepted_flat"], c["expected_accepted_surface"]), f"{label}, seed {seed}"
        assert summary["seatings_rejected"] == c["flat"] + c["surface"] - c["expected_accepted_flat"] - c[
            "expected_accepted_surface"]
        assert summary["surface"] == run.truth["surface"]
        covered += abs(summary["radius_mm"] - run.truth["radius_mm"]) <= summary["radius_U_mm"]
        ratios.append(summary["radius_U_mm"] / _ideal_U(summary, run))
    assert covered >= 0.9 * len(SEEDS), f"{label}: U covered the true radius in {covered} of {len(SEEDS)}"
    assert max(ratios) <= 2.0, f"{label}: U up to {max(ratios):.2f} x the ideal"
