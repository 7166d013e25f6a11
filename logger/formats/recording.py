"""Recordings (*.rec): every received line with its time, so any capture can be replayed.

Format (docs/streams.md, "Recording format"): UTF-8 text, one record per received line,
``seconds-since-start TAB escaped-bytes``; every byte outside 0x20..0x7E and
the backslash itself is written ``\\xHH`` in lower-case hex, so a CR shows
as ``\\x0d``.  Lines starting with ``#`` are comments; the header comments
(``# key: value``) state the start time, the port settings and the version.

The reader streams (constant memory) and is fast on the common lines: no
backslash at all, or a single trailing ``\\x0d``.  A malformed record raises a
UserError naming the file and line, after every record before it has been
yielded, so a replay keeps what was good.
"""

from __future__ import annotations

import functools
import math
import os
import re
from collections.abc import Callable, Iterator
from pathlib import Path

from logger import __version__
from logger.checks import is_positive
from logger.formats.decode import LineSplitter
from logger.errors import UserError, cannot_write
from logger.timestamps import iso_utc, parse_iso_utc

MAGIC = "# saglog recording"
_NEEDS_ESCAPE = re.compile(rb"[^\x20-\x5b\x5d-\x7e]")  # printable ASCII except the backslash
_ESCAPE_SEQ = re.compile(rb"\\x([0-9a-f]{2})")
_BAD_TEXT = re.compile(rb"[^\x20-\x7e]")
_BAD_BLOCK = re.compile(rb"[^\x20-\x7e\n\t]")  # the TAB after each time is expected
_CR = "\\x0d"
_CR_B = b"\\x0d"
_SPACE = "\\x20"  # a space in a comment's escaped bytes
_BLOCK = 1 << 16


@functools.lru_cache(maxsize=4096)  # lines repeat, one per indicator count
def escape(raw: bytes) -> str:
    """Line bytes -> the record's text field."""
    if not _NEEDS_ESCAPE.search(raw):
        return raw.decode("ascii")
    if raw[-1:] == b"\r" and not _NEEDS_ESCAPE.search(raw, 0, len(raw) - 1):
        return raw[:-1].decode("ascii") + _CR
    return _NEEDS_ESCAPE.sub(lambda m: b"\\x%02x" % m[0][0], raw).decode("ascii")


def unescape(text: str) -> bytes:
    """The record's text field -> line bytes; a UserError for anything malformed."""
    raw = _unescape_bytes(text.encode("utf-8"))
    if raw is None:
        raise UserError(f"not a valid escaped line: {text!r}")
    return raw


def _unescape_bytes(field: bytes) -> bytes | None:
    if _BAD_TEXT.search(field):
        return None  # a raw control or non-ASCII byte: the writer never emits those
    if b"\\" not in field:
        return field
    if field.endswith(_CR_B) and field.count(b"\\") == 1:
        return field[:-4] + b"\r"
    parts = _ESCAPE_SEQ.split(field)  # text, hex, text, hex, ..., text
    texts = parts[0::2]
    if any(b"\\" in t for t in texts):
        return None  # a backslash that is not a well-formed \xHH
    hexes = parts[1::2]
    out = bytearray(texts[0])
    for h, t in zip(hexes, texts[1:]):
        out.append(int(h, 16))
        out += t
    return bytes(out)


