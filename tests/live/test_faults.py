"""Fault suite: bad bytes, huge lines, noise, unit switches, unplugging, kill -9, full and read-only disks.

Everything runs on loopback parts only: real pseudo-terminals (os.openpty)
opened by pyserial, real subprocesses, real tmpfs mounts.  The streams are
invented (benchmarks/feeder.py: a spindle at its stop while lifted, a settling
transient, one count of noise while seated).

Outside references used below:
* bytes.splitlines (Python standard library) for where lines end;
* 1 in = 25.4 mm exactly (international yard and pound agreement, 1959);
* the CSV injection guard: a cell starting with = + - @ TAB or CR is run as a
  formula by common spreadsheets (OWASP "CSV Injection" note, from memory);
* kill -9 (SIGKILL) cannot be caught, so only what is on disk counts (POSIX);
* ENOSPC / EROFS come from a real tmpfs (Linux mount(8)); those tests need root
  (CI runs as root) and say so when mount fails.
"""

from __future__ import annotations

import csv
import io
import json
import os
import random
import signal
import subprocess
import sys
import threading
import time
import tracemalloc
from contextlib import contextmanager
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from benchmarks.feeder import Pacer, PtyDevice, session
from tests.helpers.paths import EXAMPLE_PROFILE, ROOT, run_saglog, user_error
from logger.cli.main import main
from logger.live import batch
from logger.live.capture import capture
from logger.live.stop import Stop
from logger.formats.decode import Decoder, LineSplitter
from logger.analysis.seating import State
from logger.live.plainlog import PlainLog
from logger.cli.options import run_settings_from
from logger.formats.recording import RecWriter
from logger.run.writer import write_atomic
from logger.live.replay import replay_file

FAST = dict(seated_s=0.7, lifted_s=0.2, tau_s=0.03)  # short seatings, with --settle 0.2 s
SETTLE_S = 0.2
RATE_HZ = 200.0


def fresh_settings(profile, **over):
    kw = dict(label="", rejection="modified-z", z_cut=None, alpha=None, flat_first=None, phase_gap=None, max_spread=None,
              settle=None, band=None, lift=None, target_radius=None, focal_length=None, focal_ratio=None,
              diameter=None)
    kw.update(over)
    return run_settings_from(profile, kw)


def write_rec(path, lines_with_times, start_wall=1_780_000_000.0):
    w = RecWriter(path, start_wall, {"source": "invented test stream"})
    for t_s, raw in lines_with_times:
        w.write(t_s, raw)
    w.close()


def timed(lines, rate_hz=100.0):
    """(t_s, line without LF) pairs at a fixed rate, as a capture would record them."""
    return [((i + 1) / rate_hz, raw[:-1]) for i, raw in enumerate(lines)]


def seatings_of(run_dir) -> pd.DataFrame:
    return pd.read_csv(Path(run_dir) / "seatings.csv")


def summary_of(run_dir) -> dict:
    return json.loads((Path(run_dir) / "summary.json").read_text())


# --------------------------------------------------------------------------
# decoder fuzzing: every byte accounted for


@settings(max_examples=300, deadline=None)
@given(blocks=st.lists(st.binary(max_size=400) | st.sampled_from([b"\r", b"\n", b"\r\n", b"+0.123 mm\r\n"]),
                       max_size=40),
       max_line=st.sampled_from([4, 16, 256]))
def test_every_byte_is_accounted_for(blocks, max_line):
    splitter, decoder = LineSplitter(max_line), Decoder("mm", max_line)
    lines = []
    for block in blocks:
        lines += splitter.feed(block)
        assert splitter.bytes_in == splitter.bytes_in_lines + splitter.bytes_dropped + len(splitter.pending)
        assert len(splitter.pending) < max_line
    lines += splitter.flush()
    assert splitter.bytes_in == sum(map(len, blocks))
    assert splitter.bytes_in == splitter.bytes_in_lines + splitter.bytes_dropped and splitter.pending == b""
    assert all(len(x) <= max_line for x in lines) and splitter.lines_out == len(lines)
    for raw in lines:
        value, unit, why = decoder.value(raw)
        assert (value is None) == bool(why) and (value is None or np.isfinite(value))
    assert decoder.good + decoder.bad == len(lines)
    data = b"".join(blocks)
    if len(data) < max_line:  # nothing cut: the lines are exactly bytes.splitlines' (LF dropped, CR kept)
        ref = [x[:-1] if x.endswith(b"\n") else x for x in data.splitlines(keepends=True)]
        assert lines == ref


