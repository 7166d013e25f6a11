"""Bytes -> lines -> readings: the first two stages of the pipeline.

`LineSplitter` cuts a stream of byte blocks into lines (LF, CR or CRLF
endings, split across blocks in any way) with a hard bound on line length,
so a device spewing noise with no newline cannot grow memory.  `Decoder`
turns one line into a `Reading`, trying the `LINE_FORMATS` in their declared
order.  Neither ever raises on bad bytes: a bad line is a Reading whose
value is None and whose `bad` says why.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from logger.formats.frames import decode_frame_line
from logger.units import MM_PER_INCH

MAX_LINE = 256  # bytes; no indicator line is anywhere near this long

# Optional sign, digits with '.' or ',' as decimal mark, optional space,
# optional unit (mm, in, inch, ") in any case.  Surrounding blanks allowed.
_READING = re.compile(
    rb'[ \t]*([+-]?)[ \t]*(\d+(?:[.,]\d*)?|[.,]\d+)[ \t]*(mm|inch|in|")?[ \t]*\r?\Z',
    re.IGNORECASE,
)
_LINE = re.compile(rb"([^\r\n]*)(\r\n|\r|\n)")
_NON_TEXT = re.compile(rb"[^\t\r\x20-\x7e]")


@dataclass(frozen=True, slots=True)
class Reading:
    """One received line.

    t_s: receipt time, seconds since the stream started (monotonic clock).
    t_wall: receipt time, Unix epoch seconds (UTC wall clock).
    raw: the line's bytes as received, without its final LF (a CR is kept).
    value_mm: the reading in millimetres, None for a bad line.
    unit: 'mm' or 'in', the unit the value was read in (the line's own or the default).
    bad: why a bad line is bad ('' for a good one).
    """

    t_s: float
    t_wall: float
    raw: bytes
    value_mm: float | None
    unit: str | None
    bad: str = ""


class LineSplitter:
    """Cut byte blocks into lines without growing memory.

    Lines are returned without their LF; a CR terminator is kept (so a
    recording shows how the device ended its lines).  A CR followed by LF,
    even in the next block, is one ending.  A line longer than `max_line`
    is cut to `max_line` bytes and the rest of it, up to the next ending, is
    dropped and counted in `dropped_bytes`.  Counters account for every byte:
    bytes_in == bytes_in_lines + bytes_dropped + len(pending).
    """

    def __init__(self, max_line: int = MAX_LINE):
        self.max_line = max_line
        self._tail = b""
        self._skip_lf = False  # the last block ended in CR: a leading LF belongs to it
        self._discarding = False  # inside the rest of an over-long line
        self.bytes_in = 0
        self.bytes_in_lines = 0
        self.bytes_dropped = 0
        self.lines_out = 0

    @property
    def pending(self) -> bytes:
        return self._tail

    def feed(self, chunk: bytes) -> list[bytes]:
        if not chunk:  # an empty read (a timeout) must not forget a CR waiting for its LF
            return []
        self.bytes_in += len(chunk)
        if self._skip_lf and chunk[:1] == b"\n":
            chunk = chunk[1:]
            self.bytes_in_lines += 1  # the LF of the previous CRLF
        self._skip_lf = False
        if not chunk:
            return []
        if not self._tail and not self._discarding and len(chunk) <= self.max_line and chunk[-1:] == b"\n":
            # The usual read of a live capture: a few whole lines, each ended by LF or by CR LF.  Split at
            # the LFs (a CR stays in its line, as below); no line can be over-long in a chunk this short.
            crs = chunk.count(b"\r")
            if not crs or crs == chunk.count(b"\r\n") == chunk.count(b"\n"):
                out = chunk.split(b"\n")
                out.pop()
                self.bytes_in_lines += len(chunk)
                self.lines_out += len(out)
                return out
        data = self._tail + chunk if self._tail else chunk
        out: list[bytes] = []
        pos = 0
        limit = self.max_line
        # Match only up to the last line ending: a regex scan over an
        # unterminated tail would retry at every byte (quadratic in its length).
        end = max(data.rfind(b"\n"), data.rfind(b"\r")) + 1
        for m in _LINE.finditer(data, 0, end):
            body = m.group(1)
            if self._discarding:
                self.bytes_dropped += len(body)
                self.bytes_in_lines += m.end(2) - m.start(2)
                self._discarding = False
                pos = m.end()
                continue
            term = m.group(2)
            line = body + b"\r" if term != b"\n" else body
            if len(line) > limit:
                self.bytes_dropped += len(line) - limit
                line = line[:limit]
            self.bytes_in_lines += len(line) + (1 if term != b"\r" else 0)
            out.append(line)
            pos = m.end()
        rest = data[pos:]
        if not rest and data.endswith(b"\r"):
            self._skip_lf = True  # only a CR at the very end may have its LF in the next block
        if self._discarding:
            self.bytes_dropped += len(rest)
            rest = b""
        elif len(rest) >= limit:
            out.append(rest[:limit])  # cut off: reported now, the rest is dropped
            self.bytes_in_lines += limit
            self.bytes_dropped += len(rest) - limit
            self._discarding = True
            rest = b""
        self._tail = rest
        self.lines_out += len(out)
        return out

    def flush(self) -> list[bytes]:
        """End of stream: an unterminated tail becomes a last (probably half) line."""
        rest, self._tail = self._tail, b""
        self._discarding = False
        if not rest:
            return []
        self.bytes_in_lines += len(rest)
        self.lines_out += 1
        return [rest]


class Decoder:
    """Line -> Reading, with no configuration beyond the unit for unit-less lines.

    A line's own unit wins, line by line, so pressing the indicator's unit
    button mid-stream is handled.  Counts good and bad lines.  An indicator
    repeats a few hundred distinct lines over and over (one per count), so
    decoded lines are remembered: a bounded memo, cleared when full.
    """

    MEMO_SIZE = 4096

    def __init__(self, default_unit: str = "mm", max_line: int = MAX_LINE):
        self.default_unit = default_unit
        self.max_line = max_line
        self.good = 0
        self.bad = 0
        self._memo: dict[bytes, tuple[float | None, str | None, str]] = {}

    def value(self, raw: bytes) -> tuple[float | None, str | None, str]:
        """(value_mm, unit, why bad) for one line; the hot path of the pipeline."""
        hit = self._memo.get(raw)
        if hit is None:
            hit = self.parse(raw)
            if len(self._memo) >= self.MEMO_SIZE:
                self._memo.clear()
            self._memo[raw] = hit
        if hit[0] is None:
            self.bad += 1
        else:
            self.good += 1
        return hit

    def decode(self, raw: bytes, t_s: float, t_wall: float) -> Reading:
        value_mm, unit, bad = self.value(raw)
        return Reading(t_s, t_wall, raw, value_mm, unit, bad)

    def parse(self, raw: bytes) -> tuple[float | None, str | None, str]:
        """`value` without counting or remembering: the batch replay decodes each distinct line once."""
        if len(raw) < self.max_line:  # a line as long as the bound may have been cut: never a reading
            for _name, read in LINE_FORMATS:
                hit = read(raw, self.default_unit)
                if hit is not None:
                    return hit[0], hit[1], ""
        return None, None, _why_bad(raw, self.max_line)


def read_indicator_line(raw: bytes, default_unit: str) -> tuple[float, str] | None:
    """An indicator's own text line (docs/streams.md): (value_mm, unit it was read in), None for anything else."""
    m = _READING.match(raw)
    if m is None:
        return None
    sign, digits, unit = m.groups()
    value = float(digits.replace(b",", b"."))
    if sign == b"-":
        value = -value
    if unit is None:
        unit_name = default_unit
    else:
        unit_name = "mm" if unit[:1] in b"mM" else "in"
    if unit_name == "in":
        value *= MM_PER_INCH
    return value, unit_name


def read_frame_line(raw: bytes, default_unit: str) -> tuple[float, str] | None:
    """The bridge's raw-frame line `F:<variant>:<nbits>:<HEX>` (logger.formats.frames); it carries its own unit."""
    frame = decode_frame_line(raw) if raw[:2] == b"F:" else None
    if frame is None:
        return None
    value, unit_name = frame
    return (value * MM_PER_INCH if unit_name == "in" else value), unit_name


# The line formats, tried in this order; the first that reads a line wins.  Each is
# (name, read) with read(raw line, default unit) -> (value_mm, unit) or None, so a
# new format is one function and one entry here (and rows in tests/formats/).
LINE_FORMATS = (
    ("indicator", read_indicator_line),
    ("bridge-frame", read_frame_line),
)


def _why_bad(raw: bytes, max_line: int) -> str:
    if len(raw) >= max_line:
        return "over-long line"
    if not raw.strip(b" \t\r"):
        return "empty line"
    if _NON_TEXT.search(raw):
        return "non-text bytes (wrong baud rate or line noise?)"
    return "not a reading"
