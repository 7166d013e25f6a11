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
import threading
import time
import tty

import pandas as pd
import pytest
from click.testing import CliRunner
from hypothesis import given, strategies as st

from benchmarks.feeder import PtyDevice
from tests.helpers.paths import EXAMPLE_PROFILE, ROOT
from tests.helpers.stand import wait_for
import logger.live.capture as capture_module
from logger.config.profile import load_profile
from logger.live.capture import capture
from logger.live.listener import Listener
from logger.live.plainlog import PlainLog
from logger.live.pipeline import RunSettings
from logger.live.replay import replay_file
from logger.live.stop import Stop
from logger.analysis.seating import DetectorSettings, State
from logger.analysis.session import AnalysisSettings
from logger.cli.main import main
from logger.simulator import PtyServer, TcpServer, load_scenario, simulate
from logger.transport.serial_source import can_gather

_LEADING_NUMBER = re.compile(r"[+-]?[0-9]+(\.[0-9]+)?")
ISO_LINE = re.compile(r"^\d{4}-\d\d-\d\dT\d\d:\d\d:\d\d\.\d{6}Z (seated|seating \d+ on the (flat|surface): "
                      r"(accepted|rejected \(.+\))|radius .+|waiting for device|device back after a gap of \d+\.\d s)$")


def short_session(**overrides):
    base = dict(flat_before=2, surface_seatings=3, flat_after=2, seated_s=2.0, lifted_s=0.7, lead_in_s=0.8,
                tail_s=0.8, rate_hz=40.0, disconnect_at_s=None, disconnect_for_s=None)
    base.update(overrides)
    return simulate(load_scenario("unplugged").with_overrides(**base))


def settings_for(profile):
    return RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm), AnalysisSettings())


class UntilServed(Listener):
    """Stops the capture once the virtual indicator has sent its whole session and a read after that
    brought nothing: an end that holds however slowly either side is scheduled (no fixed duration)."""

    def __init__(self, server, stop: Stop):
        self.server, self.stop, self.quiet_ticks = server, stop, 0

    def sample(self, sample) -> None:
        self.quiet_ticks = 0

    def tick(self, t_s: float) -> None:
        self.quiet_ticks = self.quiet_ticks + 1 if self.server.wait(0) else 0
        if self.quiet_ticks >= 2:  # a whole read (a timeout, or an idle wait) after the end brought no line
            self.stop.requested = True


def _recorded_values(rec_text: str) -> list[list[float]]:
    """Values of the received lines, one list per stretch between the capture's gaps, read from
    stream.rec here (seconds, TAB, the line; comments start with '#'; docs/streams.md)."""
    stretches: list[list[float]] = [[]]
    for line in rec_text.splitlines():
        if line.startswith("# gap "):
            stretches.append([])
        elif (m := _LEADING_NUMBER.match(line.partition("\t")[2])) and not line.startswith("#"):
            stretches[-1].append(float(m.group()))
    return stretches


def _same_seatings(rows, truth_seatings) -> bool:
    """The files' rows are these planned seatings, in order, accepted, in their phase, at their value."""
    return len(rows) == len(truth_seatings) and all(
        bool(r.accepted) and r.phase == t["phase"] and abs(r.value_mm - t["true_value_mm"]) < 0.003
        for r, t in zip(rows.itertuples(), truth_seatings))


