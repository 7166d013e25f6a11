"""A replay stopped early (Ctrl-C, SIGTERM) leaves the whole run of the lines it had read.

The reference is outside the stopped replay: the same recording cut after
as many records as the stopped run counts, replayed to its end.  The two
run folders must hold the same samples.csv, seatings.csv and summary.json,
byte for byte: nothing counted that was not written, no seating half
analysed.  In-process the stop is asked for at chosen moments (between
blocks, inside a block taken line by line, before anything, after the last
line); through the command line it is a real SIGINT to a real process.
"""

from __future__ import annotations

import json
import re
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

import logger.live.batch as batch
from benchmarks.feeder import session
from benchmarks.replay_bench import prefix
from logger.errors import Stopped
from logger.live.replay import replay_file
from tests.helpers.paths import EXAMPLE_PROFILE, ROOT, run_saglog
from tests.live.test_faults import fresh_settings, timed, write_rec

FILES = ("samples.csv", "seatings.csv", "summary.json")


class StopAfter:
    """A stop asked for at the `looks`-th time anyone looks at it."""

    def __init__(self, looks: int):
        self.left = looks

    @property
    def requested(self) -> bool:
        self.left -= 1
        return self.left < 0


def run_files(folder: Path) -> dict:
    return {name: (folder / name).read_bytes() for name in FILES}


def assert_whole_run_of_its_lines(rec: Path, stopped: Path, tmp: Path, profile) -> int:
    """The stopped run folder equals the full replay of the recording cut after the lines it counts."""
    lines = json.loads((stopped / "summary.json").read_text())["lines"]
    cut = tmp / f"cut-{lines}.rec"
    prefix(rec, cut, lines)
    replay_file(cut, profile, fresh_settings(profile), tmp / f"cut-{lines}", force=True)
    assert run_files(stopped) == run_files(tmp / f"cut-{lines}")
    with open(stopped / "samples.csv") as f:
        assert sum(1 for _ in f) - 1 == lines  # and every counted line has its row
    return lines


@pytest.fixture(scope="module")
def recording(tmp_path_factory) -> tuple[Path, int]:
    stream = session(12, rate_hz=100, seed=11)  # invented: flat, surface, flat again
    path = tmp_path_factory.mktemp("rec") / "stream.rec"
    write_rec(path, timed(stream.lines))
    return path, len(stream.lines)


@pytest.mark.parametrize("batch_way, looks", [(True, k) for k in (0, 1, 3, 7, 20)]
                         + [(False, k) for k in (0, 1, 3, 7, 500, 2300)])
def test_a_stop_leaves_the_whole_run_of_the_lines_before(recording, batch_way, looks, tmp_path, monkeypatch,
                                                         profile):
    rec, total = recording
    # blocks of about 140 lines: the batch way looks before each block (26 here), the
    # line-by-line way before each line
    monkeypatch.setattr(batch, "BLOCK_BYTES", 3000)
    out = tmp_path / "stopped"
    with pytest.raises(Stopped, match=r"replay stopped \(Ctrl-C or SIGTERM\) after [\d,]+ lines? of .*stream\.rec"):
        replay_file(rec, profile, fresh_settings(profile), out, batch=batch_way, stop=StopAfter(looks))
    lines = assert_whole_run_of_its_lines(rec, out, tmp_path, profile)
    assert 0 <= lines < total
    if not batch_way:
        assert lines == looks  # one look before each line


def test_a_stop_asked_for_after_the_last_line_is_no_stop(recording, tmp_path, profile):
    rec, total = recording
    summary = replay_file(rec, profile, fresh_settings(profile), tmp_path / "whole", batch=False,
                          stop=StopAfter(total))  # asked for only at the look after the last line
    assert summary["lines"] == total


def test_ctrl_c_at_the_command_line_stops_a_replay_with_its_run_whole(tmp_path, profile):
    # long enough that the first rows are on disk well before the end: 600,000 lines, 2 MB blocks
    stream = session(1500, rate_hz=100, seated_s=2.5, lifted_s=1.5, seed=42)
    rec, out = tmp_path / "long.rec", tmp_path / "run"
    write_rec(rec, timed(stream.lines))
    proc = subprocess.Popen([sys.executable, "-m", "logger", "replay", str(rec), "--profile", str(EXAMPLE_PROFILE),
                             "--out", str(out)], cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    samples = out / "samples.csv"
    while not (samples.exists() and samples.stat().st_size > 100_000) and proc.poll() is None:
        assert time.monotonic() < deadline, "the replay wrote no rows"
        time.sleep(0.002)
    proc.send_signal(signal.SIGINT)
    stdout, stderr = proc.communicate(timeout=60)
    assert proc.returncode == 1, (stdout, stderr)  # it was stopped before its end, not finished
    assert "Traceback" not in stderr
    assert stderr.strip().splitlines() == [stderr.strip()]
    assert stderr.startswith("saglog: replay stopped (Ctrl-C or SIGTERM) after ") and str(out) in stderr
    lines = assert_whole_run_of_its_lines(rec, out, tmp_path, profile)
    assert 0 < lines < len(stream.lines)
    # stdout first shows the result of those lines, as a capture's Ctrl-C does
    assert re.search(rf"bad lines? of {lines}\n", stdout) and stdout.rstrip().endswith(f"run folder: {out}")
    # what a user then does with it: the stopped run folder reports like any other
    assert run_saglog("report", out).returncode == 0