# --------------------------------------------------------------------------
# a 10 MB line without a newline


HUGE = 10 * 1024 * 1024


def test_a_10_mb_line_is_cut_memory_stays_bounded_and_the_stream_recovers():
    good = b"+0.125 mm\r\n"
    splitter, decoder = LineSplitter(), Decoder()
    block = b"7" * 65536
    tracemalloc.start()
    out = splitter.feed(good * 3)
    for _ in range(HUGE // len(block)):
        out += splitter.feed(block)
    out += splitter.feed(b"\r\n" + good * 3)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 1_000_000  # a few blocks, never the 10 MB line
    assert [decoder.value(x)[0] for x in out] == [0.125] * 3 + [None] + [0.125] * 3
    assert splitter.bytes_dropped == HUGE - 256  # the cut line keeps 256 bytes; its CR LF ending counts as the line's


def test_replay_of_a_plain_capture_with_a_10_mb_line(tmp_path, profile):
    stream = session(6, rate_hz=100, seed=3)
    cut = stream.lift_at[2] + 10  # in the lifted stretch after the third seating
    plain = tmp_path / "plain.txt"
    with open(plain, "wb") as f:
        f.write(b"".join(stream.lines[:cut]))
        for _ in range(HUGE // 65536):
            f.write(b"\xff" * 65536)
        f.write(b"\r\n" + b"".join(stream.lines[cut:]))
    tracemalloc.start()
    summary = replay_file(plain, profile, fresh_settings(profile), tmp_path / "run", rate_hz=100)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert peak < 8_000_000  # the analysis and the writers; the 10 MB line is never held
    assert summary["bad_lines"] == 1 and summary["lines"] == len(stream.lines) + 1
    assert summary["seatings_total"] == 6  # the seatings after the huge line are all there
    samples = pd.read_csv(tmp_path / "run" / "samples.csv")
    assert len(samples) == summary["lines"] and samples["raw"].str.len().max() <= 4 * 256


# --------------------------------------------------------------------------
# baud-rate mismatch noise and a unit switch


def test_baud_mismatch_noise_is_counted_and_leaves_the_seatings_alone(tmp_path, profile):
    stream = session(9, rate_hz=100, seed=5)
    clean = timed(stream.lines)
    rng = random.Random(7)
    noisy, n_noise = [], 0
    for t_s, raw in clean:
        noisy.append((t_s, raw))
        if rng.random() < 0.05:  # what a wrong baud rate looks like: high bytes, NUL, 0xFF, no sense
            junk = bytes(rng.choice([0x00, 0xFF, *range(0x80, 0xFF)]) for _ in range(rng.randint(1, 30)))
            noisy.append((t_s, junk))
            n_noise += 1
    write_rec(tmp_path / "clean.rec", clean)
    write_rec(tmp_path / "noisy.rec", noisy)
    a = replay_file(tmp_path / "clean.rec", profile, fresh_settings(profile), tmp_path / "a")
    b = replay_file(tmp_path / "noisy.rec", profile, fresh_settings(profile), tmp_path / "b")
    assert a["bad_lines"] == 0 and b["bad_lines"] == n_noise > 20
    assert b["lines"] == a["lines"] + n_noise
    pd.testing.assert_frame_equal(seatings_of(tmp_path / "a"), seatings_of(tmp_path / "b"))
    assert a["seatings_total"] == 9 and a["radius_mm"] == b["radius_mm"]
    samples = pd.read_csv(tmp_path / "b" / "samples.csv")
    assert (samples["state"] == "bad").sum() == n_noise


def test_unit_switch_mid_stream_gives_millimetres(tmp_path, profile):
    stream = session(9, rate_hz=100, seed=9)
    lo, hi = stream.lift_at[2], stream.lift_at[5]  # seatings 4..6 are sent in inches
    lines = list(stream.lines)
    for i in range(lo, hi):
        mm = float(lines[i].split()[0])
        lines[i] = b"%+.5f in\r\n" % (mm / 25.4)
    write_rec(tmp_path / "u.rec", timed(lines))
    summary = replay_file(tmp_path / "u.rec", profile, fresh_settings(profile), tmp_path / "run")
    samples = pd.read_csv(tmp_path / "run" / "samples.csv")
    inch = samples["raw"].str.contains(" in")
    assert inch.sum() == hi - lo
    # 1 in = 25.4 mm exactly; samples.csv keeps 6 decimals
    expected = samples.loc[inch, "raw"].map(lambda r: float(r.split()[0]) * 25.4)
    np.testing.assert_allclose(samples.loc[inch, "value_mm"], expected, rtol=0, atol=5e-7)
    assert summary["seatings_total"] == 9 and summary["seatings_surface"] == 3
    seats = seatings_of(tmp_path / "run")
    # a 1e-5 in step is 0.000254 mm: the inch seatings sit at -0.340 mm within that and the noise
    np.testing.assert_allclose(seats["value_mm"], stream.levels_mm, atol=0.0008)


# --------------------------------------------------------------------------
# live capture over a pty: unplug and replug 20 times


class ConnectView(PlainLog):
    """A quiet view that tells the test when the capture has (re)opened the port and each seating."""

    def __init__(self, unit):
        super().__init__(unit, io.StringIO())
        self.connected = threading.Event()
        self.seatings_seen = 0
        self._waiting = True

    def state(self, state):
        super().state(state)
        if state == State.WAITING:
            self._waiting = True
            self.connected.clear()
        elif state == State.LIFTED and self._waiting:
            self._waiting = False
            self.connected.set()

    def seating(self, decision, summary):
        super().seating(decision, summary)
        self.seatings_seen += 1


def wait_for(cond, timeout_s=10.0, what="condition"):
    deadline = time.monotonic() + timeout_s
    while not cond():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.005)


def test_unplug_and_replug_20_times_loses_no_seating(tmp_path, profile):
    n = 20
    stream = session(n, rate_hz=RATE_HZ, seed=11, **FAST)
    # cycle k: from the end of seating k-1's run-out to the first run-out lines of seating k
    cuts = [0] + [i + 5 for i in stream.lift_at]
    dev = PtyDevice(tmp_path / "ttyV0")
    view = ConnectView(profile.unit)
    stop = Stop()
    result = {}

    def run():
        try:
            result["summary"] = capture(str(dev.link), profile, fresh_settings(profile, settle=SETTLE_S),
                                        tmp_path / "run", listeners=[view], stop=stop, wait_s=5)
        except BaseException as exc:  # surfaced in the test thread below
            result["error"] = exc

    th = threading.Thread(target=run, daemon=True)
    th.start()
    try:
        for k in range(n):
            wait_for(lambda: view.connected.is_set() or "error" in result, what=f"connection {k + 1}")
            pacer = Pacer(dev, stream.lines[cuts[k]:cuts[k + 1]], RATE_HZ)
            pacer.run()
            wait_for(lambda: view.seatings_seen >= k + 1, what=f"seating {k + 1}")
            dev.unplug()
            wait_for(lambda: not view.connected.is_set(), what=f"unplug {k + 1} noticed")
            dev.plug()
        wait_for(lambda: view.connected.is_set(), what="last connection")
        Pacer(dev, stream.lines[cuts[-1]:], RATE_HZ).run()
        time.sleep(0.2)
    finally:
        stop.requested = True
        th.join(10)
        dev.close()
    assert "error" not in result, result.get("error")
    summary = summary_of(tmp_path / "run")
    seats = seatings_of(tmp_path / "run")
    assert len(seats) == n and seats["accepted"].all()
    np.testing.assert_allclose(seats["value_mm"], stream.levels_mm, atol=0.0015)
    assert summary["seatings_flat"] == 6 and summary["seatings_surface"] == n - 6
    assert len(summary["gaps"]) == n and all(g["t_end_s"] > g["t_start_s"] for g in summary["gaps"])
    rec_text = (tmp_path / "run" / "stream.rec").read_text()
    assert rec_text.count("\n# gap ") == n
    replayed = replay_file(tmp_path / "run" / "stream.rec", profile, fresh_settings(profile, settle=SETTLE_S),
                           tmp_path / "replayed")
    assert {k: v for k, v in replayed.items() if k != "status"} == {
        k: v for k, v in summary.items() if k != "status"}
    for name in ("seatings.csv", "samples.csv"):
        assert (tmp_path / "run" / name).read_bytes() == (tmp_path / "replayed" / name).read_bytes(), name


# --------------------------------------------------------------------------
# kill -9 at 20 random moments


def start_capture(port, out, *extra, **popen):
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", str(port), "--out", str(out),
                             "--profile", str(EXAMPLE_PROFILE), "--settle", str(SETTLE_S), "--view", "plain",
                             "--no-bells", "--wait", "20", *map(str, extra)],
                            env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, **popen)


