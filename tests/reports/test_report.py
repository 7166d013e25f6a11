"""The report of one run, checked through the Figure's artists, not only the file.

Run folders come from test_runs.write_run (INVENTED data).  Reference values
are computed here independently: the zero line against numpy.polyfit of
the flat seatings (ordinary least squares), inch values against the exact
definition 1 in = 25.4 mm (international inch, 1959).
"""

from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st
from matplotlib.collections import PolyCollection

from tests.helpers.runfolder import write_run

from logger.cli.main import main  # noqa: E402
from logger.reports.envelope import TraceEnvelope  # noqa: E402
from logger.reports.report import TRACE_COLUMNS, make_report_figure, report_markdown  # noqa: E402
from logger.run.load import Run, load_run  # noqa: E402

REPO = Path(__file__).resolve().parents[2]


def axes_by_gid(fig):
    return {ax.get_gid(): ax for ax in fig.axes}


def line(ax, gid):
    found = [ln for ln in ax.lines if ln.get_gid() == gid]
    assert len(found) == 1, f"expected one line {gid!r}, found {len(found)}"
    return found[0]


def test_seating_markers_rejected_flagged_and_labels(tmp_path):
    write_run(tmp_path / "r")
    run = load_run(tmp_path / "r")
    fig = make_report_figure(run)
    trace = axes_by_gid(fig)["trace"]
    flat, surf, rej = (line(trace, g) for g in ("seatings-flat", "seatings-surface", "seatings-rejected"))
    st_ = run.seatings
    # every seating has exactly one marker, in the category the CSV gives it
    assert len(flat.get_xdata()) + len(surf.get_xdata()) + len(rej.get_xdata()) == len(st_)
    assert len(rej.get_xdata()) == (~st_["accepted"]).sum() == 1
    assert len(flat.get_xdata()) == ((st_["phase"] == "flat") & st_["accepted"]).sum()
    # rejected ones differ in shape AND colour from both accepted kinds
    assert rej.get_marker() not in (flat.get_marker(), surf.get_marker())
    assert rej.get_color() not in (flat.get_color(), surf.get_color())
    # the rejected marker sits at the rejected seating's value and carries its reason
    bad = st_[~st_["accepted"]].iloc[0]
    assert rej.get_ydata()[0] == bad["value_mm"]
    notes = [t for t in trace.texts if t.get_gid() == "reason"]
    assert [t.get_text() for t in notes] == [bad["reason"]]
    # seated windows shaded per phase, one rectangle per seating
    wins = {c.get_gid(): c for c in trace.collections if isinstance(c, PolyCollection)}
    assert len(wins["windows-flat"].get_paths()) == (st_["phase"] == "flat").sum()
    assert len(wins["windows-surface"].get_paths()) == (st_["phase"] == "surface").sum()
    for ax in (trace, axes_by_gid(fig)["zero"], axes_by_gid(fig)["sagitta"]):
        assert ax.get_ylabel().endswith("(mm)") and ax.get_xlabel() == "time since start (min)"


def test_drift_line_is_the_least_squares_zero(tmp_path):
    write_run(tmp_path / "r")
    run = load_run(tmp_path / "r")
    fig = make_report_figure(run)
    drift = line(axes_by_gid(fig)["trace"], "zero-drift")
    st_ = run.seatings
    flats = st_[(st_["phase"] == "flat") & st_["accepted"]]
    tm = (flats["t_start_s"] + flats["t_end_s"]) / 2
    slope, icpt = np.polyfit(tm, flats["value_mm"], 1)  # reference: ordinary least squares (numpy)
    x_min = np.asarray(drift.get_xdata())
    np.testing.assert_allclose(drift.get_ydata(), icpt + slope * x_min * 60, rtol=0, atol=1e-12)
    assert x_min[0] == 0 and math.isclose(x_min[-1] * 60, run.summary["t_end_s"])
    # the close-up of the flats carries the same line and the zero's uncertainty band
    zero_ax = axes_by_gid(fig)["zero"]
    np.testing.assert_array_equal(line(zero_ax, "zero-drift-close").get_ydata(), drift.get_ydata())
    assert any(c.get_gid() == "zero-band" for c in zero_ax.collections)


