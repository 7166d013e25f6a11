"""The live analysis at each seating, as a session grows long.

A capture analyses the whole list of seatings again at every new one (a
later seating may revise the zero's drift and earlier decisions), so its
cost per seating is what a long day at the stand pays, on the read thread,
between the lift and the updated summary.  Measured on an invented session
of SEATINGS seatings found by the pipeline itself, for the first 10, 100
and all of them: CPU time of one analysis, best of ROUNDS.
"""

from __future__ import annotations

import time
from pathlib import Path

from logger.analysis.session import analyse
from logger.cli.options import run_settings_from
from logger.config.profile import load_profile
from logger.live.pipeline import Pipeline

from .feeder import session
from .replay_bench import PROFILE

SEATINGS = 1000
SIZES = (10, 100, SEATINGS)
ROUNDS = 5
GOAL_MS = 20.0  # at 1000 seatings: 0.1 s on a computer five times slower, well inside the next lift
RATE_HZ = 100.0
OPTIONS = dict(label="", rejection="modified-z", z_cut=3.5, alpha=None, flat_first=None, phase_gap=None,
               max_spread=None, settle=None, band=None, lift=None, target_radius=None, focal_length=None,
               focal_ratio=None, diameter=None)


def seatings_of_a_long_session(n: int):
    """The seatings the pipeline finds in an invented session of `n` seatings (fed line by line, analysed once)."""
    profile = load_profile(PROFILE)
    settings = run_settings_from(profile, dict(OPTIONS))
    pipeline = Pipeline(profile, settings, [], start_wall=0.0, live=False)
    for k, raw in enumerate(session(n, rate_hz=RATE_HZ, seed=11).lines):
        pipeline.line(k / RATE_HZ, raw.rstrip(b"\r\n"))
    pipeline.finish()
    return pipeline.seatings, profile, settings


def run(tmp: Path) -> list[dict]:
    seatings, profile, settings = seatings_of_a_long_session(SEATINGS)
    if len(seatings) != SEATINGS:  # timing another session than the one described would mislead
        raise RuntimeError(f"benchmark: the pipeline found {len(seatings)} seatings of the {SEATINGS} invented")
    best_ms = {}
    for size in SIZES:
        part = seatings[:size]
        best = float("inf")
        for _ in range(ROUNDS):
            t = time.process_time()
            analyse(part, profile, settings.analysis)
            best = min(best, time.process_time() - t)
        best_ms[size] = best * 1000
    print(f"analysis per seating: {best_ms} ms ({len(seatings)} seatings found)", flush=True)
    most = best_ms[SIZES[-1]]
    return [dict(name="live analysis at a seating, by session length",
                 value={str(k): round(v, 2) for k, v in best_ms.items()}, unit="ms CPU",
                 text=", ".join(f"{v:.1f} ms at {k:,} seatings" for k, v in best_ms.items()),
                 goal=f"< {GOAL_MS:g} ms at {SEATINGS:,} seatings", met=most < GOAL_MS)]