def wait_opened(proc, out, timeout_s=30.0):
    """The capture has the port open once stream.rec exists (it is created right after the open)."""
    wait_for(lambda: (out / "stream.rec").exists() or proc.poll() is not None, timeout_s, "the capture to start")
    assert proc.poll() is None, proc.stderr.read()


def check_after_kill(out: Path):
    samples = pd.read_csv(out / "samples.csv")
    assert list(samples.columns[:5]) == ["time", "t_s", "raw", "value_mm", "state"]
    seats = pd.read_csv(out / "seatings.csv")
    summary = summary_of(out)
    assert summary["seatings_total"] <= len(seats)
    assert list(seats["index"][: summary["seatings_total"]]) == list(range(1, summary["seatings_total"] + 1))
    return summary["seatings_total"]


def _published(out: Path) -> int:
    """Seatings in the capture's summary.json so far (0 while it is not there yet)."""
    try:
        return summary_of(out)["seatings_total"]
    except (OSError, ValueError, KeyError):
        return 0


def test_kill_9_at_20_random_moments_leaves_readable_files(tmp_path):
    rng = random.Random(20)
    stream = session(40, rate_hz=RATE_HZ, seed=13, **FAST)
    totals, late_totals = [], []
    for batch in range(4):  # five captures at a time, each killed at its own moment
        runs = []
        for j in range(5):
            dev = PtyDevice(tmp_path / f"tty{batch}{j}")
            out = tmp_path / f"run{batch}{j}"
            # four at a random moment; one only once it has published two seatings (a condition,
            # not a time, so a kill after results exist happens however slowly the machine runs)
            runs.append((dev, out, start_capture(dev.link, out), rng.uniform(0.0, 3.0) if j else None))
        pacers = []
        for dev, out, proc, _ in runs:
            wait_opened(proc, out)
            pacers.append(Pacer(dev, stream.lines, RATE_HZ))
            pacers[-1].start()
        t0 = time.monotonic()
        for dev, out, proc, at in sorted(runs[1:], key=lambda r: r[3]):
            time.sleep(max(0.0, at - (time.monotonic() - t0)))
            proc.send_signal(signal.SIGKILL)
            proc.wait(10)
        late = runs[0]
        wait_for(lambda: _published(late[1]) >= 2 or late[2].poll() is not None, 120, "two published seatings")
        late[2].send_signal(signal.SIGKILL)
        late[2].wait(10)
        for p in pacers:
            p.stop()
            p.join(5)
        for dev, out, proc, _ in runs:
            dev.close()
            proc.stderr.close()
            totals.append(check_after_kill(out))
        late_totals.append(totals[-5])
    assert min(late_totals) >= 2  # the kills after results existed left them readable
    assert len(totals) == 20