class RecWriter:
    """Append records to a .rec file; `flush()` makes them durable (fsync)."""

    def __init__(self, path, start_wall: float, header: dict | None = None):
        self.path = Path(path)
        try:
            self._f = open(self.path, "w", encoding="utf-8", newline="\n")
        except OSError as exc:
            raise cannot_write(self.path, exc) from None
        self.records = 0
        self.pending = True  # written but not yet flushed to disk (the header, so far)
        self._error = UserError(f"{self.path}: the recording is already closed")
        self._f.write(f"{MAGIC}\n# start_utc: {iso_utc(start_wall)}\n")
        items = dict(header or {})
        items.setdefault("saglog_version", __version__)
        for key, value in items.items():
            self._f.write(f"# {key}: {_one_line(value)}\n")

    def _write(self, text: str) -> None:
        try:
            self._f.write(text)
        except (OSError, ValueError) as exc:  # ValueError: closed after an earlier failure
            self._fail(exc)
        self.pending = True

    def _fail(self, exc: Exception):
        """A write failed (disk full, read-only): close at once, keep what is on disk, one-line error."""
        if isinstance(exc, OSError):
            self._error = cannot_write(self.path, exc, "what was written before is kept")
            try:
                self._f.close()  # the unwritten buffer fails again; the file is closed all the same
            except OSError:
                pass
        raise self._error from None

    def write(self, t_s: float, raw: bytes) -> None:
        self.write_text(t_s, escape(raw))

    def write_text(self, t_s: float, text: str) -> None:
        """A line already escaped (a capture escapes each line once for all its files)."""
        if not math.isfinite(t_s):
            raise ValueError(f"record time must be finite, got {t_s!r}")
        self._write(f"{t_s:.6f}\t{text}\n")
        self.records += 1

    def comment(self, text: str) -> None:
        """A note between records, e.g. a gap while the device was away."""
        for part in str(text).splitlines() or [""]:
            self._write(f"# {part}\n")

    def flush(self) -> None:
        try:
            self._f.flush()
            os.fsync(self._f.fileno())
        except (OSError, ValueError) as exc:
            self._fail(exc)
        self.pending = False

    def close(self) -> None:
        if not self._f.closed:
            try:
                self.flush()
            finally:
                try:
                    self._f.close()
                except OSError:
                    pass  # already reported by flush

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def gap_comment(t_start_s: float, t_end_s: float) -> str:
    """The comment a capture writes when the device was away from t_start to t_end."""
    return f"gap {t_start_s:.6f} {t_end_s:.6f}"


def end_comment(t_s: float) -> str:
    """The comment a capture writes when it stopped (the last moment it was listening)."""
    return f"end {t_s:.6f}"


def partial_comment(t_s: float, raw: bytes) -> str:
    """The comment a capture writes for the tail of a line it came in on (logger.live.opening), in place of a record.

    The bytes are kept, escaped as a record's are and with spaces as
    \\x20 (a comment is read stripped and split at spaces).
    """
    text = escape(raw).replace(" ", _SPACE)
    return f"partial {t_s:.6f} {text}"


def parse_partial(text: str) -> tuple[float, bytes] | None:
    """(t_s, raw) of a partial-line comment, None for any other comment (or one with an unusable time)."""
    word, *args = text.split() or [""]
    if word != "partial" or len(args) > 2:
        return None
    try:
        t_s, raw = float(args[0]), unescape(args[1] if len(args) == 2 else "")
    except (IndexError, ValueError, UserError):
        return None
    return (t_s, raw) if math.isfinite(t_s) else None


def parse_event(text: str) -> tuple[str, list[float]] | None:
    """('gap', [t0, t1]) or ('end', [t]) for an event comment, None for any other comment."""
    word, *args = text.split() or [""]
    if (word, len(args)) not in (("gap", 2), ("end", 1)):
        return None
    try:
        times = [float(a) for a in args]
    except ValueError:
        return None
    return (word, times) if all(map(math.isfinite, times)) else None  # an edited file's inf or nan: no event


def _one_line(value) -> str:
    return " ".join(str(value).split("\n"))


def _open(path, what: str):
    p = Path(path)
    try:
        return p, open(p, "rb")
    except FileNotFoundError:
        raise UserError(f"{p}: {what} not found") from None
    except IsADirectoryError:
        raise UserError(f"{p}: is a directory, not a {what}") from None
    except OSError as exc:
        raise UserError(f"{p}: cannot read {what} ({exc.strerror or exc})") from None


def read_recording(path, on_comment: Callable[[str], None] | None = None
                   ) -> tuple[dict, Iterator[tuple[float, bytes, str]]]:
    """Header dict (with `start_wall`, epoch seconds, when stated) and an iterator of (t_s, raw, text).

    `text` is the record's escaped field as it stands in the file (what
    samples.csv shows).  Comments between records (a capture's "gap T0 T1",
    "end T" and "partial T BYTES") go to `on_comment`, in order with the records.
    """
    header, p, f, first, lineno = open_recording(path)
    return header, _records(p, f, first, lineno, on_comment)


