"""Run the pipeline on a virtual-indicator session in memory (no files, no real time)."""

from __future__ import annotations

from logger.formats.decode import LineSplitter
from logger.live.pipeline import Pipeline, RunSettings
from logger.analysis.seating import DetectorSettings
from logger.analysis.session import AnalysisSettings
from logger.simulator import load_scenario, simulate


def short_bridge_run():
    """An invented short session for the network bridges: two flats, two surface seatings, one flat, 40 lines/s."""
    sc = load_scenario("unplugged").with_overrides(
        flat_before=2, surface_seatings=2, flat_after=1, seated_s=2.0, lifted_s=0.8, lead_in_s=0.8, tail_s=0.8,
        rate_hz=40.0, disconnect_at_s=None, disconnect_for_s=None)
    return simulate(sc)


def analyse_run(run, profile=None, analysis: AnalysisSettings | None = None) -> dict:
    """Feed the run's bytes through the same splitter and pipeline a capture uses; return the summary."""
    profile = profile or run.scenario.profile
    settings = RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm), analysis or AnalysisSettings())
    pipeline = Pipeline(profile, settings, [], 0.0, live=False)
    splitter = LineSplitter()
    t = 0.0
    for t, data in run.lines():
        for raw in splitter.feed(data):
            pipeline.line(t, raw)
    for raw in splitter.flush():
        pipeline.line(t, raw)
    for gap in run.truth.get("disconnects", []):
        pipeline.gaps.append(gap)
    return pipeline.finish(run.duration_s)


def live_session(listeners, scenario: str, analysis: AnalysisSettings | None = None) -> Pipeline:
    """A shipped scenario through the live pipeline in memory, told to `listeners` as a capture tells them
    (every seating analysed at once, a tick after every line); no real time passes."""
    run = simulate(load_scenario(scenario))
    profile = run.scenario.profile
    settings = RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm), analysis or AnalysisSettings())
    pipeline = Pipeline(profile, settings, listeners, 0.0)
    splitter = LineSplitter()
    for t, data in run.lines():
        for raw in splitter.feed(data):
            pipeline.line(t, raw)
        pipeline.tick(t)
    pipeline.finish(run.duration_s)
    return pipeline
