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
import math
import time
from pathlib import Path
from typing import Sequence

from logger.analysis.seating import State
from logger.config.profile import Profile
from logger.errors import DeviceGone, DeviceNotFound, UserError
from logger.formats.decode import LineSplitter
from logger.formats.recording import RecWriter, end_comment, escape, gap_comment, partial_comment
from logger.live.listener import Listener
from logger.live.opening import FirstLine
from logger.live.pipeline import Pipeline, RunSettings
from logger.live.stop import Stop
from logger.run.columns import RECORDING_FILE
from logger.run.writer import RunWriter, prepare_folder
from logger.transport.serial_source import SerialSource, can_gather

REC_FLUSH_S = 0.5  # stream.rec to disk at least this often (samples.csv: run.writer.FLUSH_EVERY_S)
IDLE_WAIT_S = 1.0  # the longest a capture sleeps when nothing arrives and nothing falls due
# --gather: lines are let gather only after a read smaller than this (a fast stream is read at once)
GATHER_BYTES = 1024


def spread_times(t_from_s: float, t_to_s: float, n: int) -> list[float]:
    """Times for n lines that gathered between two reads: evenly after `t_from_s`, the last at `t_to_s`.

    Nobody saw when each arrived; for a stream sending at a steady rate
    this is where they were, and no time is off by more than the gather.
    To the microsecond, as stream.rec keeps times.
    """
    if n == 0:
        return []
    step = (t_to_s - t_from_s) / n
    return [round(t_from_s + step * (k + 1), 6) for k in range(n - 1)] + [t_to_s]


class NeverAppeared(UserError):
    """The device was not there at the start and did not come within the wait."""

    exit_status = 3


def _open_first(src: SerialSource, wait_s: float, stop: Stop, listeners: Sequence[Listener],
                made: Path | None) -> None:
    """Open the port at the start, waiting for it; a run folder `made` for this run is removed if it never came."""

    def waiting():  # before the run exists, only the watchers hear that the device is not there yet
        for lst in listeners:
            lst.state(State.WAITING)

    try:
        _open_with_wait(src, wait_s, stop, waiting)
    except UserError:
        if made is not None:
            with contextlib.suppress(OSError):
                made.rmdir()  # nothing was received: leave no empty run folder behind
        raise


def _open_with_wait(src: SerialSource, wait_s: float, stop: Stop, on_wait) -> None:
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
                raise NeverAppeared(f"{exc} (waited {wait_s:g} s)") from None
            on_wait()
            time.sleep(delay)
            delay = min(delay * 2, 2.0)


def capture(port: str, profile: Profile, settings: RunSettings, out_dir: str | Path, *, baudrate=9600,
            bytesize=8, parity="N", stopbits=1, poll_command: bytes | None = None, poll_interval_s=0.5,
            duration_s: float | None = None, surface_seatings: int | None = None, wait_s: float = 10.0,
            listeners: Sequence[Listener] = (), force: bool = False, stop: Stop | None = None,
            gather_s: float = 0.0) -> dict:
    """Capture into `out_dir` until the duration, the seating count or a stop signal; return the summary.

    `listeners` (views, bells, the stand page ...) hear the run after the run-folder writer.
    `gather_s` > 0: after a small read, let lines gather this long before the next (fewer wake-ups,
    less CPU on a small computer; each line is seen up to that much later, its time spread).
    """
    if gather_s and not can_gather(str(port)):
        raise UserError(f"--gather works with a device path (Linux, macOS) or a socket:// bridge, not {port}")
    stop = stop or Stop()
    fresh = not Path(out_dir).exists()
    out = prepare_folder(out_dir, force)
    src = SerialSource(port, baudrate=baudrate, bytesize=bytesize, parity=parity, stopbits=stopbits,
                       poll_command=poll_command, poll_interval_s=poll_interval_s, relay=gather_s > 0)
    _open_first(src, wait_s, stop, listeners, out if fresh else None)
    t0 = time.monotonic()
    start_wall = round(time.time(), 6)  # as the recording header states it

    def clock() -> float:
        # to the microsecond, as stream.rec keeps it: the replay then sees exactly what the capture saw
        return round(time.monotonic() - t0, 6)

    deadline = None if duration_s is None else t0 + duration_s
    settings.source = src.settings()
    writer = RunWriter(out, start_wall, settings.as_dict(profile))
    pipeline = Pipeline(profile, settings, [writer, *listeners], start_wall)
    # last: once stream.rec exists, the folder is a complete (empty) run
    rec = RecWriter(out / RECORDING_FILE, start_wall, {**src.settings(), "profile": profile.source})
    splitter = LineSplitter()
    opening = FirstLine(lambda raw: pipeline.decoder.parse(raw)[0] is not None)
    last_rec_flush = t0
    wait_s = src.read_timeout_s
    gathered_since = None  # after a gather: the time of the read before it
    pipeline.device_state(State.LIFTED)
    try:
        while not stop.requested:
            since, gathered_since = gathered_since, None
            try:
                chunk = src.read_block(wait_s if since is None else 0.0, stop)
            except DeviceGone:
                if not _ride_out_gap(src, splitter, opening, rec, pipeline, stop, deadline, clock):
                    break  # stopped or out of time while waiting
                continue
            now = clock()
            if chunk:
                _take_chunk(splitter, opening, rec, pipeline, chunk, since, now)
                wait_s = src.read_timeout_s  # while lines flow, the next arrives soon: nothing more to work out
            _take_all(rec, pipeline, opening.due(now))  # a first line that no reading followed in time
            pipeline.tick(now)
            mono = time.monotonic()
            if rec.pending and mono - last_rec_flush >= REC_FLUSH_S:
                rec.flush()
                last_rec_flush = mono
            if duration_s is not None and now >= duration_s:
                break
            if surface_seatings is not None and pipeline.result.summary.get("seatings_surface", 0) >= surface_seatings:
                break
            if not chunk:
                rec_due_s = REC_FLUSH_S - (mono - last_rec_flush) if rec.pending else None
                wait_s = _quiet_wait(pipeline, src, opening, now, rec_due_s, duration_s)
            elif gather_s and len(chunk) < GATHER_BYTES:  # a slow stream: let the next lines gather
                poll_in_s = src.next_poll_in_s()  # a polled indicator is still asked on time
                poll_at = math.inf if poll_in_s is None else now + poll_in_s
                wake_at = min(now + gather_s, duration_s or math.inf, poll_at)
                stop.sleep(wake_at - clock())
                gathered_since = now
        _take_the_rest(src, splitter, opening, rec, pipeline, gathered_since, clock)
    finally:
        summary = _wind_up(splitter, opening, rec, pipeline, src, clock())
    return summary


