"""`saglog capture`: live from the indicator, hands-free, nothing lost.

The loop reads blocks from the source, cuts them into lines, records every
line in stream.rec and feeds the same (time, line) pairs to the pipeline
that replay uses.  When the device goes away it shows "waiting for device",
retries the same path with back-off and carries on in the same run; the gap
goes into stream.rec and summary.json.  Ctrl-C and SIGTERM end the run
cleanly; every ending leaves a complete run folder.

Exit status: 0 normal end, 2 a user error, 3 the device never appeared.
"""

from __future__ import annotations

import contextlib
import signal
import sys
import time
from pathlib import Path

import click

from .decode import LineSplitter
from .errors import DeviceGone, DeviceNotFound, UserError
from .liveview import Cues, Fanout, LiveView, PlainLog
from .options import analysis_options
from .pipeline import Pipeline, RunSettings
from .present import result_lines
from .profile import Profile
from .recording import RecWriter, end_comment, escape, gap_comment
from .runfolder import RunWriter, prepare_folder
from .source import SerialSource

EXIT_NO_DEVICE = 3
REC_FLUSH_S = 0.5  # stream.rec to disk at least this often (samples.csv: runfolder.FLUSH_EVERY_S)
VIEW_EVERY_S = 0.2  # the live panel is redrawn about five times a second


class NeverAppeared(UserError):
    """The device was not there at the start and did not come within the wait."""


class _Stop:
    """Set by SIGINT/SIGTERM; the loop checks it between blocks."""

    def __init__(self):
        self.requested = False

    def __call__(self, signum, frame):
        self.requested = True


def _open_with_wait(src: SerialSource, wait_s: float, stop: _Stop, on_wait) -> None:
    deadline = time.monotonic() + wait_s
    delay = 0.2
    while True:
        try:
            src.open()
            return
        except DeviceNotFound as exc:
            if not exc.absent:
                raise
            if time.monotonic() >= deadline or stop.requested:
                raise NeverAppeared(str(exc)) from None
            on_wait()
            time.sleep(delay)
            delay = min(delay * 2, 2.0)


def capture(port: str, profile: Profile, settings: RunSettings, out_dir: str | Path, *, baudrate=9600,
            bytesize=8, parity="N", stopbits=1, poll_command: bytes | None = None, poll_interval_s=0.5,
            duration_s: float | None = None, surface_seatings: int | None = None, wait_s: float = 10.0,
            view=None, cues: bool = True, force: bool = False, stop: _Stop | None = None) -> dict:
    """Capture into `out_dir` until the duration, the seating count or a stop signal; return the summary."""
    stop = stop or _Stop()
    fresh = not Path(out_dir).exists()
    out = prepare_folder(out_dir, force)
    src = SerialSource(port, baudrate=baudrate, bytesize=bytesize, parity=parity, stopbits=stopbits,
                       poll_command=poll_command, poll_interval_s=poll_interval_s)
    view = view or PlainLog(profile.unit)
    view.device = port
    try:
        _open_with_wait(src, wait_s, stop, lambda: view.state_changed("waiting for device"))
    except UserError:
        if fresh:
            with contextlib.suppress(OSError):
                out.rmdir()  # nothing was received: leave no empty run folder behind
        raise
    t0 = time.monotonic()
    start_wall = round(time.time(), 6)  # as the recording header states it

    def clock() -> float:
        # to the microsecond, as stream.rec keeps it: the replay then sees exactly what the capture saw
        return round(time.monotonic() - t0, 6)

    deadline = None if duration_s is None else t0 + duration_s
    settings.source = src.settings()
    writer = RunWriter(out, start_wall, settings.as_dict(profile))
    pipeline = Pipeline(profile, settings, writer, start_wall, Fanout(view, Cues(enabled=cues)))
    # last: once stream.rec exists, the folder is a complete (empty) run
    rec = RecWriter(out / "stream.rec", start_wall, {**src.settings(), "profile": profile.source})
    splitter = LineSplitter()
    last_rec_flush = last_view = t0
    view.state_changed("lifted")
    try:
        while not stop.requested:
            try:
                chunk = src.read_block()
            except DeviceGone:
                gap_start = clock()
                for raw in splitter.flush():  # a half line before the cut is still a received line
                    _take(rec, pipeline, gap_start, raw)
                view.state_changed("waiting for device")
                view.refresh(pipeline.summary)
                _reconnect(src, stop, view, deadline)
                gap_end = clock()
                rec.comment(gap_comment(gap_start, gap_end))
                pipeline.gap(gap_start, gap_end)
                if not src.is_open:
                    break  # stopped or out of time while waiting
                view.state_changed("lifted")
                continue
            now = clock()
            if chunk:
                for raw in splitter.feed(chunk):
                    _take(rec, pipeline, now, raw)
            pipeline.tick(now)
            mono = time.monotonic()
            if mono - last_rec_flush >= REC_FLUSH_S:
                rec.flush()
                last_rec_flush = mono
            if mono - last_view >= VIEW_EVERY_S:
                view.refresh(pipeline.summary)
                last_view = mono
            if duration_s is not None and now >= duration_s:
                break
            if surface_seatings is not None and pipeline.summary.get("seatings_surface", 0) >= surface_seatings:
                break
    finally:
        summary = _wind_up(splitter, rec, pipeline, writer, src, clock())
    view.refresh(summary)
    return summary


