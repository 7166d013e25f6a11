"""`saglog demo` end to end, as a new user runs it: a real subprocess, a real pseudo-terminal."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys

from tests.helpers.paths import ROOT, run_saglog
from tests.live.test_capture import ISO_LINE, wait_for_a_seating
from logger.simulator import load_scenario, simulate


def test_demo_runs_the_whole_job(tmp_path):
    out = tmp_path / "demo"
    r = run_saglog("demo", "--out", out, "--web", "127.0.0.1:0", timeout=150)  # with the stand page (tests/stand)
    assert r.returncode == 0, r.stderr
    assert r.stdout.splitlines()[1].startswith("page: http://127.0.0.1:")
    assert "Traceback" not in r.stderr
    assert f"run folder: {out}" in r.stdout and "saglog report" in r.stdout  # offers the next commands
    summary = json.loads((out / "summary.json").read_text())
    truth = simulate(load_scenario("demo-150-f8-fine")).truth  # the invented session it played
    c = truth["counts"]
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])
    assert summary["seatings_rejected"] == c["grit"]  # the grain of grit is thrown out, with its reason
    assert summary["surface"] == "concave" and summary["target_radius_mm"] == 2400.0
    # Smoke check only: one seeded session inside U is a ~95 % event, not a proof of coverage; the
    # real check is the 204-session study in tests/analysis/test_coverage.py.
    assert abs(summary["radius_mm"] - truth["radius_mm"]) <= summary["radius_U_mm"]
    for name in ("stream.rec", "samples.csv", "seatings.csv", "settings.json"):
        assert (out / name).stat().st_size > 0


def test_ctrl_c_ends_the_demo_like_a_capture(tmp_path):
    """SIGINT (what Ctrl-C sends) to a real `saglog demo`: the result, the run folder, exit 0."""
    out = tmp_path / "demo"
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-m", "logger", "demo", "--out", str(out), "--view", "plain"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    wait_for_a_seating(out)
    proc.send_signal(signal.SIGINT)
    stdout, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 0, stderr
    assert "Traceback" not in stderr and f"run folder: {out}" in stdout and "seatings:" in stdout
    summary = json.loads((out / "summary.json").read_text())
    assert 1 <= summary["seatings_total"] < 17 and summary["ended_utc"]  # ended early: the demo plans 17
    assert (out / "stream.rec").read_text().rstrip().splitlines()[-1].startswith("# end ")
    events = [x for x in stdout.splitlines() if x[:2] == "20"]
    assert events and all(ISO_LINE.match(x) for x in events)
