"""Replay through the command line: the run folder, determinism, and bad input."""

from __future__ import annotations

import json
import math
import os

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner

from tests.helpers.paths import EXAMPLE_PROFILE, SAMPLE_STREAMS, run_saglog, user_error
from tests.live.test_faults import fresh_settings
from logger.cli.main import main
from logger.errors import UserError
from logger.formats.recording import RecWriter
from logger.live.pipeline import Pipeline
from logger.live.replay import replay_file

START = 1_780_000_000.0


def write_session(path, seed=1, levels=(0, 0, 0, -0.34, -0.34, -0.34, -0.34, 0, 0), rate=50, garbage=False):
    """A small recording in the physical picture of the stand (invented data)."""
    rng = np.random.default_rng(seed)
    w = RecWriter(path, START, {"source": "test"})
    t, dt = 0.0, 1.0 / rate
    for level in levels:
        for _ in range(rate):
            t += dt
            w.write(t, b"%+.3f mm\r" % (-1.5 + rng.normal(0, 0.001)))
        for i in range(3 * rate):
            t += dt
            x = level + (-1.5 - level) * math.exp(-i * dt / 0.08) + rng.normal(0, 0.0006)
            w.write(t, b"%+.3f mm\r" % (round(x / 0.001) * 0.001))
            if garbage and i == 17:
                w.write(t, b"\x00\xff\xfe#@!")
    w.close()


