"""A block of recording lines decoded at once with numpy: the batch replay's first stage.

The incremental reader (logger.formats.recording.block_records) looks at each
record in turn; here a whole block of the common kind is taken apart with
array operations: one TAB per line, a time of digits and at most one dot,
only printable bytes.  Each distinct line is unescaped and decoded once by
the very decoder the live path uses (an indicator repeats a few hundred
lines), so the values cannot differ.  A block with anything else in it (a
comment, an odd time, a bad escape, a line without its LF) is not decoded
here: `decode_block` returns None and the caller gives that block to the
incremental reader, which also raises its errors at the right line.

Times: a time written as the recorder writes it (1 to 9 digits, a dot, 6
digits) is the integer M of its digits over 10**6, which IEEE division rounds
correctly, so it is the double `float()` gives; and with at most 14
significant digits (15 bytes) its text is exactly what `seconds_text` makes
of that double (DBL_DIG is 15), so samples.csv can reuse the recording's own
bytes.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from logger.arrays import unique_inverse
from logger.formats.recording import _unescape_bytes

_MAX_TIME = 16  # bytes of a time field decoded here; longer ones go the careful way
_ZERO, _NINE, _DOT = 48, 57, 46
_WORD = np.dtype("<u8")
_LOW_BYTES = np.array([(1 << (8 * k)) - 1 for k in range(9)], _WORD)  # a word's first k bytes (little-endian)
_MIX = np.uint64(0x9E3779B97F4A7C15)  # an odd 64-bit multiplier (2**64 over the golden ratio) to mix words
_PRINTABLE = bytes(range(0x20, 0x7F)) + b"\t\n"  # what a record may hold besides its TAB and LF


@dataclass
class DecodedBlock:
    """The lines of one block: times, the recording's time text, and which distinct line each one is."""

    t_s: np.ndarray  # float64 per line
    time_text: np.ndarray  # uint8 per line: its time as recorded, right-aligned, NUL-padded on the left
    time_reused: np.ndarray  # bool: that text is exactly seconds_text(t_s)
    codes: np.ndarray  # int64 per line: index into the distinct lines
    texts: list[str]  # per distinct line: the escaped text (as in the recording and samples.csv)
    values: list[float | None]  # per distinct line: value_mm, None for a bad line

    def good(self) -> np.ndarray:
        """Per line: True where the line is a reading."""
        return np.array([v is not None for v in self.values], bool)[self.codes]

    def values_mm(self) -> np.ndarray:
        """Per line: value_mm, NaN for a bad line."""
        return np.array([np.nan if v is None else v for v in self.values], float)[self.codes]


def decode_block(data: bytes, parse: Callable[[bytes], tuple]) -> DecodedBlock | None:
    """Decode a block of whole lines (each ending in LF), or None when it is not of the common kind."""
    if not data.endswith(b"\n") or data.translate(None, _PRINTABLE):  # any byte left is not printable
        return None
    arr = np.frombuffer(data, np.uint8)
    ends = np.flatnonzero(arr == 10)
    tabs = np.flatnonzero(arr == 9)
    if len(tabs) != len(ends):
        return None
    starts = np.concatenate(([0], ends[:-1] + 1))
    if not (np.all(tabs > starts) and np.all(tabs < ends)):  # one TAB in every line, after a time
        return None
    times = _times(arr, tabs, tabs - starts)
    if times is None:
        return None
    distinct = _distinct(arr, tabs + 1, ends - tabs - 1)
    if distinct is None:
        return None
    codes, firsts = distinct
    texts, values = [], []
    for i in firsts.tolist():
        field = data[tabs[i] + 1:ends[i]]
        raw = _unescape_bytes(field)
        if raw is None:
            return None  # a malformed escape: the incremental reader reports it at its line
        texts.append(field.decode("ascii"))
        values.append(parse(raw)[0])
    t_s, reused, time_text = times
    for i in np.flatnonzero(~reused).tolist():  # times written some other way: float(), as the reader does
        t_s[i] = float(data[starts[i]:tabs[i]])
    return DecodedBlock(t_s, time_text, reused, codes, texts, values)


def _distinct(arr: np.ndarray, at: np.ndarray, length: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """Which distinct byte string each row is (codes) and the first row of each; None in the rare doubt.

    Each string arr[at:at + length] is read as whole 8-byte words (the
    bytes past its end masked to NUL, which no record holds) and hashed to
    one word; rows are grouped by hash (one sort of one word a row), then
    every row is compared with its group's first row, word by word, so two
    rows share a code exactly when their bytes are equal.  Two different
    strings with one hash (never seen; a block has a few hundred distinct
    lines) give None: the caller then decodes that block line by line.
    """
    n_words = max(1, -(-int(length.max()) // 8))
    buffer = np.concatenate((arr, np.zeros(8 * n_words, np.uint8)))
    as_words = np.ndarray((len(buffer) - 7,), _WORD, buffer, strides=(1,))  # a word at every byte offset
    words = []
    for k in range(n_words):
        kept = np.clip(length - 8 * k, 0, 8)
        words.append(as_words[at + 8 * k] & _LOW_BYTES[kept])
    key = words[0].copy()
    for w in words[1:]:
        key *= _MIX
        key ^= w
    kinds, codes = unique_inverse(key)
    firsts = np.full(len(kinds), len(key), np.int64)
    np.minimum.at(firsts, codes, np.arange(len(key)))
    first_of = firsts[codes]
    if not all(np.array_equal(w, w[first_of]) for w in words):
        return None
    return codes, firsts


def _times(arr: np.ndarray, tabs: np.ndarray, length: np.ndarray):
    """(t_s, reused, text) when every time is digits with at most one dot, else None.

    `text` holds each time right-aligned against its TAB in a NUL-padded
    byte matrix, so the recorder's own form (1 to 8 digits, the dot, 6
    digits) has its dot in one column for every line and its digits read
    as one integer of microseconds.
    """
    width = int(length.max())
    if width > _MAX_TIME:
        return None
    n = len(tabs)
    text = np.lib.stride_tricks.sliding_window_view(np.concatenate((np.zeros(width, np.uint8), arr)), width)[tabs]
    pad = np.arange(width - 1, -1, -1) >= length[:, None]  # the columns left of each time
    text[pad] = 0
    value = text - np.uint8(_ZERO)  # a digit's value; anything else wraps round to 10 or more
    digit = value <= 9
    dot = text == _DOT
    if not (digit | dot | pad).all():
        return None  # float() would read these some other way (or refuse them)
    at_seven = dot[:, width - 7] if width >= 8 else np.zeros(n, bool)  # the recorder's dot
    if np.count_nonzero(dot) != np.count_nonzero(at_seven):  # dots elsewhere too: one a line at most
        dots = np.count_nonzero(dot, axis=1)
        if (dots > 1).any() or ((length == 1) & (dots == 1)).any():
            return None
    t_s = np.zeros(n)
    reused = np.zeros(n, bool)
    if width >= 8:
        lead = text[np.arange(n), width - length]  # a time's first byte
        reused = at_seven & (length >= 8) & (length <= 15) & ((lead != _ZERO) | (length == 8))
        value[~digit] = 0
        whole, micros = np.zeros(n, np.uint32), np.zeros(n, np.uint32)
        for k in range(width):  # Horner's rule over the digits either side of the dot
            if k != width - 7:
                part = whole if k < width - 7 else micros
                part *= 10
                part += value[:, k]
        t_s = np.where(reused, (whole * 1e6 + micros) / 1e6, 0.0)  # exact integers of microseconds, then one division
    return t_s, reused, text
