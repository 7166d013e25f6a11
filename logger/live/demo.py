"""`saglog demo`: the whole job end to end with no hardware.

A virtual indicator plays an invented session on a real pseudo-terminal (or,
where the system has none, a loopback TCP port read through socket://); the
ordinary capture opens it like a USB serial adapter and analyses it live,
exactly as at the stand.  At the end it prints the result, the run folder,
and the commands to try next.
"""

from __future__ import annotations

from pathlib import Path
from typing import Sequence

from logger.analysis.seating import DetectorSettings
from logger.analysis.session import AnalysisSettings
from logger.live.capture import capture
from logger.live.listener import Listener
from logger.live.pipeline import RunSettings
from logger.live.stop import Stop
from logger.simulator import PtyServer, load_scenario, simulate, virtual_device

DEMO_SCENARIO = "demo-150-f8-fine"
TARGET_RADIUS_MM = 2400.0  # f/8 at 150 mm: R = 2 * 8 * 150
DIAMETER_MM = 150.0
DEMO_LABEL = "150 mm f/8 mirror (invented demo)"


def demo_device():
    """The demo's virtual indicator, not yet serving: on a pty, or on a loopback TCP port where there is none."""
    return virtual_device(simulate(load_scenario(DEMO_SCENARIO)))


def device_words(server) -> str:
    """Where the virtual indicator is, for the user."""
    if isinstance(server, PtyServer):
        return "a pseudo-terminal"
    return f"a loopback TCP port ({server.path}; this system has no pseudo-terminal)"


def run_demo(out_dir: Path, listeners: Sequence[Listener] = (), server=None, stop: Stop | None = None) -> dict:
    """Capture the demo scenario from `server` (default: `demo_device()`) into `out_dir`, told to `listeners`,
    until it ends or `stop` is set; returns the summary."""
    server = server or demo_device()
    run = server.run
    profile = run.scenario.profile
    settings = RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm),
                           AnalysisSettings(target_radius_mm=TARGET_RADIUS_MM, diameter_mm=DIAMETER_MM,
                                            label=DEMO_LABEL))
    duration_s = run.duration_s + 1.0  # real time: the seatings last as long as at the stand
    with server:  # starts serving; the scenario clock starts when the capture opens the device
        return capture(server.path, profile, settings, out_dir, listeners=listeners, duration_s=duration_s,
                       wait_s=5.0, stop=stop)