def test_sagitta_panel_in_inches(tmp_path):
    write_run(tmp_path / "r", unit="in")
    run = load_run(tmp_path / "r")
    fig = make_report_figure(run)
    sag = axes_by_gid(fig)["sagitta"]
    s = run.summary
    st_ = run.seatings
    ok = st_[st_["accepted"] & (st_["phase"] == "surface")]
    pts = line(sag, "sagittas")
    np.testing.assert_allclose(pts.get_ydata(), ok["sagitta_mm"] / 25.4, rtol=1e-15)  # 1 in = 25.4 mm exactly
    assert line(sag, "sagitta-mean").get_ydata()[0] == s["sagitta_mm"] / 25.4
    band = [p for p in sag.patches if p.get_gid() == "sagitta-band"]
    assert len(band) == 1
    y = band[0].get_path().transformed(band[0].get_patch_transform()).vertices[:, 1]
    np.testing.assert_allclose(
        [y.min(), y.max()], [(s["sagitta_mm"] - s["sagitta_u_mm"]) / 25.4, (s["sagitta_mm"] + s["sagitta_u_mm"]) / 25.4]
    )
    assert sag.get_ylabel() == "sagitta (in)"
    header = " ".join(t.get_text() for t in axes_by_gid(fig)["header"].texts)
    r_in, u_in = s["radius_mm"] / 25.4, s["radius_U_mm"] / 25.4
    assert 0.1 <= u_in < 1  # so two significant figures of U are two decimals
    assert f"R = {r_in:.2f} ± {u_in:.2f} in" in header


