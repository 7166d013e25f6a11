"""Live capture over real pseudo-terminals and loopback sockets, as at the stand.

The virtual indicator (logger.simulator) plays invented sessions in real
time; the capture opens the device with pyserial like hardware.  Checked:
a capture equals the replay of its own stream.rec, an unplug and replug
loses no accepted seating, SIGINT/SIGTERM end cleanly with the summary
written, the plain output is timestamped lines, and exit statuses.
"""

from __future__ import annotations

import io
import json
import os
import re
import signal
import subprocess
import sys
import time

import pandas as pd

from tests.helpers.paths import EXAMPLE_PROFILE, ROOT
from logger.live.capture import capture
from logger.live.plainlog import PlainLog
from logger.live.pipeline import RunSettings
from logger.live.replay import replay_file
from logger.analysis.seating import DetectorSettings
from logger.analysis.session import AnalysisSettings
from logger.simulator import PtyServer, TcpServer, load_scenario, simulate

ISO_LINE = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}Z (seated|seating \d+ on the (flat|surface): "
                      r"(accepted|rejected \(.+\))|radius .+)$")


def short_session(**overrides):
    base = dict(flat_before=2, surface_seatings=3, flat_after=2, seated_s=2.0, lifted_s=0.7, lead_in_s=0.8,
                tail_s=0.8, rate_hz=40.0, disconnect_at_s=None, disconnect_for_s=None)
    base.update(overrides)
    return simulate(load_scenario("unplugged").with_overrides(**base))


def settings_for(profile):
    return RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm), AnalysisSettings())


def test_capture_equals_replay_and_survives_a_replug(tmp_path):
    # unplugged while the instrument is lifted, between the 4th and 5th seating
    run = short_session(surface_seatings=5, lifted_s=1.0, disconnect_at_s=11.85, disconnect_for_s=0.6)
    profile = run.scenario.profile
    link = tmp_path / "ttyINDICATOR"  # a udev-style symlink the capture names; re-pointed on replug
    out = tmp_path / "cap"
    log = io.StringIO()
    with PtyServer(run, link_path=str(link)):
        summary = capture(str(link), profile, settings_for(profile), out, listeners=[PlainLog(profile.unit, log)],
                          duration_s=run.duration_s + 1.0, wait_s=5)
    assert len(summary["gaps"]) == 1 and "# gap " in (out / "stream.rec").read_text()
    seatings = pd.read_csv(out / "seatings.csv")
    gap = run.truth["disconnects"][0]
    untouched = [s for s in run.truth["seatings"]
                 if s["t_end_s"] < gap["t_start_s"] - 0.05 or s["t_start_s"] > gap["t_end_s"] + 0.3]
    # every seating held in full while the device was there is in the files, accepted, in its phase
    # (times: the capture's clock starts when it opens the port, the simulator's when it is opened)
    for s in untouched:  # matched by overlap of the seated windows
        hit = seatings[(seatings.t_start_s < s["t_end_s"] + 0.3) & (seatings.t_end_s > s["t_start_s"])]
        assert len(hit) == 1 and bool(hit.accepted.iloc[0]) and hit.phase.iloc[0] == s["phase"], s
    # the same recording replayed gives the very same files
    again = replay_file(out / "stream.rec", profile, settings_for(profile), tmp_path / "again")
    assert again == summary
    for name in ("summary.json", "seatings.csv", "samples.csv"):
        assert (out / name).read_bytes() == (tmp_path / "again" / name).read_bytes(), name
    # and the radius is within its stated uncertainty
    assert abs(summary["radius_mm"] - run.truth["radius_mm"]) <= summary["radius_U_mm"]
    # the plain (non-terminal) output: one timestamped event per line
    lines = log.getvalue().splitlines()
    assert lines and all(ISO_LINE.match(x) for x in lines), [x for x in lines if not ISO_LINE.match(x)][:3]


