"""The virtual indicator: physically faithful seatings, served like hardware.

`load_scenario` reads a small TOML file, `simulate` turns it into a `SimRun`
(its truth and its stream of lines), and `PtyServer` / `TcpServer` serve
that stream in real time on a pseudo-terminal or a loopback TCP port
(`virtual_device` takes the pty where there is one), so
capture, the demo and the tests meet the same bytes a real indicator sends.
"""

from logger.simulator.model import SimRun, simulate, write_recording
from logger.simulator.scenario import Scenario, load_scenario, scenario_names
from logger.simulator.serve import PtyServer, TcpServer, virtual_device

__all__ = ["Scenario", "SimRun", "PtyServer", "TcpServer", "load_scenario", "scenario_names", "simulate",
           "virtual_device", "write_recording"]
