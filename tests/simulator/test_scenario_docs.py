"""The docs name every scenario that ships, and the capture options as the commands spell them."""

from __future__ import annotations

import re

from logger.simulator import scenario_names
from tests.helpers.paths import ROOT

STREAMS = (ROOT / "docs" / "streams.md").read_text()


def test_streams_md_lists_every_shipped_scenario():
    shipped = STREAMS.split("Shipped scenarios:", 1)[1].split("all invented", 1)[0]
    listed = set(re.findall(r"`([a-z0-9-]+)`", shipped))
    assert set(scenario_names()) <= listed, set(scenario_names()) - listed


def test_streams_md_names_the_poll_period_by_its_option():
    from logger.cli.capture import capture_cmd
    from logger.cli.replay import replay_cmd
    from logger.cli.simulate import simulate_cmd

    options = {o for cmd in (capture_cmd, replay_cmd, simulate_cmd) for p in cmd.params for o in p.opts}
    for named in re.findall(r"`(--[a-z-]+)", STREAMS):  # every option the page names is one of theirs
        assert named in options, named
    assert "`--poll-every S`" in STREAMS and "poll_interval_s" not in STREAMS


def test_the_sample_streams_table_names_the_profile_each_was_read_with(tmp_path):
    # sample_streams/README.md tells which profile to replay each stream with; it must be the one the
    # scenario was simulated with, and replayed with it the radius must come within U of the
    # simulator's true radius (the truth file, from the exact ball-on-sphere construction)
    import json
    import tomllib

    from logger.config.profile import load_profile
    from logger.live.replay import replay_file
    from tests.live.test_faults import fresh_settings

    table = (ROOT / "sample_streams" / "README.md").read_text()
    rows = dict(re.findall(r"^\| ([a-z0-9-]+) \| .* \| ([a-z0-9-]+) \|$", table, re.MULTILINE))
    shipped = sorted(p.stem for p in (ROOT / "sample_streams").glob("*.rec"))
    assert sorted(rows) == shipped
    for name, profile_name in rows.items():
        scenario = tomllib.loads((ROOT / "logger" / "simulator" / "scenarios" / f"{name}.toml").read_text())
        assert scenario["profile"] == profile_name, name
        profile = load_profile(profile_name)
        summary = replay_file(ROOT / "sample_streams" / f"{name}.rec", profile, fresh_settings(profile),
                              tmp_path / name)
        truth = json.loads((ROOT / "sample_streams" / f"{name}.truth.json").read_text())
        assert abs(summary["radius_mm"] - truth["radius_mm"]) <= summary["radius_U_mm"], name
