"""`saglog replay`: the whole pipeline on a recording, into a run folder."""

from __future__ import annotations

import contextlib
from pathlib import Path
from typing import Sequence

from logger.config.profile import Profile
from logger.errors import Stopped, UserError
from logger.live.listener import Listener
from logger.live.pipeline import Pipeline, RunSettings
from logger.formats.recording import (is_recording, open_recording, parse_event, parse_partial, read_plain,
                                      read_recording)
from logger.live.batch import feed_recording
from logger.live.stop import NEVER
from logger.run.writer import RunWriter, prepare_folder
from logger.words import plural


def replay_file(path: str | Path, profile: Profile, settings: RunSettings, out_dir: str | Path,
                rate_hz: float | None = None, force: bool = False, listeners: Sequence[Listener] = (),
                batch: bool = True, stop=NEVER) -> dict:
    """Replay a .rec recording (or a plain capture at `rate_hz`) into `out_dir`; returns the summary.

    A malformed record stops the replay with a UserError, after everything
    before it has been analysed and written.  With no other listeners than
    the run folder, a recording goes the batch way (logger.live.batch: the
    same files, much faster); `batch=False`, or any listener, line by line.
    A `stop` asked for (logger.live.stop: Ctrl-C, SIGTERM) ends the
    feeding between two blocks or lines: the run folder is then the whole
    run of the lines fed so far, and Stopped is raised.
    """
    path = Path(path)
    if not path.exists():
        raise UserError(f"{path}: recording not found")
    if not path.is_file():  # a FIFO, a folder, a device: it is there, so "not found" would mislead
        raise UserError(f"{path}: not a regular file; a recording to replay is a file")
    end_s = None

    def on_comment(text: str) -> None:
        # capture events kept in the recording, so the replay sees the run as the capture did
        nonlocal end_s
        event = parse_event(text)
        if event is not None and event[0] == "gap":
            pipeline.gap(*event[1])
        elif event is not None:
            end_s = event[1][0]
        elif (partial := parse_partial(text)) is not None:  # the tail of a line the capture's port opened in
            pipeline.partial(*partial)

    batch = batch and not listeners
    if is_recording(path):
        if rate_hz is not None:
            raise UserError(f"{path}: --rate is for a plain capture without times; this is a recording "
                            "with its own times (leave --rate out)")
        if batch:
            header, p, f, first, lineno = open_recording(path)
            records = None
        else:
            header, records = read_recording(path, on_comment)
        start_wall = header.get("start_wall", 0.0)
        source = {"recording": str(path), **{k: v for k, v in header.items() if k != "start_wall"}}
    elif rate_hz is None:
        raise UserError(f"{path}: not a saglog recording; for a plain capture give --rate HZ")
    else:
        records, start_wall, batch = read_plain(path, rate_hz), _plain_start_wall(path, rate_hz), False
        source = {"plain_capture": str(path), "rate_hz": rate_hz,
                  "start": "the last line at the file's modification time"}
    settings.source = source
    out = prepare_folder(out_dir, force)
    writer = RunWriter(out, start_wall, settings.as_dict(profile))
    pipeline = Pipeline(profile, settings, [writer, *listeners], start_wall, live=False)
    try:
        stopped = batch and feed_recording(p, f, first, lineno, pipeline, writer, on_comment, stop)
        for t_s, raw, text in records or ():
            if stop.requested:  # looked at before each line: one asked for after the last is no stop
                stopped = True
                break
            pipeline.line(t_s, raw, text)
    except BaseException:
        # what came before is still analysed and written where it can be; the first error is the one to report
        with contextlib.suppress(UserError):
            pipeline.finish(end_s)
        raise
    summary = pipeline.finish(end_s)
    if stopped:
        n = summary["lines"]
        raise Stopped(f"replay stopped (Ctrl-C or SIGTERM) after {n:,} {plural(n, 'line')} of {path}; "
                      f"{out} holds the whole run of {'it' if n == 1 else 'them'}", summary)
    return summary


def _plain_start_wall(path: Path, rate_hz: float) -> float:
    """When a plain capture began: it holds no clock, but it was last written as its last line came.

    So the last line is put at the file's modification time, and the
    first (n - 1) / rate before it; to the microsecond, as recordings keep
    times.  (A copy that did not keep the time moves the run, not its result.)
    """
    n = sum(1 for _ in read_plain(path, rate_hz))
    return round(path.stat().st_mtime - max(n - 1, 0) / rate_hz, 6)
