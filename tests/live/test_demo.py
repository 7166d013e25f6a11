"""`saglog demo` end to end, as a new user runs it: a real subprocess, a real pseudo-terminal."""

from __future__ import annotations

import json

from tests.helpers.paths import run_saglog
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