# --------------------------------------------------------------------------
# a full disk and a read-only folder


def mount(*args: str) -> None:
    """mount(8) or umount(8); these tests need root (CI runs the suite as root; see DEVELOPERS.md)."""
    r = subprocess.run(list(args), capture_output=True, text=True)
    if r.returncode != 0:
        pytest.fail(f"{' '.join(args)} failed ({' '.join(r.stderr.split()) or r.returncode}): the disk-full and "
                    f"read-only tests mount a tmpfs or a bind mount and need root (uid {os.geteuid()} here); "
                    "run them as root, as CI does", pytrace=False)


@contextmanager
def tmpfs(path: Path, size: str):
    path.mkdir()
    mount("mount", "-t", "tmpfs", "-o", f"size={size}", "tmpfs", str(path))
    try:
        yield path
    finally:
        mount("umount", "-l", str(path))


def one_line_error(stderr: str, *words):
    lines = stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in stderr, stderr
    assert lines[0].startswith("saglog: error: ") and all(w in lines[0] for w in words), lines[0]


def test_disk_full_during_capture_gives_one_line_and_keeps_what_was_written(tmp_path):
    stream = session(60, rate_hz=RATE_HZ, seed=17, **FAST)
    with tmpfs(tmp_path / "small", "96k") as fs:
        dev = PtyDevice(tmp_path / "tty")
        out = fs / "run"
        proc = start_capture(dev.link, out)
        wait_opened(proc, out)
        pacer = Pacer(dev, stream.lines, RATE_HZ)  # fills the 96 kB disk in a few seconds
        pacer.start()
        try:
            rc = proc.wait(60)
        finally:
            pacer.stop()
            pacer.join(5)
            dev.close()
        stderr = proc.stderr.read()
        assert rc == 2
        one_line_error(stderr, "No space left on device")
        total = check_after_kill(out)  # the same promise as after a kill: files readable, seatings kept
        assert total >= 1
        rec = (out / "stream.rec").read_text()
        assert rec.startswith("# saglog recording") and rec.count("\n") > 100
        assert not list(out.glob(".*.tmp"))  # no half-written temporary left taking space