def test_capture_equals_replay_and_survives_a_replug(tmp_path):
    # unplugged while the instrument is lifted, between the 4th and 5th seating
    run = short_session(surface_seatings=5, lifted_s=1.0, disconnect_at_s=11.95, disconnect_for_s=0.4)
    profile = run.scenario.profile
    link = tmp_path / "ttyINDICATOR"  # a udev-style symlink the capture names; re-pointed on replug
    out = tmp_path / "cap"
    log = io.StringIO()
    stop = Stop()
    with PtyServer(run, link_path=str(link)) as server:
        summary = capture(str(link), profile, settings_for(profile), out, stop=stop, wait_s=5,
                          listeners=[PlainLog(profile.unit, log), UntilServed(server, stop)],
                          duration_s=run.duration_s + 120.0)  # a bound only; UntilServed ends it
    assert len(summary["gaps"]) == 1 and "# gap " in (out / "stream.rec").read_text()
    # Whatever the scheduling: every seating the capture received whole is in the files, accepted, in
    # its phase, at its value (3 counts), in order: before the gap the planned seatings from the
    # first, after it the planned ones up to the last.  Received whole is read from stream.rec here:
    # the spindle crossing a level between its stop and the work, down (placed) and up (lifted).
    # A seating in progress at the cut, or already down when the capture came back, may be there
    # or not, but never wrong.
    seatings = pd.read_csv(out / "seatings.csv")
    gap = summary["gaps"][0]
    pre_rows, post_rows = seatings[seatings.t_end_s <= gap["t_start_s"]], seatings[seatings.t_start_s >= gap["t_end_s"]]
    assert len(pre_rows) + len(post_rows) == len(seatings) and len(post_rows) >= 1
    planned, cut = run.truth["seatings"], run.truth["disconnects"][0]
    pre = [x for x in planned if x["t_end_s"] < cut["t_start_s"]]
    post = [x for x in planned if x["t_start_s"] > cut["t_end_s"]]
    assert len(pre) == 4 and len(post) == 5
    before, after = _recorded_values((out / "stream.rec").read_text())
    level = run.truth["stop_mm"] + 0.5  # below: the spindle near its stop, lifted
    down_b, down_a = [v > level for v in before], [v > level for v in after]
    lifted_whole = sum(a and not b for a, b in zip(down_b, down_b[1:]))  # placed and lifted again
    placed_after = sum(b and not a for a, b in zip(down_a, down_a[1:]))  # placed after the reopening
    assert not down_b[0] and not down_a[-1]  # the session starts and ends lifted
    assert _same_seatings(pre_rows, pre[:lifted_whole]) or (
        down_b[-1] and _same_seatings(pre_rows, pre[:lifted_whole + 1]))
    assert _same_seatings(post_rows, post[len(post) - placed_after:]) or (
        down_a[0] and _same_seatings(post_rows, post[len(post) - placed_after - 1:]))
    # the same recording replayed gives the very same files
    again = replay_file(out / "stream.rec", profile, settings_for(profile), tmp_path / "again")
    assert again == summary
    for name in ("summary.json", "seatings.csv", "samples.csv"):
        assert (out / name).read_bytes() == (tmp_path / "again" / name).read_bytes(), name
    # and the radius is within its stated uncertainty.  Smoke check only: one seeded session inside
    # U is a ~95 % event; the coverage study (tests/analysis/test_coverage.py) is the real check.
    assert abs(summary["radius_mm"] - run.truth["radius_mm"]) <= summary["radius_U_mm"]
    # the plain (non-terminal) output: one timestamped event per line
    lines = log.getvalue().splitlines()
    assert lines and all(ISO_LINE.match(x) for x in lines), [x for x in lines if not ISO_LINE.match(x)][:3]


def _wakeups() -> int:
    """This thread's voluntary context switches (Linux): each time it slept in a wait."""
    for line in open("/proc/thread-self/status"):
        if line.startswith("voluntary_ctxt_switches:"):
            return int(line.split()[1])
    raise AssertionError("no voluntary_ctxt_switches in /proc/thread-self/status")


