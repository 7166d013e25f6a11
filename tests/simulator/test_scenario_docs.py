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