def open_recording(path) -> tuple[dict, Path, object, bytes | None, int]:
    """The header, the open file, its first record line (None if none) and the number of lines before it."""
    p, f = _open(path, "recording")
    header: dict = {}
    lineno = 0
    first = None
    for line in f:
        if not line.startswith(b"#"):
            first = line
            break
        text = line[1:].decode("utf-8", "replace").strip()
        key, sep, value = text.partition(":")
        item = sep and key and " " not in key.strip()
        if lineno and not item:  # an event before the first record (a gap, a partial line): the records begin
            first = line
            break
        lineno += 1
        if item:
            header[key.strip()] = value.strip()
    if "start_utc" in header:
        start = parse_iso_utc(header["start_utc"])
        if start is not None:
            header["start_wall"] = start
    return header, p, f, first, lineno


def record_blocks(f, first: bytes | None, size: int = _BLOCK) -> Iterator[bytes]:
    """The records from `first` on, in blocks of whole lines of about `size` bytes (the last may lack its LF)."""
    if first is None:
        return
    carry = first
    while True:
        block = f.read(size)
        if not block:
            if carry:
                yield carry
            return
        data = carry + block
        cut = data.rfind(b"\n") + 1
        data, carry = data[:cut], data[cut:]
        if data:
            yield data


def _records(p: Path, f, first: bytes | None, lineno: int, on_comment) -> Iterator[tuple[float, bytes, str]]:
    with f:
        for data in record_blocks(f, first):
            yield from block_records(p, data, lineno, on_comment)
            lineno += data.count(b"\n") + (not data.endswith(b"\n"))


def block_records(p: Path, data: bytes, lineno: int, on_comment) -> Iterator[tuple[float, bytes, str]]:
    """The records of one block of whole lines, the first being line `lineno + 1` of the file."""
    lines = data.split(b"\n")
    if lines[-1] == b"":
        lines.pop()
    # One scan per block instead of one per line: a block of plain
    # printable records (the usual case) skips the per-line checks.
    clean = not _BAD_BLOCK.search(data)
    for line in lines:
        lineno += 1
        t_text, tab, field = line.partition(b"\t")
        try:
            t_s = float(t_text)
        except ValueError:
            if line[:1] == b"#":
                if on_comment is not None:
                    on_comment(line[1:].decode("utf-8", "replace").strip())
                continue
            if not line.strip():
                continue
            raise UserError(f"{p}:{lineno}: malformed record (expected 'seconds<TAB>line')") from None
        if not tab or t_s - t_s != 0:  # no TAB, or nan/inf
            raise UserError(f"{p}:{lineno}: malformed record (expected 'seconds<TAB>line')")
        fast = clean and 0x09 not in field  # a raw TAB inside the line goes the careful way
        if fast and 0x5C not in field:
            yield t_s, field, field.decode("ascii")
            continue
        if fast and field[-4:] == _CR_B and field.count(0x5C) == 1:
            yield t_s, field[:-4] + b"\r", field.decode("ascii")
            continue
        if not clean and field[-1:] == b"\r":
            field = field[:-1]  # a file edited into CRLF; a real CR is always escaped
        raw = _unescape_bytes(field)
        if raw is None:
            raise UserError(f"{p}:{lineno}: malformed record (bad escape or raw control byte)")
        yield t_s, raw, field.decode("ascii")


def read_plain(path, rate_hz: float) -> Iterator[tuple[float, bytes, str]]:
    """A raw capture without timestamps: (t_s, raw, escaped text), the i-th line at t = i / rate."""
    if not is_positive(rate_hz):
        raise UserError(f"--rate must be a positive number of lines per second, got {rate_hz!r}")
    p, f = _open(path, "capture")
    return _plain(f, rate_hz)


def _plain(f, rate_hz: float) -> Iterator[tuple[float, bytes, str]]:
    splitter = LineSplitter()
    i = 0
    with f:
        while True:
            block = f.read(_BLOCK)
            lines = splitter.feed(block) if block else splitter.flush()
            for line in lines:
                yield i / rate_hz, line, escape(line)
                i += 1
            if not block:
                return


def is_recording(path) -> bool:
    """True for a .rec file (its magic line, or a first record 'seconds<TAB>...')."""
    p, f = _open(path, "recording")
    with f:
        head = f.read(4096)
    if head.startswith(MAGIC.encode()):
        return True
    for line in head.split(b"\n"):
        if line.startswith(b"#"):
            continue
        return re.match(rb"\d+(\.\d+)?\t", line) is not None
    return False