def test_a_gathering_capture_wakes_seldom_and_keeps_lines_times_and_seatings(tmp_path):
    # --gather 0.2 at an indicator's 100 lines/s: about 20 lines a read instead of one.  Nothing
    # lost, the gathered lines' times spread back to the line rate (not 20 lines at one time: that
    # would leave all but one of them out of a seating's time weights), the planned seatings found
    # at their values, and the run folder the replay of its own stream.rec.
    run = short_session(rate_hz=100.0, surface_seatings=3)
    profile = run.scenario.profile
    sent = sum(1 for _ in run.lines())
    stop, out = Stop(), tmp_path / "gathered"
    with PtyServer(run) as server:
        w0 = _wakeups()
        summary = capture(server.path, profile, settings_for(profile), out, stop=stop, wait_s=5, gather_s=0.2,
                          listeners=[UntilServed(server, stop)], duration_s=run.duration_s + 120.0)
        woke = _wakeups() - w0
    assert summary["lines"] == sent
    assert woke < 0.25 * sent, (woke, sent)  # one wake-up a line without --gather
    times = pd.read_csv(out / "samples.csv")["t_s"].to_numpy()
    steps = times[1:] - times[:-1]
    assert (steps >= 0).all() and abs(float(pd.Series(steps).median()) - 0.01) < 0.002
    assert _same_seatings(pd.read_csv(out / "seatings.csv"), run.truth["seatings"])
    again = replay_file(out / "stream.rec", profile, settings_for(profile), tmp_path / "again")
    assert again == summary


def test_a_stop_during_a_gather_keeps_what_gathered(tmp_path):
    # A stop wakes the gather's sleep; the lines that came meanwhile (in the relay's pipe) are still
    # taken, not left unread when the port closes
    master, slave, path = _idle_pty()
    profile = load_profile(EXAMPLE_PROFILE)
    stop, out = Stop(), tmp_path / "stopped"
    done = []
    worker = threading.Thread(target=lambda: done.append(capture(path, profile, settings_for(profile), out, stop=stop,
                                                                 wait_s=5, gather_s=1.0)), daemon=True)
    try:
        worker.start()
        wait_for(lambda: (out / "stream.rec").exists(), 30, "the capture to start")
        os.write(master, b"+1.000\r\n")
        time.sleep(0.3)  # read at once (nothing gathers before the first read), then a gather of 1 s
        for k in range(59):
            os.write(master, b"+1.%03d\r\n" % (k + 1))
        time.sleep(0.1)
        stop.requested = True  # well inside the gather
        worker.join(30)
        assert not worker.is_alive() and done and done[0]["lines"] == 60
    finally:
        os.close(master)
        os.close(slave)


def test_gather_only_where_waiting_lines_are_safe(tmp_path):
    # a device path (read by the relay meanwhile) or a socket:// bridge; others are refused up front
    assert can_gather("/dev/ttyUSB0") and can_gather("socket://bridge:2000") and not can_gather("rfc2217://b:2")
    r = CliRunner().invoke(main, ["capture", "--port", "loop://", "--out", str(tmp_path / "o"),
                                  "--profile", str(EXAMPLE_PROFILE), "--gather", "0.1"])
    assert r.exit_code == 2 and "--gather works with a device path" in r.output and "Traceback" not in r.output
    assert not (tmp_path / "o").exists()


@given(st.floats(0, 1e5), st.floats(0, 1.0), st.integers(1, 5000))
def test_gathered_lines_are_spread_evenly_up_to_the_read(t_from_s, span_s, n):
    t_from_s, t_to_s = round(t_from_s, 6), round(t_from_s + span_s, 6)
    times = capture_module.spread_times(t_from_s, t_to_s, n)
    assert len(times) == n and times[-1] == t_to_s
    assert all(b >= a for a, b in zip([t_from_s, *times], times))
    step = (t_to_s - t_from_s) / n
    assert all(abs(t - (t_from_s + step * (k + 1))) <= 6e-7 for k, t in enumerate(times))


def test_capture_over_socket_url(tmp_path):
    run = short_session(flat_before=2, surface_seatings=2, flat_after=1)
    profile = run.scenario.profile
    with TcpServer(run) as server:
        summary = capture(server.url, profile, settings_for(profile), tmp_path / "s",
                          listeners=[PlainLog(profile.unit, io.StringIO())], duration_s=run.duration_s + 1.0, wait_s=5)
    c = run.truth["counts"]
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])


def _capture_process(port, out, *extra, bells=("--no-bells",), **popen):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", str(port), "--profile",
                             str(EXAMPLE_PROFILE), "--out", str(out), *bells, *extra],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env, **popen)


