"""The first line after the port opens: whole, or the tail of a line sent before the capture was listening.

An indicator that streams all the time does not wait for the capture: the
port may open in the middle of a line, and the bytes up to the first line
end are then the tail of it.  The tail of "-0.340 mm" reads "0.340 mm",
the tail of "-1.841 mm" reads "841 mm": readings of the right form and the
wrong value.  An indicator's lines keep one form and, nearly always, one
width, so a tail is shorter than a whole line and shaped like its end (the
same bytes where they overlap, a digit for a digit).  The first line after
every opening therefore waits for the next reading (lines that read as
nothing wait with it, in order), and if it reads as a value and is such a
tail it is not taken as a reading.  Its bytes are kept: in stream.rec as a
comment in place of its record (logger.formats.recording.partial_comment,
which the replay reads back) and in samples.csv as a bad line.  A first
line that is no reading anyway stays an ordinary bad line.

Waiting is bounded: when no reading follows within HOLD_S (an indicator
that sends only on change, held still), or MAX_HELD lines, the lines are
taken as they came, so that nothing stays off the disk longer than the
recording's own flush interval.
"""

from __future__ import annotations

from typing import Callable

HOLD_S = 0.5  # at most this long off the disk (capture.REC_FLUSH_S: the recording's flush interval)
MAX_HELD = 16  # lines waiting with the first one (a burst of noise after it) before all are taken as they came

Taken = tuple[float, bytes, bool]  # (t_s, raw, partial): what to take now, in order


class FirstLine:
    """Holds the first line after each opening until the next reading shows whether it was whole.

    `reads(raw)` is True when a line reads as a value (the decoder's parse,
    without counting it).  Every received line goes through `lines`; `due`
    releases what waited too long.
    """

    def __init__(self, reads: Callable[[bytes], bool]):
        self._reads = reads
        self._held: list[tuple[float, bytes]] = []  # the first line (a reading), then lines that read as nothing
        self._armed = True  # the next line is the first after an opening (made just after one)

    def opened(self) -> None:
        """The port opened again (after a gap): its first line is in question again."""
        self._armed = True

    def lines(self, t_s: float, raw: bytes) -> list[Taken]:
        """What to take now for this received line: nothing while it waits, else it and what waited, in order."""
        held = self._held
        if held:
            if self._reads(raw):
                (t_first, first), rest = held[0], held[1:]
                self._held = []
                return [(t_first, first, _tail_of(first, raw)), *((t, r, False) for t, r in rest), (t_s, raw, False)]
            held.append((t_s, raw))
            return self.release() if len(held) > MAX_HELD else []
        if self._armed:
            self._armed = False
            if self._reads(raw):
                held.append((t_s, raw))
                return []
        return [(t_s, raw, False)]

    def due_in_s(self, now_s: float) -> float | None:
        """How soon `due` would release what waits (None: nothing waits)."""
        return None if not self._held else max(0.0, self._held[0][0] + HOLD_S - now_s)

    def due(self, now_s: float) -> list[Taken]:
        """What has waited HOLD_S with no reading after it: taken as it came."""
        return self.release() if self._held and now_s - self._held[0][0] >= HOLD_S else []

    def release(self) -> list[Taken]:
        """The port closed, the run ends, or the wait is over: what waits is taken as it came (nothing judged it)."""
        held, self._held = self._held, []
        self._armed = False
        return [(t, raw, False) for t, raw in held]


_SHAPE = bytes.maketrans(b"0123456789", b"0000000000")  # every digit alike


def _tail_of(first: bytes, whole: bytes) -> bool:
    """`first` could be the end of a line like `whole`: shorter, and the same where it overlaps, digits aside."""
    return len(first) < len(whole) and whole[len(whole) - len(first):].translate(_SHAPE) == first.translate(_SHAPE)