def test_capture_over_socket_url(tmp_path):
    run = short_session(flat_before=2, surface_seatings=2, flat_after=1)
    profile = run.scenario.profile
    with TcpServer(run) as server:
        summary = capture(server.url, profile, settings_for(profile), tmp_path / "s",
                          listeners=[PlainLog(profile.unit, io.StringIO())], duration_s=run.duration_s + 1.0, wait_s=5)
    c = run.truth["counts"]
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])


def _capture_process(port, out, *extra):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", str(port), "--profile",
                             str(EXAMPLE_PROFILE), "--out", str(out), "--quiet", *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)


def test_sigint_and_sigterm_end_cleanly_with_the_summary(tmp_path):
    for sig in (signal.SIGINT, signal.SIGTERM):
        run = short_session()
        out = tmp_path / sig.name
        with PtyServer(run) as server:
            proc = _capture_process(server.path, out)
            deadline = time.monotonic() + 30
            while time.monotonic() < deadline:  # until the first seating is in the summary
                try:
                    if json.loads((out / "summary.json").read_text())["seatings_total"] >= 1:
                        break
                except (OSError, ValueError, KeyError):
                    pass
                time.sleep(0.1)
            proc.send_signal(sig)
            stdout, stderr = proc.communicate(timeout=30)
        assert proc.returncode == 0, stderr
        assert "Traceback" not in stderr and "run folder:" in stdout
        summary = json.loads((out / "summary.json").read_text())
        assert summary["seatings_total"] >= 1 and summary["ended_utc"]
        assert (out / "stream.rec").read_text().rstrip().splitlines()[-1].startswith("# end ")
        # plain output, since stdout is a pipe: every event line is timestamped
        events = [x for x in stdout.splitlines() if x[:2] == "20"]
        assert events and all(ISO_LINE.match(x) for x in events)


def test_device_that_never_appears_exits_3(tmp_path):
    proc = _capture_process(tmp_path / "no-such-device", tmp_path / "o", "--wait", "0.5")
    stdout, stderr = proc.communicate(timeout=30)
    assert proc.returncode == 3 and stderr.count("\n") == 1 and "no such port" in stderr


def test_bad_port_url_is_a_user_error(tmp_path):
    proc = _capture_process("socket://", tmp_path / "o")
    stdout, stderr = proc.communicate(timeout=30)
    assert proc.returncode == 2 and stderr.count("\n") == 1 and "Traceback" not in stderr


def test_an_indicator_that_answers_only_when_asked(tmp_path):
    # a polled indicator (common practice for some models): nothing comes unless the logger asks
    run = short_session(rate_hz=100.0, poll="?\\r")
    profile = run.scenario.profile
    with PtyServer(run) as server:
        summary = capture(server.path, profile, settings_for(profile), tmp_path / "p",
                          listeners=[PlainLog(profile.unit, io.StringIO())], duration_s=run.duration_s + 1.0, wait_s=5,
                          poll_command=b"?\r", poll_interval_s=0.05)
    c = run.truth["counts"]
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])
    # about one answer per request: 20 a second, far fewer than the 100 a second it holds
    assert 5 * run.duration_s <= summary["lines"] <= 25 * (run.duration_s + 1.0)
    assert "# poll: b'?\\r' every 0.05 s" in (tmp_path / "p" / "stream.rec").read_text()  # settings in the header


def test_the_poll_request_is_decoded_from_the_scenario():
    # no `poll`: a streaming indicator (no request); with it, backslash escapes decoded as on the command line
    assert short_session().scenario.poll_request == b""
    assert short_session(poll="?\\r").scenario.poll_request == b"?\r"


def test_a_device_that_never_appeared_leaves_no_empty_run_folder(tmp_path):
    proc = _capture_process(tmp_path / "missing", tmp_path / "run", "--wait", "0.3")
    proc.communicate(timeout=30)
    assert proc.returncode == 3 and not (tmp_path / "run").exists()