@contextmanager
def read_only_bind(path: Path):
    """The folder made read-only under a running program: a read-only bind mount over itself (mount(8))."""
    mount("mount", "--bind", str(path), str(path))
    try:
        mount("mount", "-o", "remount,bind,ro", str(path))
        yield path
    finally:
        mount("umount", "-l", str(path))


def test_read_only_folder_mid_capture_gives_one_line_and_keeps_what_was_written(tmp_path):
    stream = session(12, rate_hz=RATE_HZ, seed=19, **FAST)
    dev = PtyDevice(tmp_path / "tty")
    out = tmp_path / "run"
    proc = start_capture(dev.link, out)
    wait_opened(proc, out)
    pacer = Pacer(dev, stream.lines, RATE_HZ)
    pacer.start()
    try:
        wait_for(lambda: summary_of(out)["seatings_total"] >= 2, 20, "two seatings")
        before = summary_of(out)["seatings_total"]
        with read_only_bind(out):
            rc = proc.wait(30)
            stderr = proc.stderr.read()
    finally:
        pacer.stop()
        pacer.join(5)
        dev.close()
    assert rc == 2
    one_line_error(stderr, "Read-only file system")
    assert check_after_kill(out) >= before


def test_disk_full_during_a_batch_replay_gives_one_line_and_keeps_the_rows_before_in_order(tmp_path, monkeypatch):
    # The batch replay writes samples.csv on a second thread (logger.live.batch.RowsBehind): a write error
    # there still reaches the user as the one line, from a later block's hand-over, and what reached the
    # disk is the start of what a roomy disk gets, in the same order.
    write_rec(tmp_path / "s.rec", timed(session(30, rate_hz=100, seed=29).lines))  # about 700 kB of rows
    monkeypatch.setattr(batch, "BLOCK_BYTES", 1 << 14)  # blocks of about 600 lines: many hand-overs
    args = ["replay", str(tmp_path / "s.rec"), "--profile", str(EXAMPLE_PROFILE), "--out"]
    assert CliRunner().invoke(main, [*args, str(tmp_path / "roomy")]).exit_code == 0
    whole = (tmp_path / "roomy" / "samples.csv").read_bytes()
    with tmpfs(tmp_path / "small", "256k") as fs:
        res = CliRunner().invoke(main, [*args, str(fs / "run")])
        user_error(res, "No space left on device", "samples.csv")
        kept = (fs / "run" / "samples.csv").read_bytes()
    assert 10_000 < len(kept) < len(whole) and whole.startswith(kept)


