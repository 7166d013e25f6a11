"""The virtual indicator: geometry against an exact construction, seeds, line styles, faults."""

from __future__ import annotations

import json
import math
import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import brentq

from logger.formats.decode import Decoder, LineSplitter
from logger.errors import UserError
from logger.formats.recording import read_recording
from logger.simulator import load_scenario, scenario_names, simulate, write_recording
from logger.cli.main import main
from tests.helpers.paths import user_error

REPO = Path(__file__).resolve().parents[2]


def decode_all(run, default_unit=None):
    sp = LineSplitter()
    d = Decoder(default_unit or run.scenario.profile.indicator.unit)
    out = []
    for t, data in run.lines():
        for raw in sp.feed(data):
            out.append((t, d.decode(raw, t, 0.0)))
    for raw in sp.flush():
        out.append((t, d.decode(raw, t, 0.0)))
    return out, d


def quiet(sc, **kw):
    base = dict(scatter_mm=0.0, noise_mm=0.0, drift_mm_per_min=0.0, overshoot=0.0)
    base.update(kw)
    return sc.with_overrides(**base)


def ball_centre_height(R, r, rho, surface):
    """Height of the ball-centre plane above the sphere's vertex, found numerically.

    Exact construction (written here, independent of logger.analysis.geometry): the
    ball centres are at distance r from the axis; a ball of radius rho touches
    a sphere of radius R centred on the axis when its centre is R - rho
    (concave, ball inside) or R + rho (convex) from the sphere's centre.
    Concave: the vertex is the lowest point, centre at z = R.  Convex: the
    vertex is the top, centre at z = -R.
    """
    if surface == "concave":
        f = lambda h: math.hypot(r, R - h) - (R - rho)  # noqa: E731
    else:
        f = lambda h: math.hypot(r, h + R) - (R + rho)  # noqa: E731
    return brentq(f, -(r + rho), 2 * rho + r, xtol=1e-15, rtol=1e-15)


def circumcentre_radius(a, b, c):
    """Circle through three points placed in the plane with side lengths a, b, c (numpy solve)."""
    p1, p2 = np.array([0.0, 0.0]), np.array([c, 0.0])
    x3 = (b * b - a * a + c * c) / (2 * c)  # |P1P3| = b, |P2P3| = a
    p3 = np.array([x3, math.sqrt(b * b - x3 * x3)])
    A = 2 * np.array([p2 - p1, p3 - p1])
    rhs = np.array([p2 @ p2 - p1 @ p1, p3 @ p3 - p1 @ p1])
    centre = np.linalg.solve(A, rhs)
    radii = [np.linalg.norm(centre - p) for p in (p1, p2, p3)]
    assert max(radii) - min(radii) < 1e-9
    return radii[0]


@pytest.mark.parametrize("name", ["mirror-150-f8-rough", "tool-150-convex", "inch-on-change"])
def test_truth_matches_an_exact_construction(name):
    sc = load_scenario(name)
    run = simulate(sc)
    p = sc.profile.spherometer.params_mm
    r = circumcentre_radius(p["a"], p["b"], p["c"])
    rho = p["ball_diameter"] / 2
    h = ball_centre_height(sc.radius_mm, r, rho, sc.surface)
    # On the flat the probe tip is rho below the ball-centre plane; on the sphere it is h below it
    # (concave: the probe runs out by h - rho) or rho - h (convex: pushed in).
    travel = h - rho if sc.surface == "concave" else rho - h
    assert run.truth["ring_radius_mm"] == pytest.approx(r, rel=1e-12)
    assert run.truth["sagitta_mm"] == pytest.approx(abs(travel), rel=1e-9)


def test_ring_spherometer_truth_by_construction():
    # A rounded ring edge of radius e acts like a ball of radius e on the edge's centre circle
    # (common practice): concave bears on the outer edge, convex on the inner edge.
    sc = load_scenario("ring-lens-convex")
    run = simulate(sc)
    p = sc.profile.spherometer.params_mm
    r, e = p["inner_diameter"] / 2 + p["edge_radius"], p["edge_radius"]
    h = ball_centre_height(sc.radius_mm, r, e, "convex")
    assert run.truth["sagitta_mm"] == pytest.approx(e - h, rel=1e-9)


