"""samples.csv rows for a whole block at once, byte for byte what RunWriter.sample writes.

A row is `sample_head + sample_tail` (logger.run.rows).  The tail depends
only on the line, the state and the seating, which repeat: it is made by
`sample_tail` itself once per distinct combination.  The head is the ISO
time (logger.timestamps.IsoClock.many, the same arithmetic as one call) and
the recording's own time text where that is exactly `seconds_text` of the
time (logger.formats.batch_decode), else `seconds_text`.  The rows are laid
out in a byte matrix, one row a line, and the padding squeezed out.
"""

from __future__ import annotations

import numpy as np

from logger.analysis.batch_seating import STATES
from logger.formats.batch_decode import DecodedBlock
from logger.run.rows import sample_head, sample_tail
from logger.timestamps import IsoClock

_ISO = 27  # len("2025-01-06T09:00:00.000000Z")


def block_rows(block: DecodedBlock, t_wall: np.ndarray, states: np.ndarray, seats: np.ndarray) -> bytes:
    """The samples.csv rows of a decoded block, given each line's state code and seating (-1: none)."""
    n = len(t_wall)
    tails, tail_len, tail_code = _tails(block, states, seats)
    heads, head_len = _heads(block, t_wall)
    width = heads.shape[1] + tails.shape[1]
    out = np.zeros((n, width), np.uint8)
    out[:, :heads.shape[1]] = heads
    for h in np.unique(head_len).tolist():  # a handful of head lengths: the tail starts right after
        rows = np.flatnonzero(head_len == h)
        out[rows, h:h + tails.shape[1]] = tails[tail_code[rows]]
    keep = np.arange(width) < (head_len + tail_len[tail_code])[:, None]
    return out[keep].tobytes()


def _tails(block: DecodedBlock, states: np.ndarray, seats: np.ndarray):
    """Each distinct (line, state, seating) formatted once by `sample_tail`: a padded byte table, lengths, codes."""
    span = int(seats.max()) + 2
    key = (block.codes * len(STATES) + states) * span + (seats + 1)
    keys, code = np.unique(key, return_inverse=True)
    texts = []
    for k in keys.tolist():
        rest, seat = divmod(k, span)
        line, state = divmod(rest, len(STATES))
        texts.append(sample_tail(block.texts[line], block.values[line], STATES[state], seat - 1 if seat else None))
    return (*_table(texts), code)


def _heads(block: DecodedBlock, t_wall: np.ndarray):
    """`time,t_s,` per line: a byte matrix and the length of each."""
    iso = IsoClock.many(t_wall)
    n = len(t_wall)
    reused = block.time_reused
    width = _ISO + 2 + int(block.time_len.max())
    heads = np.zeros((n, width), np.uint8)
    heads[:, :_ISO] = iso
    heads[:, _ISO] = ord(",")
    length = np.where(reused, block.time_len, 0) + _ISO + 2
    for size in np.unique(block.time_len[reused]).tolist():  # the recording's own time text, by length
        rows = np.flatnonzero(reused & (block.time_len == size))
        heads[rows, _ISO + 1:_ISO + 1 + size] = block.data[block.starts[rows, None] + np.arange(size)]
        heads[rows, _ISO + 1 + size] = ord(",")
    others = np.flatnonzero(~reused)
    if len(others):  # the rare times the recorder did not write: formatted by sample_head itself
        texts = [sample_head("", t)[1:] for t in block.t_s[others].tolist()]
        table, lens = _table(texts)
        if table.shape[1] > width - _ISO - 1:
            heads = np.pad(heads, ((0, 0), (0, table.shape[1] - (width - _ISO - 1))))
        heads[others, _ISO + 1:_ISO + 1 + table.shape[1]] = table
        length[others] = _ISO + 1 + lens
    return heads, length


def _table(texts: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """ASCII strings as a zero-padded byte matrix and their lengths."""
    lens = np.array([len(t) for t in texts], np.int64)
    width = int(lens.max()) if len(texts) else 0
    table = np.zeros((len(texts), width), np.uint8)
    flat = np.frombuffer("".join(texts).encode("ascii"), np.uint8)
    cols = np.arange(width)
    table[cols < lens[:, None]] = flat
    return table, lens
