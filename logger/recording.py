"""Recordings (`*.rec`): every received line with its receipt time, replayable.

Format (CONTRACT.md): UTF-8 text; per record the seconds since the start of
the recording, a TAB, then the line's bytes as received without the final LF,
every byte outside 0x20..0x7E and the backslash itself written \\xHH (lower
case), so CR shows as \\x0d.  Lines starting with '#' are comments: a header
(start time, port settings, version) and, in the body, events of the capture
("# gap T0 T1" when the device was away, "# end T" when it stopped).
"""

from __future__ import annotations

import functools
import os
import re
import time
from pathlib import Path
from typing import Callable, Iterator

from . import __version__
from .decode import LineSplitter
from .errors import UserError

_NEEDS_ESCAPE = re.compile(rb"[^\x20-\x5b\x5d-\x7e]")
_ESCAPED = re.compile(r"\\x([0-9a-f]{2})")


@functools.lru_cache(maxsize=4096)  # lines repeat: one per indicator count
def escape(raw: bytes) -> str:
    if not _NEEDS_ESCAPE.search(raw):
        return raw.decode("ascii")
    return _NEEDS_ESCAPE.sub(lambda m: b"\\x%02x" % m.group()[0], raw).decode("ascii")


def unescape(text: str) -> bytes:
    if "\\" not in text:
        return text.encode("ascii")
    if text.endswith("\\x0d") and text.count("\\") == 1:  # the common case: a CR-terminated line
        return text[:-4].encode("ascii") + b"\r"
    return _ESCAPED.sub(lambda m: chr(int(m.group(1), 16)), text).encode("latin-1")


class RecWriter:
    """Appends records; `flush()` pushes them to disk (fsync) so a crash keeps them."""

    def __init__(self, path: str | Path, start_wall: float, header: dict | None = None):
        self.path = Path(path)
        try:
            self._f = open(self.path, "w", encoding="ascii", newline="\n", buffering=1 << 16)
        except OSError as exc:
            raise UserError(f"{self.path}: cannot write the recording ({exc.strerror or exc})") from None
        self._error = UserError(f"{self.path}: the recording is already closed")
        start = time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(start_wall)) + f".{int(start_wall % 1 * 1e6):06d}Z"
        lines = ["# saglog recording", f"# saglog_version: {__version__}", f"# start_utc: {start}",
                 f"# start_epoch_s: {start_wall:.6f}"]
        lines += [f"# {k}: {v}" for k, v in (header or {}).items()]
        self._write("\n".join(lines) + "\n")

    def _write(self, text: str) -> None:
        try:
            self._f.write(text)
        except (OSError, ValueError) as exc:  # ValueError: closed after an earlier failure
            self._fail(exc)

    def _fail(self, exc: Exception):
        """A write failed (disk full, read-only): close at once, keep what is on disk, one-line error."""
        if not isinstance(exc, OSError):
            raise self._error
        self._error = UserError(f"{self.path}: cannot write the recording ({exc.strerror or exc})")
        try:
            self._f.close()  # the unwritten buffer fails again; the file is closed all the same
        except OSError:
            pass
        raise self._error from None

    def write(self, t_s: float, raw: bytes) -> None:
        self._write(f"{t_s:.6f}\t{escape(raw)}\n")

    def write_text(self, t_s: float, text: str) -> None:
        """A line already escaped (the capture escapes each line once for all its files)."""
        self._write(f"{t_s:.6f}\t{text}\n")

    def comment(self, text: str) -> None:
        self._write(f"# {text}\n")

    def flush(self) -> None:
        try:
            self._f.flush()
            os.fsync(self._f.fileno())
        except (OSError, ValueError) as exc:
            self._fail(exc)

    def close(self) -> None:
        if not self._f.closed:
            self.flush()
            self._f.close()


def is_recording(path: str | Path) -> bool:
    try:
        with open(path, "rb") as f:
            return f.read(18) == b"# saglog recording"
    except OSError:
        return False


def read_header(path: str | Path) -> dict:
    header: dict = {}
    with open(path, encoding="utf-8", errors="replace") as f:
        for line in f:
            if not line.startswith("#"):
                break
            key, sep, value = line[1:].strip().partition(": ")
            if sep:
                header[key] = value
    if "start_epoch_s" in header:
        try:
            header["start_wall"] = float(header.pop("start_epoch_s"))
        except ValueError:
            raise UserError(f"{path}: bad start_epoch_s in the header") from None
    return header


def read_recording(path: str | Path, on_comment: Callable[[str], None] | None = None
                   ) -> tuple[dict, Iterator[tuple[float, bytes, str]]]:
    """Header and a lazy iterator of (t_s, raw, escaped text); body comments go to `on_comment` in order.

    A malformed record raises UserError naming the file and line, after every
    record before it has been yielded.
    """
    header = read_header(path)

    def records():
        lineno = 0
        with open(path, encoding="utf-8", errors="strict", newline="\n") as f:
            try:
                for lineno, line in enumerate(f, 1):
                    if line[:1] == "#":
                        if on_comment is not None:
                            on_comment(line[1:].strip())
                        continue
                    tab = line.find("\t")
                    try:
                        t_s = float(line[:tab])
                    except ValueError:
                        if not line.strip():
                            continue
                        raise UserError(f"{path}:{lineno}: not a recording record (time TAB line expected)") from None
                    text = line[tab + 1:-1] if line[-1:] == "\n" else line[tab + 1:]
                    try:
                        yield t_s, unescape(text), text
                    except UnicodeEncodeError:
                        raise UserError(f"{path}:{lineno}: unescaped non-ASCII text in a record") from None
            except UnicodeDecodeError:
                raise UserError(f"{path}: not UTF-8 text after line {lineno}") from None

    return header, records()


def read_plain(path: str | Path, rate_hz: float, block: int = 1 << 16) -> Iterator[tuple[float, bytes]]:
    """A raw capture without timestamps: (t_s, raw, escaped text) at `rate_hz`, times i / rate."""
    splitter = LineSplitter()
    i = 0
    with open(path, "rb") as f:
        while chunk := f.read(block):
            for raw in splitter.feed(chunk):
                yield i / rate_hz, raw, escape(raw)
                i += 1
    for raw in splitter.flush():
        yield i / rate_hz, raw, escape(raw)