@pytest.mark.parametrize("name,sense", [("mirror-150-f8-rough", 1), ("tool-150-convex", 1)])
def test_stream_values_are_the_quantised_geometry(name, sense):
    sc = quiet(load_scenario(name))
    run = simulate(sc)
    readings, d = decode_all(run)
    assert d.bad == 0
    step = sc.step
    s = run.truth["sagitta_mm"]
    surface_rel = -s if sc.surface == "concave" else s  # in-positive: concave reads below the flat zero
    for seat in run.truth["seatings"]:
        a, b = seat["t_start_s"] + 10 * sc.settle_tau_s, seat["t_end_s"]
        vals = {round(r.value_mm, 9) for t, r in readings if a <= t < b}
        rel = surface_rel if seat["phase"] == "surface" else 0.0
        want = round(round((sc.zero_mm + rel) / step) * step, 9)
        assert vals == {want}
    lifted = [r.value_mm for t, r in readings if t < sc.lead_in_s]
    stop = sc.zero_mm + min(0.0, surface_rel) - sc.lift_mm
    assert set(np.round(lifted, 9)) == {round(round(stop / step) * step, 9)}


def test_out_positive_indicator_flips_the_sign():
    sc = quiet(load_scenario("mirror-150-f8-rough"))
    prof = sc.profile
    flipped = type(prof)(prof.unit, prof.spherometer, type(prof.indicator)(prof.indicator.resolution_mm,
                                                                         "out-positive", prof.indicator.unit))
    a = simulate(sc).truth["seatings"]
    b = simulate(sc.with_overrides(profile=flipped)).truth["seatings"]
    for x, y in zip(a, b):
        assert x["offset_from_zero_mm"] == pytest.approx(-y["offset_from_zero_mm"], abs=1e-12)


def test_seeds_reproduce_and_differ():
    sc = load_scenario("messy-grit-rock")
    one, two, other = (list(simulate(sc, s).lines()) for s in (7, 7, 8))
    assert one == two and one != other
    run = simulate(sc, 7)
    assert list(run.lines()) == one  # lines() can be replayed


def test_scatter_and_noise_statistics():
    # Sample std of many seatings' offsets estimates the scatter (chi-square bounds, 99.9 %,
    # scipy.stats as the reference library).
    from scipy import stats

    sc = load_scenario("mirror-150-f8-rough").with_overrides(flat_before=400, surface_seatings=0, flat_after=0,
                                                              seated_s=0.5, lifted_s=0.1, scatter_mm=0.002)
    offs = np.array([s["offset_from_zero_mm"] for s in simulate(sc, 3).truth["seatings"]])
    n = offs.size
    lo, hi = (math.sqrt(stats.chi2.ppf(q, n - 1) / (n - 1)) for q in (0.0005, 0.9995))
    assert lo * 0.002 < offs.std(ddof=1) < hi * 0.002


def test_drift_moves_the_zero():
    sc = quiet(load_scenario("mirror-150-f8-rough"), drift_mm_per_min=0.003)
    seats = simulate(sc).truth["seatings"]
    first, last = seats[0], seats[-1]
    dt_min = ((last["t_start_s"] + last["t_end_s"]) - (first["t_start_s"] + first["t_end_s"])) / 2 / 60
    assert last["true_value_mm"] - first["true_value_mm"] == pytest.approx(0.003 * dt_min, rel=1e-9)


def test_overshoot_fraction():
    sc = load_scenario("mirror-150-f8-rough").with_overrides(overshoot=0.2, scatter_mm=0.0)
    run = simulate(sc)
    seat = run.truth["seatings"][0]
    t = np.linspace(seat["t_start_s"], seat["t_start_s"] + 1.0, 200001)
    v = run.values_mm(t) - (sc.zero_mm + sc.drift_mm_per_min * t / 60)
    target = seat["offset_from_zero_mm"]
    jump = target - v[0]
    assert (v.max() - target) / jump == pytest.approx(0.2, rel=1e-3)