def wait_for_a_seating(out, timeout_s=60.0) -> None:
    """Until the first seating is in the run folder's summary (a bound, not a timing)."""
    deadline = time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        try:
            if json.loads((out / "summary.json").read_text())["seatings_total"] >= 1:
                return
        except (OSError, ValueError, KeyError):
            pass
        time.sleep(0.1)


def test_sigint_and_sigterm_end_cleanly_with_the_summary(tmp_path):
    # the bells (BEL on stderr): off by --no-bells, by its earlier name --quiet, on without either
    for sig, bells in ((signal.SIGINT, ("--no-bells",)), (signal.SIGTERM, ("--quiet",)), (signal.SIGINT, ())):
        run = short_session()
        out = tmp_path / f"{sig.name}{len(bells)}{''.join(bells)}"
        with PtyServer(run) as server:
            proc = _capture_process(server.path, out, bells=bells)
            wait_for_a_seating(out)
            proc.send_signal(sig)
            stdout, stderr = proc.communicate(timeout=30)
        assert proc.returncode == 0, stderr
        assert "Traceback" not in stderr and "run folder:" in stdout
        assert ("\a" in stderr) == (not bells)
        summary = json.loads((out / "summary.json").read_text())
        assert summary["seatings_total"] >= 1 and summary["ended_utc"]
        assert (out / "stream.rec").read_text().rstrip().splitlines()[-1].startswith("# end ")
        # plain output, since stdout is a pipe: every event line is timestamped
        events = [x for x in stdout.splitlines() if x[:2] == "20"]
        assert events and all(ISO_LINE.match(x) for x in events)


def test_ctrl_c_to_a_gathering_capture_and_its_relay_ends_the_run_cleanly(tmp_path):
    # Ctrl-C at a terminal signals the whole foreground process group: the run ends with exit 0,
    # its summary and no gap.  (That the relay is outside the group, so that it cannot die first
    # and look like an unplug, is checked directly in tests/transport/test_source.py: here the
    # capture's own stop usually wins that race anyway.)
    run = short_session()
    out = tmp_path / "gathered"
    with PtyServer(run) as server:
        proc = _capture_process(server.path, out, "--gather", "0.1", start_new_session=True)  # a group of its own
        wait_for_a_seating(out)
        os.killpg(proc.pid, signal.SIGINT)
        stdout, stderr = proc.communicate(timeout=30)
    assert proc.returncode == 0 and "Traceback" not in stderr, stderr
    summary = json.loads((out / "summary.json").read_text())
    assert summary["seatings_total"] >= 1 and summary["gaps"] == []
    assert "# gap " not in (out / "stream.rec").read_text()


def test_device_that_never_appears_exits_3(tmp_path):
    proc = _capture_process(tmp_path / "no-such-device", tmp_path / "o", "--wait", "0.5")
    stdout, stderr = proc.communicate(timeout=30)
    assert proc.returncode == 3 and stderr.count("\n") == 1 and "no such port" in stderr


def test_bad_port_url_is_a_user_error(tmp_path):
    proc = _capture_process("socket://", tmp_path / "o")
    stdout, stderr = proc.communicate(timeout=30)
    assert proc.returncode == 2 and stderr.count("\n") == 1 and "Traceback" not in stderr


@pytest.mark.parametrize("gather_s", [0.0, 0.2])
def test_an_indicator_that_answers_only_when_asked(tmp_path, gather_s):
    # a polled indicator (common practice for some models): nothing comes unless the logger asks;
    # a gathering capture still asks on time (it wakes for the next request)
    run = short_session(rate_hz=100.0, poll="?\\r")
    profile = run.scenario.profile
    stop = Stop()
    with PtyServer(run) as server:
        summary = capture(server.path, profile, settings_for(profile), tmp_path / "p", stop=stop, wait_s=5,
                          listeners=[PlainLog(profile.unit, io.StringIO()), UntilServed(server, stop)],
                          duration_s=run.duration_s + 120.0, poll_command=b"?\r", poll_interval_s=0.05,
                          gather_s=gather_s)
        answers = server.lines_sent  # the indicator sends a line only in answer to a request
    c = run.truth["counts"]
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])
    # Whatever the scheduling: the lines received are exactly the answers (UntilServed ends the
    # capture only after the indicator is done and a read brought nothing more), and the capture
    # never asked more often than every 0.05 s, so it holds at most 20 lines a second of its run
    # (the indicator shows 100 a second).  The answer rate itself is timing: not tested here.
    assert 0 < answers == summary["lines"]
    assert summary["lines"] <= summary["t_end_s"] / 0.05 + 2
    assert "# poll: b'?\\r' every 0.05 s" in (tmp_path / "p" / "stream.rec").read_text()  # settings in the header


