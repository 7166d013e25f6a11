"""The virtual indicator: physically faithful seatings, served like hardware.

`load_scenario` reads a small TOML file, `simulate` turns it into a `SimRun`
(its truth and its stream of lines), and `PtyServer` / `TcpServer` serve
that stream in real time on a pseudo-terminal or a loopback TCP port, so
capture, the demo and the tests meet the same bytes a real indicator sends.
"""

from logger.simulator.model import SimRun, simulate, write_recording
from logger.simulator.scenario import Scenario, load_scenario, scenario_names
from logger.simulator.serve import PtyServer, TcpServer

__all__ = ["Scenario", "SimRun", "PtyServer", "TcpServer", "load_scenario", "scenario_names", "simulate",
           "write_recording"]