def test_grit_and_rock_seatings():
    sc = quiet(load_scenario("messy-grit-rock"))
    run = simulate(sc)
    seats = run.truth["seatings"]
    assert [s["index"] for s in seats if s["kind"] == "grit"] == [3, 11]
    assert [s["index"] for s in seats if s["kind"] == "rock"] == [8]
    for s in seats:
        if s["kind"] == "grit":
            base = 0.0 if s["phase"] == "flat" else -run.truth["sagitta_mm"]
            assert abs(s["offset_from_zero_mm"] - base) == pytest.approx(sc.grit_offset_mm, rel=1e-12)
    readings, _ = decode_all(run)
    rock = seats[7]
    vals = [r.value_mm for t, r in readings if rock["t_start_s"] + 1 < t < rock["t_end_s"] and r.value_mm is not None]
    assert max(vals) - min(vals) > sc.rock_amplitude_mm  # it wanders while seated
    c = run.truth["counts"]
    assert (c["grit"], c["rock"], c["expected_accepted_flat"] + c["expected_accepted_surface"]) == (2, 1, 17)


def test_faults_give_the_bad_lines_they_promise():
    sc = load_scenario("messy-grit-rock")
    run = simulate(sc)
    readings, d = decode_all(run)
    assert d.bad == run.truth["garbage_lines"] + 1 > 5  # garbage lines plus the half line at the start
    assert readings[0][1].bad  # the half line
    assert all(r.bad for _, r in readings if r.bad) and d.good > 800


def test_disconnect_leaves_a_gap():
    run = simulate(load_scenario("unplugged"))
    (gap,) = run.truth["disconnects"]
    ts = [t for t, _ in run.lines()]
    assert not [t for t in ts if gap["t_start_s"] <= t < gap["t_end_s"]]
    assert min(ts) == 0 and max(ts) > gap["t_end_s"]


def test_on_change_sends_only_changes_and_inch_values():
    sc = load_scenario("inch-on-change")
    run = simulate(sc)
    readings, d = decode_all(run)
    vals = [r.value_mm for _, r in readings]
    assert d.bad == 0 and all(a != b for a, b in zip(vals, vals[1:]))
    assert all(r.unit == "in" for _, r in readings)
    counts = [v / 25.4 / 0.00005 for v in vals]  # every value a whole number of 0.00005 in steps
    assert max(abs(c - round(c)) for c in counts) < 1e-6


@pytest.mark.parametrize("style,expect", [
    (dict(sign="always", decimal=".", suffix=" mm", ending="CRLF"), rb"[+-]\d+\.\d{3} mm\r\n"),
    (dict(sign="negative", decimal=",", suffix="", ending="LF"), rb"-?\d+,\d{3}\n"),
    (dict(width=10, pad="0", suffix="mm", ending="CR"), rb"[+-]\d{5}\.\d{3}mm\r"),
    (dict(width=10, pad=" ", unit="in", step_mm=0.00127, suffix='"'), rb' *[+-]\d+\.\d{5}"\r\n'),
])
def test_line_styles(style, expect):
    import re

    run = simulate(load_scenario("mirror-150-f8-rough").with_overrides(**style))
    lines = [x for _, x in run.lines()]
    assert all(re.fullmatch(expect, x) for x in lines), lines[:3]
    if style.get("width"):
        assert {len(x.rstrip(b"\r\n").rstrip(b'm"')) for x in lines} == {10}
    readings, d = decode_all(run)
    assert d.bad == 0


