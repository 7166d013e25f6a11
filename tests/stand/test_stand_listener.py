"""The state object the page shows, checked against the run folder written beside it, and its pace.

The contract (CONTRACT.md, "The stand page"): every key of summary.json plus
`state`, `reading_mm` and `last_seating` (index, phase, accepted, reason).
The plot's radii are worked out here from seatings.csv with the textbook
relation for ball feet on a concave surface, R = (r^2 + s^2) / (2 s) + rho
(DESIGN.md, "The mathematics").
"""

from __future__ import annotations

import csv
import json
import math
import time

from logger.analysis.seating import State
from logger.analysis.session import AnalysisSettings
from logger.live.listener import Sample
from logger.live.stand.address import WebAddress
from logger.live.stand.listener import READING_EVERY_S, StandPage
from logger.live.stand.server import StandServer
from logger.run.writer import RunWriter
from tests.helpers.simrun import live_session
from tests.helpers.stand import EventReader, wait_for


def page_and_reader():
    server = StandServer(WebAddress("127.0.0.1", 0), None)
    reader = EventReader(server.start())
    reader.start()
    wait_for(lambda: server.clients == 1, 10, "the reader")
    return server, StandPage(server), reader


def test_the_last_state_holds_summary_json_and_the_live_keys(tmp_path):
    server, page, reader = page_and_reader()
    pipeline = live_session([RunWriter(tmp_path, 0.0, {}), page], "messy-grit-rock",
                            AnalysisSettings(target_radius_mm=2400.0))
    reader.join(10)
    summary = json.loads((tmp_path / "summary.json").read_text())
    last = reader.states[-1]
    assert {k: last[k] for k in summary} == summary  # every key, the same values
    assert last["state"] in {s.value for s in State} and last["run_over"] is True
    assert last["reading_mm"] is not None
    final = pipeline.result.decisions[-1]
    assert last["last_seating"] == {"index": final.seating.index, "phase": final.phase, "accepted": final.accepted,
                                    "reason": final.reason, "text": last["last_seating"]["text"]}
    # one event at least for every seating, each counting it
    totals = [s["seatings_total"] for s in reader.states if "seatings_total" in s]
    assert set(range(1, summary["seatings_total"] + 1)) <= set(totals)


def test_the_plot_series_against_seatings_csv(tmp_path):
    server, page, reader = page_and_reader()
    live_session([RunWriter(tmp_path, 0.0, {}), page], "mirror-150-f8-rough")
    reader.join(10)
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["surface"] == "concave"
    r, rho = summary["ring_radius_mm"], summary["foot_radius_mm"]
    with open(tmp_path / "seatings.csv") as f:
        rows = [row for row in csv.DictReader(f) if row["phase"] == "surface" and row["accepted"] == "true"]
    sag = [float(row["sagitta_mm"]) for row in rows]
    series = reader.states[-1]["surface_seatings"]
    assert series["index"] == [int(row["index"]) for row in rows]

    def radius(s):
        return (r * r + s * s) / (2 * s) + rho

    tol = 1e-6  # seatings.csv keeps sagittas to 1e-7 mm: about 3e-7 of R at s = 0.34 mm

    for k, s in enumerate(sag):
        mean = sum(sag[:k + 1]) / (k + 1)
        assert math.isclose(series["radius_mm"][k], radius(s), rel_tol=tol)
        assert math.isclose(series["mean_mm"][k], radius(mean), rel_tol=tol)
        if k >= 1:
            se = math.sqrt(sum((x - mean) ** 2 for x in sag[:k + 1]) / k / (k + 1))
            assert math.isclose(series["low_mm"][k], radius(mean + 2 * se), rel_tol=tol)
            assert math.isclose(series["high_mm"][k], radius(mean - 2 * se), rel_tol=tol)
    assert math.isclose(series["mean_mm"][-1], summary["radius_mm"], rel_tol=1e-9)


def test_a_fast_stream_sends_the_reading_a_few_times_a_second_at_most():
    server, page, reader = page_and_reader()
    page.state(State.SEATED)
    t0 = time.monotonic()
    n = 0
    while time.monotonic() - t0 < 1.0:  # a line and a tick at a time, as fast as this loop goes
        n += 1
        page.sample(Sample(n * 1e-4, 0.0, b"", "", -0.3 - n * 1e-6, "mm", State.SEATED, 0))
        page.tick(n * 1e-4)
    elapsed = time.monotonic() - t0
    page.end({})
    reader.join(10)
    readings = [s for s in reader.states if "reading_mm" in s]
    assert n > 1000  # many lines went by
    assert len(readings) <= 2 + elapsed / READING_EVERY_S + 1  # the state, then a reading each 0.25 s, the end