def _quiet_wait(pipeline: Pipeline, src: SerialSource, opening: FirstLine, now: float, rec_due_s: float | None,
                duration_s: float | None) -> float:
    """Nothing came: sleep until the soonest thing due (a tick someone needs, a poll, a first line's wait, the
    recording's flush, the end)."""
    waits = [IDLE_WAIT_S, pipeline.next_tick_in_s(now), src.next_poll_in_s(), opening.due_in_s(now), rec_due_s,
             None if duration_s is None else duration_s - now]
    return max(0.001, min(w for w in waits if w is not None))


def _wind_up(splitter, opening, rec, pipeline, src, end: float) -> dict:
    """Close everything, even after a write error (disk full, read-only): every step is tried, the first error raised."""
    first = None

    def attempt(step):
        nonlocal first
        try:
            return step()
        except UserError as exc:
            first = first or exc

    attempt(lambda: _take_all(rec, pipeline, opening.release()))  # each its own step: one failing
    attempt(lambda: _take_all(rec, pipeline, [(end, raw, False) for raw in splitter.flush()]))  # skips not the other
    attempt(lambda: rec.comment(end_comment(end)))
    attempt(rec.close)
    summary = attempt(lambda: pipeline.finish(end))
    attempt(pipeline.end)  # every listener ended (files closed) even when the finish failed
    src.close()
    if first is not None:
        raise first
    return summary


def _take_chunk(splitter: LineSplitter, opening: FirstLine, rec: RecWriter, pipeline: Pipeline, chunk: bytes,
                since: float | None, now: float) -> None:
    """One read's lines, at the read's time, or (after a gather since `since`) spread up to it."""
    lines = splitter.feed(chunk)
    times = [now] * len(lines) if since is None else spread_times(since, now, len(lines))
    for t_s, raw in zip(times, lines):
        _take_all(rec, pipeline, opening.lines(t_s, raw))


def _take_cut(splitter: LineSplitter, opening: FirstLine, rec: RecWriter, pipeline: Pipeline, t_s: float) -> None:
    """The port closed (a gap): what waited after the opening, then a half line before the cut, are taken."""
    _take_all(rec, pipeline, opening.release())
    for raw in splitter.flush():  # a half line before the cut is still a received line
        _take(rec, pipeline, t_s, raw)


def _take_all(rec: RecWriter, pipeline: Pipeline, items) -> None:
    for item in items:
        _take(rec, pipeline, *item)


def _take_the_rest(src: SerialSource, splitter, opening, rec, pipeline, since: float | None, clock) -> None:
    """At a stop: what came since the last read (a gather's worth, in the relay's pipe) is taken, not left unread.

    A few reads at most: a stream that keeps coming does not hold the stop up.
    """
    if not src.is_open:
        return
    for _ in range(4):
        try:
            chunk = src.read_block(0.0)
        except DeviceGone:
            return
        if not chunk:
            return
        now = clock()
        _take_chunk(splitter, opening, rec, pipeline, chunk, since, now)
        since = None if since is None else now


def _take(rec: RecWriter, pipeline: Pipeline, t_s: float, raw: bytes, partial: bool = False) -> None:
    """One received line: into the recording and the pipeline, escaped once for both.

    The tail of a line the port opened in (`partial`) goes into the recording as a comment, and into
    the run as a bad line."""
    if partial:
        rec.comment(partial_comment(t_s, raw))
        pipeline.partial(t_s, raw)
        return
    text = escape(raw)
    rec.write_text(t_s, text)
    pipeline.line(t_s, raw, text)


def _ride_out_gap(src, splitter, opening, rec, pipeline, stop, deadline, clock) -> bool:
    """The device went away: keep what came, show "waiting for device", reopen the same path; True once back."""
    gap_start = clock()
    _take_cut(splitter, opening, rec, pipeline, gap_start)
    pipeline.device_state(State.WAITING)
    _reconnect(src, stop, deadline)
    gap_end = clock()
    rec.comment(gap_comment(gap_start, gap_end))
    pipeline.gap(gap_start, gap_end)
    if src.is_open:
        opening.opened()
        pipeline.device_state(State.LIFTED)
    return src.is_open


def _reconnect(src: SerialSource, stop: Stop, deadline: float | None) -> None:
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
