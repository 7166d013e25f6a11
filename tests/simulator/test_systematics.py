"""The simulator's rig errors: drawn within the profile's tolerances, and seated as constructed."""

import math

import numpy as np
import pytest

from logger.analysis import geometry
from logger.simulator import load_scenario, simulate
from tests.helpers.exact_construction import reading_off_axis


def test_draws_stay_within_the_stated_tolerances_and_vary():
    sc = load_scenario("mirror-150-f8-rough").with_overrides(systematics=True)
    tol = sc.profile.spherometer.systematic_mm
    s_nom = geometry.probe_sagitta_mm(sc.radius_mm, *sc.profile.contact_mm("concave"), "concave")
    draws = [simulate(sc, seed).truth["systematics"] for seed in range(40)]
    flats = [d["flat_error_mm"] for d in draws]
    assert max(map(abs, flats)) <= tol["flat_flatness"] and np.std(flats) > 0.3 * tol["flat_flatness"]
    assert max(abs(d["indicator_scale_error"]) * s_nom for d in draws) <= tol["indicator_error"] * (1 + 1e-12)
    assert max(d["probe_offset_mm"] for d in draws) <= tol["probe_offset"]
    legs = np.array([d["true_legs_mm"] for d in draws])
    assert np.all(np.abs(legs - [70.02, 69.98, 70.01]) < 0.1) and legs.std() > 0.005
    assert simulate(sc, 3).truth["systematics"] == simulate(sc, 3).truth["systematics"]  # reproducible


def test_a_surface_seating_is_the_exact_construction_of_the_drawn_rig():
    # Exact construction (tests/helpers/exact_construction.py): the off-axis probe on the true legs
    # and ball; the indicator shows (1 + g) times the travel, the flat's own bulge likewise.
    sc = load_scenario("mirror-150-f8-rough").with_overrides(systematics=True, scatter_mm=0.0)
    run = simulate(sc, 11)
    d = run.truth["systematics"]
    r = geometry.circumradius_mm(*d["true_legs_mm"])
    want = reading_off_axis(sc.radius_mm, r, d["true_ball_mm"] / 2, d["probe_offset_mm"])
    g = d["indicator_scale_error"]
    surf = [x for x in run.truth["seatings"] if x["kind"] == "surface"]
    flat = [x for x in run.truth["seatings"] if x["kind"] == "flat"]
    assert -surf[0]["offset_from_zero_mm"] == pytest.approx(want * (1 + g), rel=1e-9)  # in-positive, concave
    assert flat[0]["offset_from_zero_mm"] == pytest.approx(d["flat_error_mm"] * (1 + g), rel=1e-12, abs=1e-15)
    assert d["probe_offset_mm"] > 0 and math.isfinite(g)