def test_scenario_errors_name_the_file_and_key(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text('profile = "example-three-ball"\n[surface]\nkind = "concave"\nradios = 100\n')
    with pytest.raises(UserError, match=r"s\.toml: \[surface\]: unknown key 'radios' \(did you mean 'radius'\?\)"):
        load_scenario(p)
    p.write_text('profile = "example-three-ball"\n[stream]\nunit = "mm"\nsuffix = "in"\n')
    with pytest.raises(UserError, match="suffix"):
        load_scenario(p)
    with pytest.raises(UserError, match="no such scenario"):
        load_scenario("no-such-scenario")
    with pytest.raises(UserError, match="unknown scenario field: colour$"):
        load_scenario("fast-1khz").with_overrides(colour="red")
    with pytest.raises(UserError, match="unknown scenario fields: colour, size$"):
        load_scenario("fast-1khz").with_overrides(size=3, colour="red")


def test_scenario_in_inches_converts_lengths(tmp_path):
    p = tmp_path / "i.toml"
    p.write_text('profile = "example-three-ball"\nunit = "in"\n[surface]\nradius = 100\n[plan]\nlift = 0.05\n')
    sc = load_scenario(p)
    assert sc.radius_mm == 2540.0 and sc.lift_mm == pytest.approx(1.27, rel=1e-15)


def test_every_shipped_scenario_runs():
    for name in scenario_names():
        run = simulate(load_scenario(name))
        json.dumps(run.truth)  # JSON-safe
        assert run.truth["invented"] and run.truth["seatings"]


def test_write_recording_round_trip(tmp_path):
    run = simulate(load_scenario("unplugged"))
    p = tmp_path / "u.rec"
    write_recording(run, p)
    header, recs = read_recording(p)
    want = [(t, x[:-1] if x.endswith(b"\n") else x) for t, x in run.lines()]
    got = [(t, raw) for t, raw, _ in recs]
    assert [r for _, r in got] == [r for _, r in want]
    assert max(abs(a - b) for (a, _), (b, _) in zip(got, want)) < 1e-6
    assert header["scenario"] == "unplugged" and "# gap " in p.read_text()


def run_cli(*args):
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return subprocess.run([sys.executable, "-m", "logger", *args], capture_output=True, text=True, env=env,
                          timeout=60)


def test_cli_rec_and_truth(tmp_path):
    r = run_cli("simulate", "--rec", str(tmp_path / "a.rec"), "--scenario", "tool-150-convex", "--seed", "5",
                "--truth", str(tmp_path / "t.json"))
    assert r.returncode == 0, r.stderr
    truth = json.loads((tmp_path / "t.json").read_text())
    assert truth["seed"] == 5 and truth["surface"] == "convex"
    _, recs = read_recording(tmp_path / "a.rec")
    assert sum(1 for _ in recs) > 100


def test_cli_rec_never_replaces_a_file_unasked(tmp_path):
    rec = tmp_path / "stream.rec"  # e.g. a capture's own recording
    rec.write_bytes(b"a capture's recording\n")
    runner = CliRunner()
    r = runner.invoke(main, ["simulate", "--rec", str(rec), "--scenario", "unplugged"])
    user_error(r, str(rec), "already exists", "--force")
    assert rec.read_bytes() == b"a capture's recording\n"
    r = runner.invoke(main, ["simulate", "--rec", str(rec), "--scenario", "unplugged", "--force"])
    assert r.exit_code == 0, r.stderr
    header, recs = read_recording(rec)
    assert header["scenario"] == "unplugged" and sum(1 for _ in recs) > 100
    user_error(runner.invoke(main, ["simulate", "--pty", "--force"]), "--force is for --rec FILE or --truth FILE")
    # the truth file likewise, and the recording is not written either when the truth would be refused
    truth = tmp_path / "truth.json"
    truth.write_text("kept")
    fresh = tmp_path / "fresh.rec"
    r = runner.invoke(main, ["simulate", "--rec", str(fresh), "--truth", str(truth), "--scenario", "unplugged"])
    user_error(r, str(truth), "already exists", "--force")
    assert truth.read_text() == "kept" and not fresh.exists()


def test_cli_help_names_the_default_scenario():
    r = CliRunner().invoke(main, ["simulate", "--help"])
    assert f"(default: {load_scenario(None).name})" in " ".join(r.stdout.split())


def test_cli_errors_are_one_line():
    r = run_cli("simulate", "--pty", "--scenario", "nope")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "no such scenario" in r.stderr
    r = run_cli("simulate")
    assert r.returncode == 2 and "exactly one of" in r.stderr


def test_sample_streams_are_what_the_script_makes(tmp_path):
    from logger.simulator.samples import make_samples

    for p in make_samples(tmp_path):
        shipped = REPO / "sample_streams" / p.name
        assert shipped.read_bytes() == p.read_bytes(), f"{shipped} is stale: run python -m logger.simulator.samples"
        assert shipped.stat().st_size < 1_000_000