def _wind_up(splitter, rec, pipeline, writer, src, end: float) -> dict:
    """Close everything, even after a write error (disk full, read-only): every step is tried, the first error raised."""
    first = None

    def attempt(step):
        nonlocal first
        try:
            return step()
        except UserError as exc:
            first = first or exc

    attempt(lambda: [_take(rec, pipeline, end, raw) for raw in splitter.flush()])
    attempt(lambda: rec.comment(end_comment(end)))
    attempt(rec.close)
    summary = attempt(lambda: pipeline.finish(end))
    writer.close()
    src.close()
    if first is not None:
        raise first
    return summary


def _take(rec: RecWriter, pipeline: Pipeline, t_s: float, raw: bytes) -> None:
    """One received line: into the recording and the pipeline, escaped once for both."""
    text = escape(raw)
    rec.write_text(t_s, text)
    pipeline.line(t_s, raw, text)


def _reconnect(src: SerialSource, stop: _Stop, view, deadline: float | None) -> None:
    """Retry the same path with back-off until it opens again, a stop is asked for, or the run's time is up."""
    src.close()
    delay = 0.1
    while not stop.requested and (deadline is None or time.monotonic() < deadline):
        try:
            src.open()
            return
        except DeviceNotFound:
            time.sleep(delay)
            delay = min(delay * 1.5, 2.0)
            view.refresh()


@click.command("capture")
@click.option("--port", required=True, help="Device path, COM name or URL (socket://host:port, rfc2217://, loop://).")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), help="Run folder to write.")
@click.option("--baud", "baudrate", type=click.IntRange(50), default=9600, show_default=True)
@click.option("--bytesize", type=click.Choice(["5", "6", "7", "8"]), default="8", show_default=True)
@click.option("--parity", type=click.Choice(["N", "E", "O", "M", "S"]), default="N", show_default=True)
@click.option("--stopbits", type=click.Choice(["1", "1.5", "2"]), default="1", show_default=True)
@click.option("--poll", "poll", default=None, help="Request text to send for indicators that answer only when asked "
              "(backslash escapes allowed, e.g. '?\\r').")
@click.option("--poll-every", type=float, default=0.1, show_default=True, help="Seconds between requests.")
@click.option("--duration", "duration_s", type=float, default=None, help="Stop after this many seconds.")
@click.option("--seatings", "surface_seatings", type=click.IntRange(1), default=None,
              help="Stop after this many accepted surface seatings.")
@click.option("--wait", "wait_s", type=float, default=10.0, show_default=True,
              help="Seconds to wait for a device that is not there yet (then exit status 3).")
@click.option("--view", type=click.Choice(["auto", "live", "plain"]), default="auto", show_default=True,
              help="Live panel on a terminal, timestamped lines otherwise.")
@click.option("--quiet", is_flag=True, help="No bell cues.")
@click.option("--force", is_flag=True, help="Write into a run folder that already holds a run.")
@analysis_options
def capture_cmd(port, out_dir, baudrate, bytesize, parity, stopbits, poll, poll_every, duration_s,
                surface_seatings, wait_s, view, quiet, force, profile, run_settings):
    """Log the indicator live, notice every seating, and keep the run folder up to date.

    Seat on the flat first (the zero), then on the surface, and on the flat
    again at the end if you can (the drift check).  Ends at --duration,
    --seatings, Ctrl-C or SIGTERM.  Exit status 0, 2 for a user error, 3 when
    the device never appeared.
    """
    if duration_s is not None and duration_s <= 0:
        raise UserError(f"--duration: must be positive, got {duration_s:g}")
    poll_bytes = poll.encode("latin-1").decode("unicode_escape").encode("latin-1") if poll else None
    stop = _Stop()
    signal.signal(signal.SIGTERM, stop)
    signal.signal(signal.SIGINT, stop)
    live = view == "live" or (view == "auto" and sys.stdout.isatty())
    shown = LiveView(profile.unit) if live else PlainLog(profile.unit)
    try:
        with shown if live else contextlib.nullcontext():
            summary = capture(port, profile, run_settings, out_dir, baudrate=baudrate, bytesize=int(bytesize),
                              parity=parity, stopbits=float(stopbits), poll_command=poll_bytes,
                              poll_interval_s=poll_every, duration_s=duration_s, surface_seatings=surface_seatings,
                              wait_s=wait_s, view=shown, cues=not quiet, force=force, stop=stop)
    except NeverAppeared as exc:
        click.echo(f"saglog: error: {exc} (waited {wait_s:g} s)", err=True)
        sys.exit(EXIT_NO_DEVICE)
    for line in result_lines(summary):
        click.echo(line)
    click.echo(f"run folder: {out_dir}")