def test_the_poll_request_is_decoded_from_the_scenario():
    # no `poll`: a streaming indicator (no request); with it, backslash escapes decoded as on the command line
    assert short_session().scenario.poll_request == b""
    assert short_session(poll="?\\r").scenario.poll_request == b"?\r"


def _idle_pty():
    """A raw-mode pty that sends nothing: (master, slave, the device path)."""
    master, slave = os.openpty()
    tty.setraw(slave)
    return master, slave, os.ttyname(slave)


def test_a_stop_from_another_thread_wakes_an_idle_capture(tmp_path, monkeypatch):
    # nothing arrives and nothing falls due: the capture sleeps (here up to an hour); a stop asked
    # for from another thread must end it at once, not at the end of the sleep
    monkeypatch.setattr(capture_module, "IDLE_WAIT_S", 3600.0)
    master, slave, path = _idle_pty()
    profile = load_profile(EXAMPLE_PROFILE)
    stop, out = Stop(), tmp_path / "idle"
    done = []
    worker = threading.Thread(target=lambda: done.append(capture(path, profile, settings_for(profile), out, stop=stop,
                                                                 wait_s=5)), daemon=True)
    try:
        worker.start()
        wait_for(lambda: (out / "stream.rec").exists(), 30, "the capture to start")
        time.sleep(1.5)  # past the first flushes: asleep on the idle wait
        stop.requested = True
        worker.join(30)
        assert not worker.is_alive() and done and done[0]["lines"] == 0
    finally:
        os.close(master)
        os.close(slave)


def test_sigterm_wakes_an_idle_capture_process(tmp_path):
    # the same through a real process and a real signal: the interpreter's wakeup fd ends the sleep
    master, slave, path = _idle_pty()
    out = tmp_path / "idle"
    code = ("import sys, logger.live.capture as c; c.IDLE_WAIT_S = 3600.0; from logger.cli.main import main; "
            "sys.argv[0] = 'saglog'; main()")
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    proc = subprocess.Popen([sys.executable, "-c", code, "capture", "--port", path, "--profile", str(EXAMPLE_PROFILE),
                             "--out", str(out), "--no-bells", "--view", "plain"],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env)
    try:
        wait_for(lambda: (out / "stream.rec").exists() or proc.poll() is not None, 60, "the capture to start")
        time.sleep(1.5)
        proc.send_signal(signal.SIGTERM)
        stdout, stderr = proc.communicate(timeout=30)
        assert proc.returncode == 0, stderr
        assert json.loads((out / "summary.json").read_text())["lines"] == 0
    finally:
        if proc.poll() is None:
            proc.kill()
        os.close(master)
        os.close(slave)


