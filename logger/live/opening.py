"""The first line after the port opens: whole, or the tail of a line sent before the capture was listening.

An indicator that streams all the time does not wait for the capture: the
port may open in the middle of a line, and the bytes up to the first line
end are then the tail of it.  The tail of "-0.340 mm" reads "0.340 mm",
the tail of "-1.841 mm" reads "841 mm": readings of the right form and the
wrong value.  An indicator's lines keep one form and, nearly always, one
width, so a tail is shorter than the whole line after it and shaped like its
end (the same bytes where that line has them, a digit for a digit).  The
first line after every opening waits for the next, and one that reads as a
value and is such a tail is not taken as a reading.  Its bytes are kept: in
stream.rec as a comment in place of its record (logger.formats.recording
.partial_comment, which the replay reads back) and in samples.csv as a bad
line.  A first line that is no reading anyway stays an ordinary bad line.
"""

from __future__ import annotations

from typing import Callable


class FirstLine:
    """Holds the first line after each opening until the next line shows whether it was whole.

    `reads(raw)` is True when a line reads as a value (the decoder's parse,
    without counting it).  Feed every received line to `lines`; it returns
    what to take now, in order, as (t_s, raw, partial).
    """

    def __init__(self, reads: Callable[[bytes], bool]):
        self._reads = reads
        self._held: tuple[float, bytes] | None = None
        self._armed = True  # made just after the port opened

    def opened(self) -> None:
        """The port opened again (after a gap): its first line is in question again."""
        self._armed = True

    def lines(self, t_s: float, raw: bytes) -> list[tuple[float, bytes, bool]]:
        if self._held is not None:
            (t_first, first), self._held = self._held, None
            return [(t_first, first, _tail_of(first, raw)), (t_s, raw, False)]
        if self._armed:
            self._armed = False
            if self._reads(raw):
                self._held = (t_s, raw)
                return []
        return [(t_s, raw, False)]

    def release(self) -> list[tuple[float, bytes, bool]]:
        """The port closed or the run ends: a line still held is taken as it is (nothing came to judge it by)."""
        held, self._held = self._held, None
        self._armed = False
        return [] if held is None else [(held[0], held[1], False)]


_SHAPE = bytes.maketrans(b"0123456789", b"0000000000")  # every digit alike


def _tail_of(first: bytes, whole: bytes) -> bool:
    """`first` could be the end of a line like `whole`: shorter, and the same where it overlaps, digits aside."""
    return len(first) < len(whole) and whole[len(whole) - len(first):].translate(_SHAPE) == first.translate(_SHAPE)
