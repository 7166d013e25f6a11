"""The MAD's floor (outliers.scale_floor): one count when nothing dithers, lower when noise does, and
what that costs honest sessions and buys against grit, by simulation through the capture pipeline."""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest
from scipy import stats

from logger.analysis import outliers
from logger.simulator import load_scenario, simulate
from tests.helpers.simrun import analyse_run

Q = 0.001  # one count, mm


def test_undithered_seatings_keep_the_one_count_floor():
    # No noise within a seating: its mean sits on a whole count, its error is rectangular of width q,
    # u = q / sqrt(12) (GUM, JCGM 100:2008, F.2.2.1), so the effective step sqrt(12) u is one count.
    # A within-seating SD below q / sqrt(12) is no dither at all (Sheppard's correction, q^2 / 12).
    for within in (0.0, 0.2 * Q, Q / math.sqrt(12.0)):
        assert outliers.scale_floor(Q, within) == pytest.approx(Q, rel=1e-9)


@pytest.mark.parametrize("noise", [0.1, 0.15, 0.25, 0.35, 0.45])
def test_effective_step_against_an_exact_computation_of_quantised_means(noise, monkeypatch):
    # Written here, independent of the series in the code: for a sample x + e, e normal of SD sigma,
    # rounded to a step, P(count k) = Phi((k + 1/2 - x) / sigma) - Phi((k - 1/2 - x) / sigma)
    # (scipy.stats.norm), so a long seating's mean and its samples' variance are exact sums.  The RMS
    # of the mean's error over offsets uniform within a step, times sqrt(12), is the effective step the
    # seatings really have (one count undithered: GUM F.2.2.1).  The floor is fed the within-seating SD
    # of the rounded samples, as the session feeds it; it may err only towards a larger floor, by
    # at most a tenth once the noise dithers (sigma >= 0.25 q), and stays within one count.
    monkeypatch.setattr(outliers, "FLOOR_LEAST_COUNTS", 0.0)  # the effective step alone
    x = (np.arange(4000) + 0.5) / 4000  # offsets, in counts
    k = np.arange(-12, 13)[:, None]
    p = stats.norm.cdf((k + 0.5 - x) / noise) - stats.norm.cdf((k - 0.5 - x) / noise)
    mean, var = (k * p).sum(axis=0), (k * k * p).sum(axis=0) - (k * p).sum(axis=0) ** 2
    exact = math.sqrt(12.0) * math.sqrt(float(np.mean((mean - x) ** 2))) * Q
    floor = outliers.scale_floor(Q, math.sqrt(float(np.mean(var))) * Q)
    assert exact * (1 - 1e-3) <= floor <= Q * (1 + 1e-12)
    if noise >= 0.25:
        assert floor <= 1.1 * exact


def test_pooled_residuals_set_the_floor_when_they_are_wider():
    # The pooled scale: each phase about its own median, the MAD of them all together
    # (scipy.stats.median_abs_deviation, scale=1, on the centred values), times FLOOR_POOLED_MADS.
    rng = np.random.default_rng(2)
    flats, surface = rng.normal(3.0, 2.0 * Q, 10), rng.normal(-0.3, 2.0 * Q, 10)
    centred = np.concatenate([flats - np.median(flats), surface - np.median(surface)])
    expected = outliers.FLOOR_POOLED_MADS * float(np.median(np.abs(centred)))
    assert expected > Q  # wider than one count, so neither of the other two terms binds
    assert stats.median_abs_deviation(centred, scale=1.0) == pytest.approx(np.median(np.abs(centred)), abs=1e-6 * Q)
    assert outliers.scale_floor(Q, 0.0, [flats, surface]) == pytest.approx(expected, rel=1e-12)
    assert outliers.scale_floor(Q, 0.6 * Q, []) == pytest.approx(outliers.FLOOR_LEAST_COUNTS * Q, rel=1e-12)


# docs/measurement.md states: over scatters of 0.8-2 counts, at most 3 % of honest sessions lose a
# seating to the rejection (1.3-1.7 % measured: benchmarks/grit_study.py).
STATED_HONEST_RATE = 0.03


def test_honest_sessions_are_rarely_rejected():
    # Honest sessions (no grit, no rocking, the rig's errors drawn per session) where the floor is
    # lowest and the MAD of ten seatings is least steady: scatter 0.8-2 counts, dithering noise, both
    # stream modes.  The count of sessions losing a seating stays within the 99.9 % binomial quantile
    # at the stated rate (scipy.stats.binom), 9 of 96; the shipped floor loses one here, a floor of
    # zero 17 (the flats keep one count either way).
    base = load_scenario("mirror-150-f8-rough")
    cells = list(itertools.product(("continuous", "on-change"), (0.8, 1.15, 1.5, 2.0), (0.3, 1.0)))
    per_cell = 6
    rejected = 0
    for cell, (mode, scatter, noise) in enumerate(cells):
        sc = base.with_overrides(scatter_mm=scatter * Q, noise_mm=noise * Q, mode=mode, systematics=True)
        for seed in range(70_000 + 100 * cell, 70_000 + 100 * cell + per_cell):
            rejected += analyse_run(simulate(sc, seed))["seatings_rejected"] > 0
    n = len(cells) * per_cell
    assert rejected <= stats.binom.ppf(0.999, n, STATED_HONEST_RATE), (rejected, n)


def test_grains_of_four_to_six_counts_are_caught_more_often():
    # One surface seating shifted by 4, 5 or 6 counts (a grain of 3 x that under one foot of an
    # equilateral rig: the plane through the feet at their centroid, textbook geometry), scatter
    # 0.8 count, noise 0.3 count.  docs/measurement.md states the shipped floor catches them in
    # about 0.19, 0.57 and 0.90 of sessions, 50 of these 90 (the one-count floor: 0.05, 0.30, 0.76,
    # about 33 of 90; on these seeds it catches 35); at least half must be caught.
    base = load_scenario("mirror-150-f8-rough")
    caught = 0
    for shift in (4, 5, 6):
        sc = base.with_overrides(grit_seatings=(base.flat_before + 4,), grit_offset_mm=shift * Q)
        for seed in range(60_000, 60_030):
            caught += analyse_run(simulate(sc, seed))["seatings_rejected"] > 0
    assert caught >= 45, caught
