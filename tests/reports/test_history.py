"""History across sessions: ordering, target band, kinds, CSV, and when the trend is said.

Runs are INVENTED (test_runs.write_run with the radius overridden).  The
trend criterion is checked against scipy.stats.linregress, whose p-value is
the two-sided t test of a zero slope (scipy documentation), and against the
slope from numpy.polyfit (ordinary least squares).
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from tests.helpers.runfolder import write_run

from logger.cli.main import main  # noqa: E402
from logger.reports.history import history_table, make_history_figure, run_kind, trend, write_history  # noqa: E402
from logger.run.load import load_runs  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


def make_runs(base: Path, radii, label="mirror", U=2.0, day0=1, target=None):
    dirs = []
    for i, R in enumerate(radii):
        d = base / f"{label.replace(' ', '_')}{i}"
        write_run(d, label=label, started=f"2024-04-{day0 + i:02d}T18:00:00Z", n_surface=3, seated_s=0.5,
                  summary={"radius_mm": R, "radius_U_mm": U, "target_radius_mm": target})
        dirs.append(d)
    return dirs


def table_of(radii, U=2.0, kind="mirror"):
    return pd.DataFrame({"kind": kind, "radius_mm": np.asarray(radii, dtype=float), "radius_U_mm": U})


def test_ordering_target_band_and_kinds(tmp_path):
    mirror = make_runs(tmp_path, [2500.0, 2470.0, 2445.0], target=2400.0)
    tool = make_runs(tmp_path, [2510.0, 2480.0], label="grinding tool", day0=10)
    png, csv_path, trends = write_history([tool[1], mirror[2], tool[0], mirror[0], mirror[1]],
                                          tmp_path / "hist.png", tolerance=5.0)
    table = pd.read_csv(csv_path)
    assert list(pd.to_datetime(table["started"])) == sorted(pd.to_datetime(table["started"]))
    assert table["kind"].tolist() == ["mirror"] * 3 + ["tool"] * 2
    assert (table["target_radius_mm"] == 2400.0).all()  # taken from the summaries
    np.testing.assert_allclose(table["radius_to_go_mm"], table["radius_mm"] - 2400.0)  # as in summary.json
    assert png.read_bytes()[:4] == b"\x89PNG"

    runs = load_runs(mirror + tool)
    t = history_table(runs)
    fig = make_history_figure(t, 2400.0, 5.0, "mm", trends)
    ax = fig.axes[0]
    target = [ln for ln in ax.lines if ln.get_gid() == "target"]
    assert len(target) == 1 and target[0].get_ydata()[0] == 2400.0
    band = [p for p in ax.patches if p.get_gid() == "target-band"]
    y = band[0].get_path().transformed(band[0].get_patch_transform()).vertices[:, 1]
    assert (y.min(), y.max()) == (2395.0, 2405.0)
    runs_art = {c.get_label().split()[0]: c.lines[0] for c in ax.containers}  # the data line of each error-bar set
    m, tl = runs_art["mirror"], runs_art["tool"]
    assert m.get_marker() != tl.get_marker() and m.get_color() != tl.get_color()
    assert m.get_linestyle() != tl.get_linestyle()
    np.testing.assert_array_equal(m.get_ydata(), [2500.0, 2470.0, 2445.0])
    assert len(ax.containers) == 2  # one error-bar set per kind
    assert ax.get_ylabel() == "radius of curvature (mm)"


@pytest.mark.parametrize("radii, said", [([2500.0, None, 2470.0], "1 run"), ([2500.0, None, None], "2 runs")])
def test_runs_left_out_of_the_plot_are_counted_in_good_english(tmp_path, radii, said):
    t = history_table(load_runs(make_runs(tmp_path, radii)))
    fig = make_history_figure(t, None, 0.0, "mm")
    (note,) = [x.get_text() for x in fig.axes[0].texts if x.get_gid() == "left-out"]
    assert note == f"{said} without a radius or start time not shown"


def test_inches_and_given_target(tmp_path):
    dirs = make_runs(tmp_path, [2500.0, 2480.0, 2461.0])
    png, csv_path, trends = write_history(dirs, tmp_path / "h.png", target_radius=96.0, unit="in")
    table = pd.read_csv(csv_path)
    assert (table["target_radius_mm"] == 96.0 * 25.4).all()  # files stay mm; 1 in = 25.4 mm exactly
    assert "in per session" in trends[0].sentence


def test_run_kind_from_label_then_surface():
    # label words first; concave mirror / convex tool otherwise (common practice: the tool is convex)
    assert run_kind("150 mm f/8 mirror", "convex") == "mirror"
    assert run_kind("Tool, after 80 grit", "concave") == "tool"
    assert run_kind("", "convex") == "tool" and run_kind("", "concave") == "mirror"
    assert run_kind("lens check", "") == "other"


def test_supported_trend_counts_sessions():
    radii = [2500.0, 2480.0, 2461.0, 2440.0]
    tr = trend(table_of(radii), "mirror", 2400.0, 1.0, "mm")
    slope = np.polyfit(np.arange(4), radii, 1)[0]  # reference: least squares (numpy)
    assert tr.supported and math.isclose(tr.slope_mm_per_session, slope, rel_tol=1e-12)
    assert tr.sessions_left == math.ceil((2400.0 - 2440.0) / slope) == 3
    assert "about 3 more sessions at the current rate" in tr.sentence


def test_trend_not_said_without_support():
    cases = {
        "2 runs with a radius": ([2500.0, 2480.0], 2400.0),
        "not significantly different from zero": ([2450.0, 2440.0, 2452.0, 2445.0], 2400.0),
        "moving away": ([2400.0, 2420.0, 2440.0, 2461.0], 2300.0),
        "back and forth": ([2500.0, 2470.0, 2480.0, 2440.0, 2420.0, 2400.0], 2300.0),
        "no target": ([2500.0, 2480.0, 2461.0], None),
    }
    for why, (radii, target) in cases.items():
        tr = trend(table_of(radii), "mirror", target, 1.0, "mm")
        assert not tr.supported and why in tr.sentence and "more session" not in tr.sentence, why
    # the back-and-forth series alone is significant by the t test: the step rule is what stops it
    assert stats.linregress(np.arange(6), [2500.0, 2470.0, 2480.0, 2440.0, 2420.0, 2400.0]).pvalue < 0.05


@settings(max_examples=120, deadline=None)
@given(
    radii=st.lists(st.floats(2000.0, 3000.0), min_size=0, max_size=8),
    target=st.floats(1500.0, 3500.0),
    U=st.floats(0.0, 20.0),
)
def test_trend_said_only_when_supported(radii, target, U):
    tr = trend(table_of(radii, U), "mirror", target, 0.5, "mm")
    if "more session" not in tr.sentence:
        assert not tr.supported
        return
    r = np.asarray(radii)
    assert len(r) >= 3
    fit = stats.linregress(np.arange(len(r)), r)  # reference: two-sided t test of the slope (scipy)
    assert fit.pvalue <= 0.05 + 1e-9
    direction = np.sign(fit.slope)
    assert direction == np.sign(target - r[-1])
    assert np.all(np.diff(r) * direction >= -math.hypot(U, U) - 1e-9)
    assert tr.sessions_left == max(1, math.ceil(round((target - r[-1]) / fit.slope, 6)))


@settings(max_examples=60, deadline=None)
@given(
    n=st.integers(3, 8),
    step=st.floats(1.0, 50.0),
    start=st.floats(2200.0, 2800.0),
    whole=st.integers(2, 40),
    part=st.sampled_from([0.0, 0.25, 0.5, 0.9]),
)
def test_steady_progress_is_always_said(n, step, start, whole, part):
    radii = start - step * np.arange(n)  # an exact straight line towards a target below
    target = radii[-1] - (whole + part) * step
    tr = trend(table_of(radii, 1.0), "mirror", target, 0.5, "mm")
    assert tr.supported and tr.sessions_left == (whole if part == 0 else whole + 1)


def test_cli_history_prints_trend_and_writes_files(tmp_path):
    dirs = make_runs(tmp_path, [2500.0, 2480.0, 2461.0, 2440.0], target=2400.0)
    out = tmp_path / "hist.png"
    result = CliRunner().invoke(main, ["history", *map(str, dirs), "--out", str(out)])
    assert result.exit_code == 0, result.output
    assert result.output.splitlines()[0].startswith("mirror: about 3 more sessions at the current rate")
    assert out.exists() and out.with_suffix(".csv").exists()


def test_cli_history_errors_are_one_line(tmp_path):
    dirs = make_runs(tmp_path, [2500.0])
    for args, needle in (
        ([str(tmp_path / "gone"), "--out", str(tmp_path / "h.png")], str(tmp_path / "gone")),
        ([str(dirs[0]), "--out", str(tmp_path / "h.jpg")], ".png"),
        ([str(dirs[0]), "--out", str(tmp_path / "h.png"), "--target-radius", "-3"], "--target-radius"),
        ([str(dirs[0]), "--out", str(tmp_path / "no" / "such" / "h.png")], "cannot write"),
        ([str(dirs[0]), "--out", str(tmp_path / "no" / ".." / "h.png")], "cannot write"),
    ):
        result = CliRunner().invoke(main, ["history", *args])
        assert result.exit_code == 2, args
        assert result.stderr.count("\n") == 1 and needle in result.stderr, result.stderr


def test_subprocess_history_missing_folder(tmp_path):
    env = {"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin"}
    p = subprocess.run([sys.executable, "-m", "logger", "history", str(tmp_path / "nope"), "--out", str(tmp_path / "h.png")],
                       capture_output=True, text=True, env=env, timeout=60)
    assert p.returncode == 2 and "Traceback" not in p.stderr and "no such run folder" in p.stderr
