"""Redraw the README's pictures from invented sessions (run: python docs/make_pictures.py).

* docs/report-example.png: `saglog report` of the replayed sample stream
  sample_streams/messy-grit-rock.rec (grit, rocking and line noise; invented).
* docs/history-example.png: `saglog history` over five invented grinding
  sessions of a 150 mm f/8 mirror and its tool, made by the virtual indicator.
"""

from __future__ import annotations

import os
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

from logger.reports.history import write_history  # noqa: E402
from logger.live.pipeline import RunSettings  # noqa: E402
from logger.config.profile import load_profile  # noqa: E402
from logger.live.replay import replay_file  # noqa: E402
from logger.reports.report import write_report  # noqa: E402
from logger.analysis.seating import DetectorSettings  # noqa: E402
from logger.analysis.session import AnalysisSettings  # noqa: E402
from logger.simulator import load_scenario, simulate, write_recording  # noqa: E402

os.chdir(ROOT)  # paths in the pictures are then relative to the repository, as a user would type them
PROFILE = load_profile(Path("logger") / "config" / "profiles" / "example-three-ball.toml")


def settings(label: str) -> RunSettings:
    return RunSettings(DetectorSettings.for_step(PROFILE.indicator.resolution_mm),
                       AnalysisSettings(target_radius_mm=2400.0, diameter_mm=150.0, label=label))


def main() -> None:
    work = Path(tempfile.mkdtemp(prefix="saglog-pictures-"))
    try:
        run_dir = work / "messy"
        replay_file(Path("sample_streams") / "messy-grit-rock.rec", PROFILE, settings("mirror (invented)"), run_dir)
        png, _ = write_report(run_dir)
        shutil.copy(png, ROOT / "docs" / "report-example.png")
        dirs = []
        sessions = [("mirror", "concave", 2760.0), ("tool", "convex", 2790.0), ("mirror", "concave", 2610.0),
                    ("mirror", "concave", 2520.0), ("tool", "convex", 2540.0), ("mirror", "concave", 2455.0)]
        for day, (label, surface, radius) in enumerate(sessions, 1):
            sc = load_scenario("mirror-150-f8-rough").with_overrides(
                surface=surface, radius_mm=radius, seed=100 + day, start_utc=f"2025-03-{day * 3:02d}T18:00:00Z")
            rec = work / f"s{day}.rec"
            write_recording(simulate(sc), rec)
            dirs.append(work / f"run{day}")
            replay_file(rec, PROFILE, settings(f"{label} (invented)"), dirs[-1])
        write_history(dirs, work / "history.png")
        shutil.copy(work / "history.png", ROOT / "docs" / "history-example.png")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
