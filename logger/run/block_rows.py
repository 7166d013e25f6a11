"""samples.csv rows for a whole block at once, byte for byte what RunWriter.sample writes.

A row is `sample_head + sample_tail` (logger.run.rows).  The tail depends
only on the line, the state and the seating, which repeat: it is made by
`sample_tail` itself once per distinct combination.  The head is the ISO
time (logger.timestamps.IsoClock.many, the same arithmetic as one call) and
the recording's own time text where that is exactly `seconds_text` of the
time (logger.formats.batch_decode), else `seconds_text`.  The rows are laid
out in a NUL-padded byte matrix, one row a line, and the NULs squeezed out.
"""

from __future__ import annotations

import numpy as np

from logger.analysis.batch_seating import STATES
from logger.arrays import unique_inverse
from logger.formats.batch_decode import DecodedBlock
from logger.run.rows import sample_head, sample_tail
from logger.timestamps import IsoClock

_ISO = 27  # len("2025-01-06T09:00:00.000000Z")


def block_rows(block: DecodedBlock, t_wall: np.ndarray, states: np.ndarray, seats: np.ndarray) -> bytes:
    """The samples.csv rows of a decoded block, given each line's state code and seating (-1: none)."""
    tails, tail_code = _tails(block, states, seats)
    rows = np.concatenate((_heads(block, t_wall), tails[tail_code]), axis=1)
    return rows.tobytes().replace(b"\0", b"")  # a row holds only printable bytes: NUL is the padding


def _tails(block: DecodedBlock, states: np.ndarray, seats: np.ndarray):
    """Each distinct (line, state, seating) formatted once by `sample_tail`: a padded byte table and codes."""
    span = int(seats.max()) + 2
    key = (block.codes * len(STATES) + states) * span + (seats + 1)
    keys, code = unique_inverse(key)
    texts = []
    for k in keys.tolist():
        rest, seat = divmod(k, span)
        line, state = divmod(rest, len(STATES))
        texts.append(sample_tail(block.texts[line], block.values[line], STATES[state], seat - 1 if seat else None))
    return _table(texts), code


def _heads(block: DecodedBlock, t_wall: np.ndarray) -> np.ndarray:
    """`time,t_s,` per line, NUL-padded: the ISO time, then the recording's own time text where it is the cell's."""
    n = len(t_wall)
    own = block.time_text
    heads = np.empty((n, _ISO + 2 + own.shape[1]), np.uint8)
    heads[:, :_ISO] = IsoClock.many(t_wall)
    heads[:, _ISO] = heads[:, -1] = ord(",")
    heads[:, _ISO + 1:-1] = own
    others = np.flatnonzero(~block.time_reused)
    if len(others):  # the times the recorder did not write: formatted by sample_head itself
        table = _table([sample_head("", t)[1:] for t in block.t_s[others].tolist()])
        if table.shape[1] > heads.shape[1] - _ISO - 1:
            heads = np.pad(heads, ((0, 0), (0, table.shape[1] - (heads.shape[1] - _ISO - 1))))
        heads[others, _ISO + 1:] = 0
        heads[others, _ISO + 1:_ISO + 1 + table.shape[1]] = table
    return heads


def _table(texts: list[str]) -> np.ndarray:
    """ASCII strings as a zero-padded byte matrix."""
    lens = np.array([len(t) for t in texts], np.int64)
    width = int(lens.max()) if len(texts) else 0
    table = np.zeros((len(texts), width), np.uint8)
    flat = np.frombuffer("".join(texts).encode("ascii"), np.uint8)
    cols = np.arange(width)
    table[cols < lens[:, None]] = flat
    return table
