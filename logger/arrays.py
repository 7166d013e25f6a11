"""Array helpers the batch replay shares (logger.formats.batch_decode, logger.run.block_rows, logger.timestamps)."""

from __future__ import annotations

import numpy as np


def unique_inverse(key: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """numpy.unique(key, return_inverse=True), sorting only the elements that differ from the one before.

    A recording's lines, times and row tails come in runs of equal values
    (a held reading, a hundred samples in one second), so sorting the first
    of each run costs a fraction of sorting them all; the result is the same.
    """
    head = np.empty(len(key), bool)
    head[:1] = True
    np.not_equal(key[1:], key[:-1], out=head[1:])
    kinds, head_codes = np.unique(key[head], return_inverse=True)
    return kinds, head_codes[np.cumsum(head) - 1]