def test_listeners_ask_for_a_tick_only_while_something_waits(tmp_path):
    # what lets an idle capture sleep: nothing unwritten, undrawn or unsent -> no tick asked for;
    # something waiting -> a tick within that listener's own interval
    from rich.console import Console

    from logger.analysis.seating import State
    from logger.live.listener import Sample
    from logger.live.panel import REDRAW_EVERY_S, LivePanel
    from logger.live.stand.address import WebAddress
    from logger.live.stand.listener import EVENT_GAP_S, READING_EVERY_S, StandPage
    from logger.live.stand.server import StandServer
    from logger.run.writer import FLUSH_EVERY_S, RunWriter

    writer = RunWriter(tmp_path, 0.0, {})
    assert 0 <= writer.next_tick_in_s() <= FLUSH_EVERY_S  # the header, not yet flushed
    writer.flush()
    assert writer.next_tick_in_s() is None
    writer.sample(Sample(0.0, 0.0, b"+0.100", "+0.100", 0.1, "mm", State.LIFTED, None))
    assert 0 <= writer.next_tick_in_s() <= FLUSH_EVERY_S
    writer.close()
    panel = LivePanel("mm", console=Console(file=io.StringIO(), width=80))
    panel._draw()
    assert panel.next_tick_in_s() is None
    panel.sample(Sample(0.0, 0.0, b"+0.100", "+0.100", 0.1, "mm", State.LIFTED, None))
    assert 0 <= panel.next_tick_in_s() <= REDRAW_EVERY_S
    panel._draw()
    assert panel.next_tick_in_s() is None
    page = StandPage(StandServer(WebAddress("127.0.0.1", 0), None))  # not started: publish only keeps the state
    page.tick(0.0)  # the first state goes out at once
    assert page.next_tick_in_s() is None
    page.sample(Sample(0.0, 0.0, b"+0.100", "+0.100", 0.1, "mm", State.LIFTED, None))
    assert 0 < page.next_tick_in_s() <= READING_EVERY_S  # the new reading waits its turn
    page.state(State.SEATED)
    assert 0 <= page.next_tick_in_s() <= EVENT_GAP_S  # an event goes sooner


def test_a_device_that_never_appeared_leaves_no_empty_run_folder(tmp_path):
    proc = _capture_process(tmp_path / "missing", tmp_path / "run", "--wait", "0.3")
    proc.communicate(timeout=30)
    assert proc.returncode == 3 and not (tmp_path / "run").exists()


def _capture_in_a_thread(dev: PtyDevice, out, listeners=()):
    """A capture of `dev` into `out` on a thread not yet started: (profile, stop, out, [its summary], thread)."""
    profile, stop, done = load_profile(EXAMPLE_PROFILE), Stop(), []
    worker = threading.Thread(target=lambda: done.append(capture(str(dev.link), profile, settings_for(profile), out,
                                                                 stop=stop, wait_s=5, listeners=listeners)),
                              daemon=True)
    return profile, stop, out, done, worker


@pytest.mark.parametrize("first_bytes,is_tail", [(b"841 mm\r\n", True), (b"-1.841 mm\r\n", False), (b"\r\n", False)])
def test_a_port_opened_mid_line(tmp_path, first_bytes, is_tail):
    # An indicator streaming when the port opens: the bytes before the first line end may be the tail
    # of a line ("-1.841 mm" cut to "841 mm": a reading of the wrong value).  Such a tail is kept, as
    # a comment in stream.rec and a bad line in samples.csv, never as a reading; a whole first line
    # is a reading, and a first line that reads as nothing stays an ordinary bad line.  The same at
    # the reopening after an unplug.  The replay of stream.rec gives the very same run folder.
    dev = PtyDevice(tmp_path / "ttyINDICATOR")
    profile, stop, out, done, worker = _capture_in_a_thread(dev, tmp_path / "cap")

    def gaps():
        try:
            return len(json.loads((out / "summary.json").read_text())["gaps"])
        except (OSError, ValueError, KeyError):
            return 0

    try:
        worker.start()
        wait_for(lambda: (out / "stream.rec").exists(), 30, "the capture to start")
        dev.write(first_bytes + b"-1.841 mm\r\n" * 20)
        time.sleep(0.5)
        dev.unplug()
        dev.plug()
        wait_for(lambda: gaps() == 1, 30, "the capture to reopen the port")
        dev.write(first_bytes + b"-1.841 mm\r\n" * 20)
        time.sleep(0.5)
        stop.requested = True
        worker.join(30)
    finally:
        dev.close()
    assert not worker.is_alive() and done
    summary = done[0]
    samples = pd.read_csv(out / "samples.csv", keep_default_na=False)
    rec = (out / "stream.rec").read_text()
    firsts = [0, 21]  # the first line of each opening
    assert summary["lines"] == 42 and len(samples) == 42
    assert summary["bad_lines"] == (2 if is_tail or first_bytes == b"\r\n" else 0)
    if is_tail:
        assert all(samples.raw[k] == "841 mm\\x0d" and samples.value_mm[k] == "" and samples.state[k] == "bad"
                   for k in firsts)
        assert rec.count("# partial ") == 2 and "\t841 mm" not in rec
    else:
        assert "# partial " not in rec
        assert all((first_bytes != b"\r\n") == (samples.value_mm[k] != "") for k in firsts)
    assert all(float(v) == -1.841 for k, v in enumerate(samples.value_mm) if k not in firsts)
    for batch in (True, False):  # the replay both ways
        again = replay_file(out / "stream.rec", profile, settings_for(profile), tmp_path / f"again-{batch}",
                            batch=batch)
        assert again == summary
        for name in ("summary.json", "seatings.csv", "samples.csv"):
            assert (out / name).read_bytes() == (tmp_path / f"again-{batch}" / name).read_bytes(), name


