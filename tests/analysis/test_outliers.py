"""Outlier tests against their published definitions and reference libraries."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy import stats

from logger.analysis import outliers
from logger.analysis.outliers import detectable_shift, judge
from logger.errors import UserError


def test_modified_z_constant_is_the_normal_quartile():
    # Iglewicz & Hoaglin (1993): M = 0.6745 (x - median) / MAD, 0.6745 = Phi^-1(0.75) (scipy.stats.norm)
    assert math.isclose(outliers.MAD_TO_Z, stats.norm.ppf(0.75), abs_tol=5e-5)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-1, 1, allow_nan=False), min_size=3, max_size=40), st.floats(1e-6, 1e-2))
def test_modified_z_against_scipy_mad(values, floor):
    # MAD from scipy.stats.median_abs_deviation (scale=1), floored at one count as README.md states
    # (a quantised-reading trap, common practice)
    x = np.asarray(values)
    mad = max(stats.median_abs_deviation(x, scale=1.0), floor)
    expected = 0.6745 * (x - np.median(x)) / mad
    got = outliers.modified_z(values, floor)
    for (rej, score, reason), e in zip(got, expected):
        assert math.isclose(score, e, rel_tol=1e-9, abs_tol=1e-12)
        assert rej == (abs(e) > 3.5) and bool(reason) == rej


def _numbers(reason: str) -> list[float]:
    return [float(t) for t in re.findall(r"[-+]?\d+\.?\d*(?:e[-+]?\d+)?", reason)]


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1, 1, allow_nan=False), min_size=3, max_size=30), st.floats(1e-6, 1e-2),
       st.sampled_from(["modified-z", "grubbs", "chauvenet"]), st.floats(1.5, 4.0))
def test_a_rejection_reason_reads_as_beyond_its_cut(values, floor, method, z_cut):
    # a score just past its cut, rounded to fixed places, read as the cut itself ("modified z = -3.5
    # beyond 3.5"): the reason's own numbers must show the rejection
    limit = z_cut if method == "modified-z" else None
    for rejected, _, reason in judge(values, method, floor, limit):
        if not rejected:
            continue
        if method == "chauvenet":  # rejected when fewer than 1/2 such seatings are expected
            (expected,) = _numbers(reason)
            assert expected < 0.5, reason
        else:
            score, cut = _numbers(reason.split("=", 1)[1])
            assert abs(score) > cut, reason


@pytest.mark.parametrize("method, limit, values, words", [
    # a seating 3.528 modified z out (the MAD floored at 0.001: 0.6745 * 0.00523 / 0.001): past 3.5 only in
    # the second place
    ("modified-z", 3.5, [0.0, 0.0, 0.0, 0.001, -0.001, -0.00523], "modified z = -3.53 beyond 3.5"),
])
def test_a_score_just_past_its_cut_gets_the_places_that_show_it(method, limit, values, words):
    reasons = [r for rejected, _, r in judge(values, method, 0.001, limit) if rejected]
    assert reasons == [f"outlier: {words}"]


def test_identical_quantised_seatings_are_not_outliers():
    # every seating on the same count, one a count off: the MAD floor keeps it (common practice trap)
    values = [0.340] * 9 + [0.341]
    assert not any(r for r, _, _ in outliers.modified_z(values, floor=0.001))


def test_grubbs_critical_values_against_table():
    # Two-sided Grubbs critical values at alpha = 0.05 (tables in the NIST/SEMATECH e-Handbook
    # section 1.3.5.17 and Grubbs 1969; from memory): n=3 1.155, n=10 2.290, n=20 2.709, n=30 2.908
    for n, g in [(3, 1.155), (10, 2.290), (20, 2.709), (30, 2.908)]:
        assert abs(outliers._grubbs_critical(n, 0.05) - g) < 0.002


def test_grubbs_finds_a_planted_outlier_and_only_it():
    rng = np.random.default_rng(7)
    x = list(rng.normal(0, 1, 20))
    x[5] = 8.0
    verdicts = outliers.grubbs(x, floor=1e-9)
    assert [i for i, (r, _, _) in enumerate(verdicts) if r] == [5]


def test_grubbs_takes_its_significance_level():
    # A value whose G lies between the two-sided critical values at alpha 0.05 and 0.01 (both from the
    # NIST/SEMATECH e-Handbook 1.3.5.17 formula, written here with scipy's t quantile) is an outlier
    # at the first level and not at the second.
    n = 10

    def critical(alpha):
        t = stats.t.ppf(1 - alpha / (2 * n), n - 2)
        return (n - 1) / math.sqrt(n) * math.sqrt(t * t / (n - 2 + t * t))

    g_05, g_01 = critical(0.05), critical(0.01)
    assert g_05 < g_01
    base = np.linspace(-1, 1, n - 1)
    for x_far in np.linspace(1.0, 10.0, 2000):  # the far value whose G is midway between the two
        x = np.append(base, x_far)
        g = abs(x_far - x.mean()) / x.std(ddof=1)
        if g > (g_05 + g_01) / 2:
            break
    assert g_05 < g < g_01
    assert outliers.judge(list(x), "grubbs", 1e-9)[-1][0]  # default level 0.05
    assert outliers.judge(list(x), "grubbs", 1e-9, 0.05)[-1][0]
    assert not outliers.judge(list(x), "grubbs", 1e-9, 0.01)[-1][0]


def test_a_parameter_for_another_method_is_refused():
    assert outliers.limits("grubbs", {"z_cut": None, "alpha": None}) == {"alpha": 0.05}
    assert outliers.limits("modified-z", {"z_cut": 4.0, "alpha": None}) == {"z_cut": 4.0}
    assert outliers.limits("chauvenet", {"z_cut": None, "alpha": None}) == {}
    with pytest.raises(UserError, match=r"^--z-cut is for --rejection modified-z, not grubbs \(its parameter is --alpha\)$"):
        outliers.limits("grubbs", {"z_cut": 3.0})


def test_chauvenet_threshold():
    # Chauvenet: reject when n * P(|Z| >= z) < 1/2; for n = 10 the cut is z = 1.96 (Taylor,
    # "An Introduction to Error Analysis", ch. 6; the value follows from scipy.stats.norm)
    z_cut = stats.norm.isf(0.5 / 10 / 2)
    assert math.isclose(z_cut, 1.96, abs_tol=0.001)
    # Ten seatings (invented): the -6 lies beyond the cut (z = 2.085), the +6 just inside it
    # (z = 1.950, the mean being 0.2), everything else well inside.
    x = np.array([0.0, 1.0, -1.0, 0.0, 1.0, -1.0, 0.0, 2.0, -6.0, 6.0])
    z = np.abs(x - x.mean()) / x.std(ddof=1)  # sample standard deviation (Taylor, ch. 4)
    assert 2.0 < z[8] < 2.1 and z_cut - 0.02 < z[9] < z_cut and max(z[:8]) < 1.3
    verdicts = outliers.chauvenet(list(x), floor=1e-9)
    assert [i for i, (r, _, _) in enumerate(verdicts) if r] == [8]
    for zi, (r, score, reason) in zip(z, verdicts):
        assert math.isclose(score, zi, rel_tol=1e-12)
        assert r == (10 * 2 * stats.norm.sf(zi) < 0.5) and bool(reason) == r


def test_fewer_than_three_are_never_judged():
    for method in outliers.METHODS:
        assert outliers.judge([0.0, 10.0], method, 0.001) == [(False, 0.0, "")] * 2


def test_each_method_name_runs_its_own_test():
    # a value far out among five: each named method gives its own published statistic, "none" keeps all
    x = [0.0, 0.001, -0.001, 0.002, 0.5]
    assert outliers.METHODS == ("modified-z", "grubbs", "chauvenet", "none")
    assert outliers.judge(x, "modified-z", 1e-6, 3.5) == outliers.modified_z(x, 1e-6, 3.5)
    assert outliers.judge(x, "grubbs", 1e-6) == outliers.grubbs(x, 1e-6)
    assert outliers.judge(x, "chauvenet", 1e-6) == outliers.chauvenet(x, 1e-6)
    assert outliers.judge(x, "none", 1e-6) == [(False, 0.0, "")] * len(x)
    assert outliers.judge(x, "grubbs", 1e-6) != outliers.judge(x, "chauvenet", 1e-6)


@pytest.mark.parametrize("values", [[0.0, 0.001, 0.5, 0.002], [0.0, 1.0]])
def test_an_unknown_method_is_a_user_error_never_chauvenet(values):
    with pytest.raises(UserError, match=r"rejection method 'chauvenets' is not known \(known: modified-z, grubbs, chauvenet, none\)"):
        outliers.judge(values, "chauvenets", 1e-6)


@pytest.mark.parametrize("method", ["modified-z", "grubbs", "chauvenet"])
def test_detectable_shift_is_where_the_test_starts_to_reject(method):
    # The stated smallest shift must be the test's own boundary: one seating moved a little less is
    # kept, a little more is rejected (modified z: 3.5 MAD / 0.6745, Iglewicz and Hoaglin 1993, with
    # the MAD floored at the step; Grubbs: NIST/SEMATECH 1.3.5.17; Chauvenet: n P(|Z| >= z) = 1/2).
    rng = np.random.default_rng(1)
    base = list(rng.normal(0, 0.002, 11))
    step = 0.001
    d = detectable_shift(base, method, step)
    med = float(np.median(base)) if method == "modified-z" else None
    for factor, rejected in ((0.9, False), (1.15, True)):
        x = base + [(med if med is not None else float(np.mean(base))) + factor * d]
        assert judge(x, method, step)[-1][0] is rejected, (method, factor)
    assert detectable_shift(base, "none", step) is None and detectable_shift(base[:2], method, step) is None


def test_detectable_shift_under_the_one_count_floor():
    # Identical readings: the MAD is floored at one count q, so the cut sits at 3.5 q / 0.6745 = 5.19 q
    # (Iglewicz and Hoaglin's constant 0.6745, from memory) - the blind spot the summary now states.
    assert detectable_shift([0.0] * 10, "modified-z", 0.001) == pytest.approx(3.5 * 0.001 / 0.6745, rel=1e-12)
