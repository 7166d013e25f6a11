"""The run folder: the sinks at the end of the pipeline.

* samples.csv  -- every received line, appended and flushed at least once a second;
* seatings.csv -- every seating with its decision, replaced atomically after each
                  seating (a later seating may revise earlier decisions);
* summary.json -- replaced atomically whenever it changes;
* settings.json -- what the run was analysed with, written once;
* stream.rec   -- for a capture, the recording of every received line.

Atomic replacement: write a temporary file in the same folder, fsync it,
rename it over the old one, fsync the folder.  A kill at any moment leaves
either the old or the new file, never a torn one.  Write failures (disk full,
read-only folder) become one-line UserErrors; what was written stays.
"""

from __future__ import annotations

import json
import math
import os
import time
from pathlib import Path

from logger.run.columns import (REPORT_PICTURE, REPORT_TEXT, SAMPLES_COLUMNS, SAMPLES_FILE, SEATINGS_COLUMNS,
                                SEATINGS_FILE, SETTINGS_FILE, SUMMARY_FILE)
from logger.errors import UserError, cannot_write
from logger.live.listener import Listener, Sample
from logger.run.rows import csv_text, sample_head, sample_tail
from logger.timestamps import iso_utc

SAMPLE_COLUMNS = tuple(c.name for c in SAMPLES_COLUMNS)
SEATING_COLUMNS = tuple(c.name for c in SEATINGS_COLUMNS)
FLUSH_EVERY_S = 0.5


def _num(x, fmt="{:.6f}") -> str:
    return "" if x is None or (isinstance(x, float) and not math.isfinite(x)) else fmt.format(x)


def write_atomic(path: Path, data: str | bytes) -> None:
    """Replace `path` with `data` (text as UTF-8) so that a reader or a crash never sees half a file."""
    path = Path(path)
    tmp = path.with_name(f".{path.name}.tmp")
    try:
        with open(tmp, "wb") as f:
            f.write(data.encode("utf-8") if isinstance(data, str) else data)
            f.flush()
            os.fsync(f.fileno())
        os.replace(tmp, path)
        dir_fd = os.open(path.parent, os.O_RDONLY)
        try:
            os.fsync(dir_fd)
        finally:
            os.close(dir_fd)
    except BaseException as exc:  # a full disk, or Ctrl-C in a report: no half-written temporary left behind
        try:
            tmp.unlink(missing_ok=True)
        except OSError:
            pass
        if isinstance(exc, OSError):
            raise cannot_write(path, exc, f"earlier files in {path.parent} are kept") from None
        raise