def test_a_lone_first_line_is_not_held_off_the_disk(tmp_path):
    # An indicator that sends only on change, held still, sends one line and then nothing: the
    # first line's wait for the next is bounded, so it reaches stream.rec and the run while the
    # capture goes on (within the wait and the recording's flush), not only at the end.
    dev = PtyDevice(tmp_path / "ttyINDICATOR")
    _, stop, out, done, worker = _capture_in_a_thread(dev, tmp_path / "cap")
    try:
        worker.start()
        wait_for(lambda: (out / "stream.rec").exists(), 30, "the capture to start")
        dev.write(b"-1.234 mm\r\n")
        wait_for(lambda: "\t-1.234 mm" in (out / "stream.rec").read_text(), 5, "the line in stream.rec")
        assert worker.is_alive()
        stop.requested = True
        worker.join(30)
    finally:
        dev.close()
    assert done and done[0]["lines"] == 1 and done[0]["bad_lines"] == 0


class StatesHeard(Listener):
    """Every state the listeners are told, in order (with no lines sent, only the capture's own)."""

    def __init__(self):
        self.heard = []

    def state(self, state) -> None:
        self.heard.append(state)


def test_the_plain_log_says_when_the_device_is_gone_and_when_it_is_back(tmp_path):
    # Not there at the start (the capture waits for it before the run exists: no line for that), then
    # unplugged once and plugged back: one timestamped "waiting for device" and, after it, one "device
    # back after a gap of S s", S the gap summary.json records and within what the test's own clock
    # saw: from the plug to the waiting line at least, from the unplug to the back line at most.
    dev = PtyDevice(tmp_path / "ttyINDICATOR")
    dev.unplug()
    log, states = io.StringIO(), StatesHeard()
    _, stop, out, done, worker = _capture_in_a_thread(dev, tmp_path / "cap", [PlainLog("mm", log), states])
    try:
        worker.start()
        wait_for(lambda: State.WAITING in states.heard, 30, "the capture to wait for the device")
        dev.plug()
        wait_for(lambda: states.heard[-1:] == [State.LIFTED], 30, "the port to open")
        unplugged = time.monotonic()
        dev.unplug()
        wait_for(lambda: "waiting for device" in log.getvalue(), 30, "the waiting line")
        seen_waiting = time.monotonic()
        time.sleep(0.5)  # gone a while
        plugged = time.monotonic()
        dev.plug()
        wait_for(lambda: "device back" in log.getvalue(), 30, "the line when the device is back")
        seen_back = time.monotonic()
        stop.requested = True
        worker.join(30)
    finally:
        dev.close()
    assert not worker.is_alive() and done
    (gap,) = done[0]["gaps"]
    gap_s = gap["t_end_s"] - gap["t_start_s"]  # the capture's clock is monotonic too
    assert plugged - seen_waiting <= gap_s <= seen_back - unplugged
    lines = log.getvalue().splitlines()
    assert all(ISO_LINE.match(x) for x in lines), lines
    assert [x.split(" ", 1)[1] for x in lines] == ["waiting for device", f"device back after a gap of {gap_s:.1f} s"]
    assert lines[0].split()[0] < lines[1].split()[0]  # ISO 8601 UTC times in one format sort as text
