"""Regenerate sample_streams/: recordings of invented scenarios with their truth.

Run from the repository root: python -m logger.simulator.samples [OUT_DIR]
Every file is deterministic (fixed seeds and start times), so running it
again gives byte-identical files.
"""

from __future__ import annotations

import sys
from pathlib import Path

from logger.simulator.model import simulate, write_recording
from logger.simulator.scenario import load_scenario

SAMPLES = {
    "mirror-150-f8-rough": "a 150 mm f/8 mirror in rough grinding (concave R 2400 mm), 10 lines/s, mm, CRLF",
    "tool-150-convex": "its convex grinding tool (R 2450 mm), 20 lines/s, no unit suffix, LF",
    "inch-on-change": "an 8 in f/6 mirror with an inch indicator that sends only on change, CR endings",
    "messy-grit-rock": "grit in seatings 3 and 11, rocking in seating 8, garbage bytes, a half first line",
    "ring-lens-convex": "a convex lens surface (R 150 mm) on a ring spherometer, 20 lines/s",
}


def make_samples(out_dir: Path) -> list[Path]:
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for name in SAMPLES:
        run = simulate(load_scenario(name))
        write_recording(run, out_dir / f"{name}.rec")
        run.write_truth(out_dir / f"{name}.truth.json")
        written += [out_dir / f"{name}.rec", out_dir / f"{name}.truth.json"]
    return written


if __name__ == "__main__":
    target = Path(sys.argv[1]) if len(sys.argv) > 1 else Path("sample_streams")
    for p in make_samples(target):
        print(p)
