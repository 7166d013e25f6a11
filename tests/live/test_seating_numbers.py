"""One number per seating, from 1, everywhere (contract: "Seating numbers").

The outside reference is the virtual indicator's own plan: the truth it writes numbers the planned
seatings from 1 (the scenario's `grit_seatings` are those numbers). A capture of it over a loopback
socket must give the grain of grit the same number on the plain log, in seatings.csv and in report.md.
"""

from __future__ import annotations

import io
import re

import pandas as pd

from logger.live.capture import capture
from logger.live.plainlog import PlainLog
from logger.reports.report import write_report
from logger.simulator import TcpServer
from tests.live.test_capture import settings_for, short_session

GRIT = 6  # the planned seating (the third on the surface) that carries a grain of grit; 1-based, as scenarios count


def test_the_grit_seating_has_the_same_number_on_the_log_in_the_files_and_in_the_report(tmp_path):
    run = short_session(flat_before=3, surface_seatings=4, flat_after=2, grit_seatings=(GRIT,), grit_offset_mm=0.05)
    profile = run.scenario.profile
    log = io.StringIO()
    out = tmp_path / "run"
    with TcpServer(run) as server:
        capture(server.url, profile, settings_for(profile), out, listeners=[PlainLog(profile.unit, log)],
                duration_s=run.duration_s + 1.0, wait_s=5)
    planned = [s["index"] for s in run.truth["seatings"] if s["kind"] == "grit"]
    assert planned == [GRIT]
    seatings = pd.read_csv(out / "seatings.csv")
    assert list(seatings["index"]) == list(range(1, len(seatings) + 1))
    assert list(seatings.loc[~seatings["accepted"], "index"]) == [GRIT]
    logged = re.findall(r"seating (\d+) on the \w+: rejected", log.getvalue())
    assert logged == [str(GRIT)]
    numbers = [int(n) for n in re.findall(r"seating (\d+) on the", log.getvalue())]
    assert numbers == list(seatings["index"])
    write_report(out)
    rows = [x for x in (out / "report.md").read_text().splitlines() if x.startswith(f"| {GRIT} | ")]
    assert len(rows) == 1 and "surface" in rows[0]