def without_nan(x):
    """The same object with every NaN or infinity made None (null in JSON), for files and the stand page alike."""
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, dict):
        return {k: without_nan(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [without_nan(v) for v in x]
    return x


def json_text(obj) -> str:
    """JSON with no NaN or infinity: those become null."""
    return json.dumps(without_nan(obj), indent=2, allow_nan=False) + "\n"


def prepare_folder(out_dir: str | Path, force: bool = False) -> Path:
    """Create the run folder; refuse to mix a new run into an old one unless forced.

    Forced, the old run's files are replaced as the new run writes them,
    and its report (report.png, report.md: drawn from the old run) is
    removed, so that nothing in the folder describes another run.  A
    recording there is kept: it may be the one being replayed.
    """
    out = Path(out_dir)
    if out.exists() and not out.is_dir():
        raise UserError(f"{out}: exists and is not a folder")
    if out.is_dir() and (out / SUMMARY_FILE).exists():
        if not force:
            raise UserError(f"{out}: already holds a run ({SUMMARY_FILE}); choose another --out or pass --force")
        for name in (REPORT_PICTURE, REPORT_TEXT):
            try:
                (out / name).unlink(missing_ok=True)
            except OSError as exc:
                raise UserError(f"{out / name}: cannot remove the old run's report ({exc.strerror or exc})") from None
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise UserError(f"{out}: cannot create the run folder ({exc.strerror or exc})") from None
    if not os.access(out, os.W_OK):
        raise UserError(f"{out}: the run folder is not writable")
    return out


class RunWriter(Listener):
    """Writes one run folder as the pipeline produces it: the first listener of every run."""

    def __init__(self, out_dir: Path, start_wall: float, settings: dict):
        self.dir = Path(out_dir)
        self.start_wall = start_wall
        write_atomic(self.dir / SETTINGS_FILE, json_text(settings))
        self._samples = self._open(SAMPLES_FILE)
        self._rows: list[str] = []
        self._error = UserError(f"{self.dir / SAMPLES_FILE}: already closed")
        self._samples.write(",".join(SAMPLE_COLUMNS) + "\n")
        self._last_flush = time.monotonic()
        self._unflushed = True  # rows (or the header) not yet handed to the kernel
        self._closed = False

    def _open(self, name: str):
        try:
            return open(self.dir / name, "w", encoding="utf-8", newline="", buffering=1 << 16)
        except OSError as exc:
            raise cannot_write(self.dir / name, exc) from None

    def sample(self, sample: Sample) -> None:
        """One samples.csv row; `sample.text` is the line already escaped as in the recording."""
        t_s, t_wall, _, text, value_mm, _, state, seating = sample
        row = sample_head(iso_utc(t_wall), t_s) + sample_tail(text, value_mm, state, seating)
        rows = self._rows
        rows.append(row)
        self._unflushed = True
        if len(rows) >= 4096:
            self._write_rows()

    def _write_rows(self) -> None:
        """Rows are gathered and written in blocks: one write call per few thousand lines."""
        text, self._rows = "".join(self._rows), []
        try:
            self._samples.write(text)
        except (OSError, ValueError) as exc:  # ValueError: closed after an earlier failure
            self._fail(exc)

    def sample_block(self, rows: bytes) -> None:
        """Many samples.csv rows at once, already formatted as ASCII (the batch replay), after any rows still held."""
        self._write_rows()
        try:
            self._samples.flush()  # the text layer's buffer first, so the bytes follow it
            self._samples.buffer.write(rows)
        except (OSError, ValueError) as exc:
            self._fail(exc)

    def _fail(self, exc: Exception):
        """samples.csv cannot be written (disk full, read-only): close it at once, keep what is on disk."""
        if not isinstance(exc, OSError):
            raise self._error
        self._error = cannot_write(self.dir / SAMPLES_FILE, exc)
        self._closed = True
        try:
            self._samples.close()  # the unwritten buffer fails again; the file is closed all the same
        except OSError:
            pass
        raise self._error from None

    def tick(self, t_s: float) -> None:
        """samples.csv to disk at least every FLUSH_EVERY_S."""
        now = time.monotonic()
        if now - self._last_flush >= FLUSH_EVERY_S:
            self.flush()
            self._last_flush = now

    def next_tick_in_s(self) -> float | None:
        """Rows waiting: a tick by the time they are due on disk; none waiting: no tick needed."""
        if not self._unflushed:
            return None
        return max(0.0, FLUSH_EVERY_S - (time.monotonic() - self._last_flush))

    def flush(self) -> None:
        self._write_rows()
        try:
            self._samples.flush()
        except (OSError, ValueError) as exc:
            self._fail(exc)
        self._unflushed = False

    def published(self, result, summary: dict) -> None:
        """seatings.csv and summary.json replaced, samples.csv flushed: the folder is complete at every seating."""
        self.seatings(result.decisions)
        self.summary(summary)
        self.flush()

    def seatings(self, decisions) -> None:
        rows = [",".join(SEATING_COLUMNS)]
        for d in decisions:
            s = d.seating
            rows.append(",".join((
                str(s.index), iso_utc(self.start_wall + s.t_start_s), iso_utc(self.start_wall + s.t_end_s),
                f"{s.t_start_s:.6f}", f"{s.t_end_s:.6f}", d.phase, f"{s.value_mm:.7f}", f"{s.spread_mm:.7f}",
                str(s.n), "true" if d.accepted else "false", csv_text(d.reason) if d.reason else "",
                _num(d.zero_mm, "{:.7f}"), _num(d.sagitta_mm, "{:.7f}"), _num(d.score, "{:.3f}"),
            )))
        write_atomic(self.dir / SEATINGS_FILE, "\n".join(rows) + "\n")

    def summary(self, summary: dict) -> None:
        write_atomic(self.dir / SUMMARY_FILE, json_text(summary))

    def end(self, summary: dict) -> None:
        self.close()

    def close(self) -> None:
        if not self._closed:
            self._closed = True
            try:
                self.flush()  # the last rows; a failure here is reported like any other
                os.fsync(self._samples.fileno())
            except (OSError, ValueError):
                pass  # closed after an earlier, reported failure; what is on disk stays
            try:
                self._samples.close()
            except OSError:
                pass
