"""ISO 8601 UTC text for epoch seconds: the one formatter every file and view uses."""

from __future__ import annotations

import math
import time
from datetime import datetime, timezone

import numpy as np

from logger.arrays import unique_inverse

# "ffffffZ" of IsoClock.many as one little-endian 8-byte word: three digits, three more, the Z
_MICROS_HIGH = np.array([int.from_bytes(b"%03d" % k, "little") for k in range(1000)], np.dtype("<u8"))
_MICROS_LOW = _MICROS_HIGH << np.uint64(24)
_Z = np.uint64(ord("Z") << 48)


class IsoClock:
    """`YYYY-MM-DDTHH:MM:SS.ffffffZ` for epoch seconds, fast: the date and time of day are cached per second.

    Samples arrive many times a second, so formatting the date again for
    every row (strftime, datetime) would be the costliest part of a row.
    """

    def __init__(self):
        self._sec = None
        self._prefix = ""

    def __call__(self, epoch_s: float) -> str:
        sec = int(epoch_s) if epoch_s >= 0 else math.floor(epoch_s)
        if sec != self._sec:
            self._sec = sec
            self._prefix = second_text(sec)
        micros = int((epoch_s - sec) * 1e6 + 0.5)
        if micros > 999999:
            micros = 999999
        return f"{self._prefix}.{micros:06d}Z"

    @staticmethod
    def many(epoch_s: np.ndarray) -> np.ndarray:
        """The same text for an array of times at once (the batch replay): a byte matrix, one row a time.

        The same arithmetic as one call, in numpy's IEEE doubles, so each
        row holds the bytes of `iso_utc(t)`; the date is formatted once per second.
        """
        sec = np.floor(epoch_s)
        micros = np.minimum(((epoch_s - sec) * 1e6 + 0.5).astype(np.int64), 999999)
        secs, where = unique_inverse(sec.astype(np.int64))
        table = np.frombuffer("".join(second_text(s) + "." for s in secs.tolist()).encode("ascii"), np.uint8)
        out = np.empty((len(epoch_s), 27), np.uint8)
        out[:, :20] = table.reshape(-1, 20)[where]
        high, low = np.divmod(micros, 1000)
        out[:, 20:27] = (_MICROS_HIGH[high] | _MICROS_LOW[low] | _Z).view(np.uint8).reshape(-1, 8)[:, :7]
        return out


def second_text(sec: int) -> str:
    """`YYYY-MM-DDTHH:MM:SS` of a whole epoch second (UTC)."""
    return time.strftime("%Y-%m-%dT%H:%M:%S", time.gmtime(sec))


iso_utc = IsoClock()


def parse_iso_utc(text: str) -> float | None:
    """Epoch seconds from ISO 8601 text (a time without a zone is UTC); None when it is not a time."""
    try:
        dt = datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
    except ValueError:
        return None
    if dt.tzinfo is None:
        dt = dt.replace(tzinfo=timezone.utc)
    return dt.timestamp()