def test_read_only_folder_from_the_start(tmp_path):
    stream = session(4, rate_hz=100, seed=23)
    write_rec(tmp_path / "s.rec", timed(stream.lines))
    with tmpfs(tmp_path / "ro", "1m") as fs:
        (fs / "run").mkdir()
        mount("mount", "-o", "remount,ro", str(fs))
        r = run_saglog("replay", tmp_path / "s.rec", "--profile", EXAMPLE_PROFILE, "--out", fs / "run")
        assert r.returncode == 2
        one_line_error(r.stderr, str(fs / "run"))
        dev = PtyDevice(tmp_path / "tty")
        try:
            r = run_saglog("capture", "--port", dev.link, "--profile", EXAMPLE_PROFILE, "--out", fs / "run2",
                           "--duration", 1, "--view", "plain")
        finally:
            dev.close()
        assert r.returncode == 2
        one_line_error(r.stderr, str(fs / "run2"))


def test_an_interrupt_while_a_file_is_replaced_keeps_the_old_file_and_leaves_no_temporary(tmp_path, monkeypatch):
    # Ctrl-C in `report` or `history` (KeyboardInterrupt) while report.png is being made durable: the
    # moment between the temporary's write and its rename, where a half-replaced file could be left
    target = tmp_path / "report.md"
    target.write_text("the report before")

    def interrupted(fd):
        raise KeyboardInterrupt

    monkeypatch.setattr(os, "fsync", interrupted)
    with pytest.raises(KeyboardInterrupt):
        write_atomic(target, "the new report")
    assert target.read_text() == "the report before"
    assert sorted(tmp_path.iterdir()) == [target]  # no .report.md.tmp left behind


# --------------------------------------------------------------------------
# labels and raw text that try to become spreadsheet formulas


FORMULAS = ["=HYPERLINK(\"http://127.0.0.1/\",\"x\")", "+cmd|' /C calc'!A0", "-2+3+cmd|' /C calc'!A0", "@SUM(1,2)"]


def formula_cells(path: Path) -> list[str]:
    """Cells a spreadsheet would run: starting with = + - @ TAB CR and not a plain signed number (with a unit)."""
    bad = []
    with open(path, newline="", encoding="utf-8") as f:
        for row in csv.reader(f):
            for cell in row:
                if cell[:1] in ("=", "+", "-", "@", "\t", "\r"):
                    number = cell.replace("\\x0d", "").strip().removesuffix("mm").removesuffix("in").strip()
                    try:
                        float(number.replace(",", ".").replace(" ", ""))
                    except ValueError:
                        bad.append(cell)
    return bad


def test_labels_and_raw_text_never_become_formulas(tmp_path):
    stream = session(9, rate_hz=100, seed=29)
    pairs = timed(stream.lines)
    for k, f in enumerate(FORMULAS):  # bad lines that look like formulas
        pairs.insert(50 + k, (pairs[50 + k][0], f.encode()))
    write_rec(tmp_path / "s.rec", pairs)
    runs = []
    for k, label in enumerate(FORMULAS):
        run = tmp_path / label[:1].replace("=", "eq").replace("+", "plus").replace("-", "minus").replace("@", "at")
        r = run_saglog("replay", tmp_path / "s.rec", "--profile", EXAMPLE_PROFILE, "--out", run, "--label", label)
        assert r.returncode == 0, r.stderr
        assert summary_of(run)["label"] == label  # kept as given in JSON, which no spreadsheet runs
        runs.append(run)
    # a run folder whose own name looks like a formula, given as a relative path
    r = run_saglog("replay", tmp_path / "s.rec", "--profile", EXAMPLE_PROFILE, "--out", "=1+1", "--label", "=1+1",
                   cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    r = run_saglog("history", *[p.name for p in runs], "=1+1", "--out", "h.png", cwd=tmp_path)
    assert r.returncode == 0, r.stderr
    csvs = [tmp_path / "h.csv"] + [p / n for p in runs for n in ("samples.csv", "seatings.csv")]
    for path in csvs:
        assert formula_cells(path) == [], path
    history = pd.read_csv(tmp_path / "h.csv")
    assert sorted(history["label"].str.lstrip("'")) == sorted(FORMULAS + ["=1+1"])
    samples = pd.read_csv(runs[0] / "samples.csv")
    assert sorted(samples.loc[samples["state"] == "bad", "raw"].str.lstrip("'")) == sorted(FORMULAS)
