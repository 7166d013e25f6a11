"""`saglog demo`: the whole job end to end with no hardware.

A virtual indicator plays an invented session on a real pseudo-terminal; the
ordinary capture opens it like a USB serial adapter and analyses it live,
exactly as at the stand.  At the end it prints the result, the run folder,
and the commands to try next.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from logger.analysis.seating import DetectorSettings
from logger.analysis.session import AnalysisSettings
from logger.live.capture import Stop, capture
from logger.live.listener import Listener
from logger.live.pipeline import RunSettings
from logger.simulator import PtyServer, load_scenario, simulate

DEMO_SCENARIO = "demo-150-f8-fine"
TARGET_RADIUS_MM = 2400.0  # f/8 at 150 mm: R = 2 * 8 * 150
DIAMETER_MM = 150.0
DEMO_LABEL = "150 mm f/8 mirror (invented demo)"


def run_demo(out_dir: Path, listeners: Sequence[Listener] = (), stop: Stop | None = None) -> dict:
    """Serve the demo scenario on a pty and capture it into `out_dir`, told to `listeners`, until it ends or
    `stop` is set; returns the summary."""
    scenario = load_scenario(DEMO_SCENARIO)
    profile = scenario.profile
    run = simulate(scenario)
    settings = RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm),
                           AnalysisSettings(target_radius_mm=TARGET_RADIUS_MM, diameter_mm=DIAMETER_MM,
                                            label=DEMO_LABEL))
    server = PtyServer(run)
    duration_s = run.duration_s + 1.0  # real time: the seatings last as long as at the stand
    with server:  # starts serving; the scenario clock starts when the capture opens the device
        return capture(server.path, profile, settings, out_dir, listeners=listeners, duration_s=duration_s,
                       wait_s=5.0, stop=stop)