def _big_run(n: int, n_seat: int) -> Run:
    """An in-memory run with n samples and n_seat seatings (INVENTED), one spike at sample n//3."""
    t = np.arange(n) * 0.01
    v = np.sin(t / 7.0) * 0.1
    v[n // 3] = 5.0  # a knock: must survive the thinning
    samples = pd.DataFrame({"t_s": t, "value_mm": v, "state": "seated", "raw": "", "seating": np.nan})
    edges = np.linspace(0, t[-1], n_seat + 1)
    seatings = pd.DataFrame({
        "index": np.arange(n_seat), "t_start_s": edges[:-1], "t_end_s": edges[:-1] + 1.0,
        "phase": np.where(np.arange(n_seat) % 4 == 0, "flat", "surface"), "value_mm": 0.1,
        "accepted": np.arange(n_seat) % 50 != 7, "reason": "unsteady: spread 0.012 mm", "sagitta_mm": 0.17,
    })
    summary = {"unit": "mm", "zero_mm": 0.0, "drift_mm_per_min": 0.0, "t_end_s": float(t[-1])}
    return Run("in-memory", summary, {}, samples=samples, seatings=seatings)


def test_million_samples_are_thinned_but_every_seating_kept():
    run = _big_run(1_000_000, 600)
    fig = make_report_figure(run)
    trace = axes_by_gid(fig)["trace"]
    drawn = line(trace, "trace-line")
    assert len(drawn.get_xdata()) <= 4 * TRACE_COLUMNS
    assert max(drawn.get_ydata()) == 5.0  # the spike is kept
    n_markers = sum(len(line(trace, g).get_xdata()) for g in ("seatings-flat", "seatings-surface", "seatings-rejected"))
    assert n_markers == 600
    assert len(line(trace, "seatings-rejected").get_xdata()) == 12


@settings(max_examples=60, deadline=None)
@given(
    y=st.lists(st.floats(-1e6, 1e6), min_size=1, max_size=3000),
    columns=st.integers(1, 500),
    chunk=st.integers(1, 3000),
)
def test_envelope_keeps_each_columns_first_last_lowest_highest_in_order(y, columns, chunk):
    # M4 (Jugel et al., VLDB 2014): per pixel column its first, last, lowest and highest sample
    x = np.arange(len(y), dtype=float)
    yy = np.asarray(y)
    env = TraceEnvelope(0.0, float(len(y)), columns)
    for i in range(0, len(y), chunk):
        env.add(x[i:i + chunk], yy[i:i + chunk])
    xd, yd = env.points()
    assert len(xd) <= 4 * columns
    assert np.all(np.diff(xd) > 0)  # time order, no duplicates
    np.testing.assert_array_equal(yd, yy[xd.astype(int)])  # a subset of the input
    col = np.minimum((x * columns / len(y)).astype(int), columns - 1)
    for c in np.unique(col)[:50]:  # written here from the definition, column by column
        mine = yy[col == c]
        kept = yd[np.minimum((xd * columns / len(y)).astype(int), columns - 1) == c]
        assert kept.min() == mine.min() and kept.max() == mine.max()
        assert kept[0] == mine[0] and kept[-1] == mine[-1]


def test_the_envelope_draws_the_picture_every_point_draws(tmp_path):
    # a line through each pixel column's first, last, lowest and highest sample covers the pixels a
    # line through all of them covers (M4, Jugel et al., VLDB 2014): the two report pictures, at the
    # report's own size, differ in at most a small fraction of pixels (antialiasing at the edges)
    import matplotlib.image as mpimg

    from logger.reports import plotstyle as ps

    run = _big_run(300_000, 120)
    rng = np.random.default_rng(1)  # noise on a third of the samples (INVENTED): a trace with texture
    run.samples["value_mm"] += rng.normal(0, 0.01, 300_000) * (rng.random(300_000) < 0.3)
    pictures = {}
    for columns in (TRACE_COLUMNS, 0, 300):
        path = ps.save_figure(make_report_figure(run, trace_columns=columns), tmp_path / f"r{columns}.png")
        pictures[columns] = mpimg.imread(path)[..., :3]

    def differ(columns: int) -> float:
        return float(np.any(np.abs(pictures[columns] - pictures[0]) > 0.1, axis=-1).mean())

    assert differ(TRACE_COLUMNS) < 0.001
    assert differ(300) > 0.001  # the comparison can tell: an envelope coarser than the pixels shows


def test_gaps_break_the_trace(tmp_path):
    write_run(tmp_path / "r", summary={"gaps": [{"t_start_s": 20.0, "t_end_s": 25.0}]})
    fig = make_report_figure(load_run(tmp_path / "r"))
    trace = axes_by_gid(fig)["trace"]
    y = np.asarray(line(trace, "trace-line").get_ydata(), dtype=float)
    assert np.isnan(y).sum() == 1
    assert any(p.get_gid() == "gap" for p in trace.patches)


def test_run_without_readings_still_reports(tmp_path):
    d = tmp_path / "empty"
    write_run(d, summary={k: None for k in ("zero_mm", "sagitta_mm", "sagitta_u_mm", "radius_mm", "radius_U_mm",
                                             "focal_length_mm", "drift_mm_per_min", "budget")} | {"status": "no readings"})
    (d / "samples.csv").write_text("time,t_s,raw,value_mm,state,seating\n")
    (d / "seatings.csv").write_text("index,start,end,t_start_s,t_end_s,phase,value_mm,spread_mm,n,accepted,reason,zero_mm,sagitta_mm,score\n")
    run = load_run(d)
    fig = make_report_figure(run)
    trace = axes_by_gid(fig)["trace"]
    assert "no readings in this run" in [t.get_text() for t in trace.texts]
    assert not any(ln.get_gid() == "zero-drift" for ln in trace.lines)
    md = report_markdown(run)
    assert "not estimable" in md and "No budget" in md


def test_markdown_budget_table(tmp_path):
    summ, _, _ = write_run(tmp_path / "r")
    md = report_markdown(load_run(tmp_path / "r"))
    rows = [r for r in md.splitlines() if r.startswith("| repeatability") or r.startswith("| resolution")]
    assert len(rows) == 2
    res = summ["budget"][1]
    # resolution: rectangular q/sqrt(12) (GUM, JCGM 100:2008, 4.3.7), infinite degrees of freedom
    assert f"{0.001 / math.sqrt(12):.3g} mm" in rows[1] and f"{res['contribution_mm']:.3g} mm" in rows[1]
    assert rows[1].rstrip(" |").endswith("∞")
    assert "outlier: modified z = 9.1 > 3.5" in md


def test_cli_report_writes_png_and_md(tmp_path):
    write_run(tmp_path / "r")
    result = CliRunner().invoke(main, ["report", str(tmp_path / "r")])
    assert result.exit_code == 0, result.output
    png = (tmp_path / "r" / "report.png").read_bytes()
    assert png[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    width, height = int.from_bytes(png[16:20], "big"), int.from_bytes(png[20:24], "big")
    assert (width, height) == (1300, 950)  # 13 x 9.5 in at 100 dpi
    assert (tmp_path / "r" / "report.md").read_text().startswith("# Run report: mirror")
    assert not [p for p in (tmp_path / "r").iterdir() if p.name.startswith(".report")]  # no temporary left


def test_cli_missing_folder_is_one_line_exit_2(tmp_path):
    result = CliRunner().invoke(main, ["report", str(tmp_path / "missing")])
    assert result.exit_code == 2
    assert result.stderr.count("\n") == 1 and str(tmp_path / "missing") in result.stderr


def test_subprocess_broken_run_no_traceback(tmp_path):
    write_run(tmp_path / "r")
    (tmp_path / "r" / "seatings.csv").write_text("index,start\n1,not a time\n")
    env = {"PYTHONPATH": str(REPO), "PATH": "/usr/bin:/bin", "MPLBACKEND": "Agg"}
    p = subprocess.run([sys.executable, "-m", "logger", "report", str(tmp_path / "r")],
                       capture_output=True, text=True, env=env, timeout=60)
    assert p.returncode == 2 and "Traceback" not in p.stderr
    assert p.stderr.startswith("saglog: error: ") and "seatings.csv" in p.stderr and p.stderr.count("\n") == 1