def test_replay_twice_gives_identical_files(tmp_path):
    rec = tmp_path / "s.rec"
    write_session(rec, garbage=True)
    for out in ("a", "b"):
        r = run_saglog("replay", rec, "--profile", EXAMPLE_PROFILE, "--out", tmp_path / out)
        assert r.returncode == 0, r.stderr
    for name in ("summary.json", "seatings.csv", "samples.csv"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name
    summary = json.loads((tmp_path / "a" / "summary.json").read_text())
    assert summary["seatings_flat"] == 5 and summary["seatings_surface"] == 4
    assert summary["bad_lines"] == 9
    samples = pd.read_csv(tmp_path / "a" / "samples.csv")
    assert len(samples) == summary["lines"] and (samples["state"] == "bad").sum() == 9
    seatings = pd.read_csv(tmp_path / "a" / "seatings.csv")
    assert list(seatings.columns[:11]) == ["index", "start", "end", "t_start_s", "t_end_s", "phase", "value_mm",
                                           "spread_mm", "n", "accepted", "reason"]
    assert pd.to_datetime(seatings["start"]).dt.tz is not None  # ISO 8601 UTC


@pytest.mark.parametrize("n, said", [(500, "All 500 lines were bad lines (no reading in them)"),
                                     (1, "The one line received was a bad line (no reading in it)")])
def test_all_garbage_is_counted_and_explained(tmp_path, n, said):
    rec = tmp_path / "g.rec"
    w = RecWriter(rec, START)
    for i in range(n):
        w.write(i * 0.01, bytes([0xFF, 0x00, 0x80 + i % 50]))
    w.close()
    r = CliRunner().invoke(main, ["replay", str(rec), "--profile", str(EXAMPLE_PROFILE), "--out", str(tmp_path / "o")])
    assert r.exit_code == 0
    s = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert s["status"] == "no readings" and s["bad_lines"] == n
    assert s["message"] == f"{said}: check the baud rate and the cable."
    assert f"{n} bad line{'s' if n > 1 else ''} of {n}" in r.stdout


@pytest.mark.parametrize("name, rate", [("empty.txt", ["--rate", "10"]), ("empty.rec", [])])
def test_a_recording_without_lines_says_so_not_that_nothing_was_received(tmp_path, profile, name, rate):
    path = tmp_path / name
    if rate:
        path.write_bytes(b"")  # a plain capture that caught nothing
    else:
        RecWriter(path, START, {"source": "test"}).close()  # the header alone
    r = CliRunner().invoke(main, ["replay", str(path), "--profile", str(EXAMPLE_PROFILE), "--out", str(tmp_path / "o"),
                                  *rate])
    assert r.exit_code == 0, r.stderr
    s = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert (s["status"], s["message"], s["lines"]) == ("no readings", "The recording holds no lines.", 0)
    assert "no readings: The recording holds no lines." in r.stdout
    live = Pipeline(profile, fresh_settings(profile), [], START).finish()  # a capture that received nothing
    assert live["message"] == "Nothing was received."
    assert set(live) == set(s)  # summary.json's keys are the capture's


def test_a_malformed_record_exits_2_and_keeps_what_came_before(tmp_path):
    rec = tmp_path / "m.rec"
    write_session(rec)
    lines = rec.read_text().splitlines()
    cut = len(lines) // 2
    rec.write_text("\n".join(lines[:cut] + ["this is not a record"] + lines[cut:]) + "\n")
    r = run_saglog("replay", rec, "--profile", EXAMPLE_PROFILE, "--out", tmp_path / "o")
    assert r.returncode == 2 and "Traceback" not in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 and f"m.rec:{cut + 1}" in r.stderr
    samples = pd.read_csv(tmp_path / "o" / "samples.csv")
    header_lines = sum(1 for x in lines[:cut] if x.startswith("#"))
    assert len(samples) == cut - header_lines
    assert json.loads((tmp_path / "o" / "summary.json").read_text())["seatings_flat"] >= 1


def test_plain_capture_needs_a_rate(tmp_path):
    raw = tmp_path / "plain.txt"
    raw.write_bytes(b"".join(b"%+.3f\r\n" % v for v in [-1.5] * 50 + [0.0] * 100 + [-1.5] * 50))
    r = run_saglog("replay", raw, "--profile", EXAMPLE_PROFILE, "--out", tmp_path / "o")
    assert r.returncode == 2 and "--rate" in r.stderr
    # it holds no clock: its last line is put at the file's modification time, 2026-03-12T10:00:00Z
    # (an invented session), and the 200 lines at 50 lines/s before it, so the run began 3.98 s earlier
    os.utime(raw, (1773309600.0, 1773309600.0))
    r = run_saglog("replay", raw, "--profile", EXAMPLE_PROFILE, "--out", tmp_path / "o", "--rate", 50)
    assert r.returncode == 0, r.stderr
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert summary["seatings_flat"] == 1
    assert summary["started_utc"] == "2026-03-12T09:59:56.020000Z"
    samples = pd.read_csv(tmp_path / "o" / "samples.csv")
    assert samples["time"].iloc[0] == "2026-03-12T09:59:56.020000Z"
    assert samples["time"].iloc[-1] == "2026-03-12T10:00:00.000000Z"


def test_a_recording_with_its_own_times_refuses_a_rate(tmp_path):
    rec = tmp_path / "s.rec"
    write_session(rec)
    r = CliRunner().invoke(main, ["replay", str(rec), "--profile", str(EXAMPLE_PROFILE), "--out", str(tmp_path / "o"),
                                  "--rate", "10"])
    user_error(r, str(rec), "--rate is for a plain capture without times", "recording with its own times")
    assert not (tmp_path / "o").exists()  # refused before the run folder was made


def test_something_there_that_is_no_file_is_not_called_missing(tmp_path, profile):
    fifo, folder = tmp_path / "fifo.rec", tmp_path / "folder.rec"
    os.mkfifo(fifo)
    folder.mkdir()
    base = ["--profile", str(EXAMPLE_PROFILE), "--out", str(tmp_path / "o")]
    user_error(CliRunner().invoke(main, ["replay", str(fifo), *base]), str(fifo), "not a regular file")
    user_error(CliRunner().invoke(main, ["replay", str(tmp_path / "gone.rec"), *base]), "gone.rec: recording not found")
    with pytest.raises(UserError, match="folder.rec: not a regular file"):  # the command line's REC refuses it first
        replay_file(folder, profile, fresh_settings(profile), tmp_path / "o")
    assert not (tmp_path / "o").exists()


def test_the_help_calls_the_argument_what_the_usage_line_shows():
    r = CliRunner().invoke(main, ["replay", "--help"])
    arg = r.stdout.splitlines()[0].split()[-1]
    assert arg == "REC" and f"a recording ({arg})" in r.stdout, arg  # REC: the contract's name for it


def test_an_existing_run_is_not_overwritten(tmp_path):
    rec = tmp_path / "s.rec"
    write_session(rec)
    assert run_saglog("replay", rec, "--profile", EXAMPLE_PROFILE, "--out", tmp_path / "o").returncode == 0
    r = run_saglog("replay", rec, "--profile", EXAMPLE_PROFILE, "--out", tmp_path / "o")
    assert r.returncode == 2 and "--force" in r.stderr


def test_a_forced_replay_leaves_nothing_of_the_old_run(tmp_path):
    # the old run's report describes the old run: after --force only the new run's files, and the
    # recording being replayed (here the folder's own stream.rec) is kept
    run = tmp_path / "run"
    run.mkdir()
    write_session(run / "stream.rec")
    assert run_saglog("replay", run / "stream.rec", "--profile", EXAMPLE_PROFILE, "--out", run).returncode == 0
    assert run_saglog("report", run).returncode == 0
    assert (run / "report.png").exists() and (run / "report.md").exists()
    r = run_saglog("replay", run / "stream.rec", "--profile", EXAMPLE_PROFILE, "--out", run, "--force",
                   "--rejection", "grubbs")
    assert r.returncode == 0, r.stderr
    assert sorted(p.name for p in run.iterdir()) == ["samples.csv", "seatings.csv", "settings.json", "stream.rec",
                                                     "summary.json"]
    assert json.loads((run / "summary.json").read_text())["rejection"] == "grubbs"


def test_impossible_or_non_finite_options_are_refused_before_anything_runs(tmp_path):
    rec = tmp_path / "s.rec"
    write_session(rec)
    runner = CliRunner()
    base = ["replay", str(rec), "--profile", str(EXAMPLE_PROFILE), "--out", str(tmp_path / "o")]
    for extra, word in [(["--lift", "nan"], "--lift"), (["--z-cut", "inf"], "--z-cut"), (["--settle", "nan"], "--settle"),
                        (["--target-radius", "30"], "--target-radius"), (["--focal-ratio", "nan", "--diameter", "150"],
                                                                          "--focal-ratio"),
                        # each rejection method's own parameter; one that does not apply is refused
                        (["--rejection", "grubbs", "--z-cut", "3"], "--z-cut is for --rejection modified-z"),
                        (["--rejection", "chauvenet", "--z-cut", "3"], "it takes no parameter"),
                        (["--alpha", "0.01"], "--alpha is for --rejection grubbs, not modified-z"),
                        (["--rejection", "grubbs", "--alpha", "1.5"], "--alpha")]:
        r = runner.invoke(main, base + extra)
        assert r.exit_code == 2 and word in r.stderr and len(r.stderr.strip().splitlines()) == 1, (extra, r.stderr)
    assert not (tmp_path / "o").exists()  # refused before the run folder was made


def test_settings_json_records_only_the_parameter_that_applies(tmp_path):
    rec = tmp_path / "s.rec"
    write_session(rec)
    seen = {}
    for method, extra in [("modified-z", ["--z-cut", "4"]), ("grubbs", ["--alpha", "0.01"]), ("chauvenet", []),
                          ("grubbs", [])]:
        out = tmp_path / f"{method}{len(extra)}"
        r = run_saglog("replay", rec, "--profile", EXAMPLE_PROFILE, "--out", out, "--rejection", method, *extra)
        assert r.returncode == 0, r.stderr
        analysis = json.loads((out / "settings.json").read_text())["analysis"]
        seen[out.name] = {k: analysis[k] for k in ("z_cut", "alpha") if k in analysis}
    # defaults: 3.5 (Iglewicz & Hoaglin's recommended cut), alpha 0.05 (the NIST e-Handbook's example level)
    assert seen == {"modified-z2": {"z_cut": 4.0}, "grubbs2": {"alpha": 0.01}, "chauvenet0": {}, "grubbs0": {"alpha": 0.05}}


def test_overflowing_numbers_are_a_one_line_error():
    r = CliRunner().invoke(main, ["radius", "--profile", str(EXAMPLE_PROFILE), "--sagitta", "1e-200"])
    assert r.exit_code == 2 and "out of range" in r.stderr and "Traceback" not in r.stderr


def sag(radius_mm: float, h_mm: float) -> float:
    """The textbook sphere relation: the depth of a sphere of radius R over a half-width h."""
    return radius_mm - math.sqrt(radius_mm * radius_mm - h_mm * h_mm)


def replayed_with_a_target(tmp_path, target_mm: float):
    """The sample mirror (invented, 150 mm across) replayed with a target radius: the output and summary.json."""
    out = tmp_path / "run"
    r = CliRunner().invoke(main, ["replay", str(SAMPLE_STREAMS / "mirror-150-f8-rough.rec"), "--profile",
                                  str(EXAMPLE_PROFILE), "--out", str(out), "--target-radius", str(target_mm),
                                  "--diameter", "150"])
    assert r.exit_code == 0, r.output
    return r, json.loads((out / "summary.json").read_text())


def test_the_end_lines_give_the_depth_still_to_grind_in_the_panels_words(tmp_path):
    """The sample mirror (invented data) replayed with a target: the end lines carry the depth still to
    grind at the centre, sag(R_target, D/2) - sag(R, D/2) with sag(R, h) = R - sqrt(R^2 - h^2) (textbook
    sphere relation), its U from d sag / dR = 1 - R / sqrt(R^2 - h^2) times the radius's U (GUM 5.1.3)."""
    r, s = replayed_with_a_target(tmp_path, 2350)
    R, U, h = s["radius_mm"], s["radius_U_mm"], 75.0
    depth, depth_U = sag(2350.0, h) - sag(R, h), abs(1 - R / math.sqrt(R * R - h * h)) * U
    (line,) = [x for x in r.output.splitlines() if x.startswith("depth still to grind")]
    assert line == f"depth still to grind: {depth:.4f} mm +- {depth_U:.4f} mm at the centre (sphere)"
    assert depth > 0.01  # a shorter target: glass still to come out


def test_a_target_already_passed_is_said_so_with_the_distances_unsigned(tmp_path):
    """The sample mirror (invented data, R about 2403 mm) against a 2450 mm target it has already passed:
    the radius, the sagitta and the depth all say so (the same sphere relations as above, their signs
    agreeing), and the end lines give the distances without a minus sign."""
    r, s = replayed_with_a_target(tmp_path, 2450)
    assert s["radius_to_go_mm"] == s["radius_mm"] - 2450.0 < 0
    assert s["sagitta_to_go_mm"] < 0 and s["depth_to_go_mm"] < 0
    assert math.isclose(s["depth_to_go_mm"], sag(2450.0, 75.0) - sag(s["radius_mm"], 75.0), rel_tol=1e-9)
    lines = r.output.splitlines()
    (target,) = [x for x in lines if x.startswith("target radius")]
    assert target.startswith(f"target radius 2450.0 mm: radius past the target by {-s['radius_to_go_mm']:.1f} mm")
    (depth,) = [x for x in lines if x.startswith("depth ground past the target: ")]
    assert depth.startswith(f"depth ground past the target: {-s['depth_to_go_mm']:.4f} mm")
