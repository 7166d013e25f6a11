"""The block decoder's distinct-line grouping against Python's own equality of bytes.

`decode_block` groups a block's lines by hashing their bytes and then
compares every line with its group's first (logger.formats.batch_decode);
the reference is a dict of the lines' bytes (Python's bytes equality).
A hash that put two different lines together must not merge them: the
block is then refused and decoded line by line.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given, strategies as st

import logger.formats.batch_decode as bd
from logger.arrays import unique_inverse
from logger.formats.decode import Decoder

_FIELD = st.text(alphabet=st.characters(min_codepoint=0x20, max_codepoint=0x7E, blacklist_characters="\\"), max_size=30)


def _block(fields: list[str]) -> bytes:
    return b"".join(b"%d.%06d\t%s\n" % (i, i % 7, f.encode()) for i, f in enumerate(fields))


@given(st.lists(st.sampled_from(["+0.123 mm", "-1.500 mm\\x0d", "", "+0.1234567890123 mm", "x"]) | _FIELD,
                min_size=1, max_size=80))
def test_lines_share_a_code_exactly_when_their_bytes_are_equal(fields):
    block = bd.decode_block(_block(fields), Decoder("mm").parse)
    assert block is not None
    assert [block.texts[c] for c in block.codes] == fields
    first = {}
    assert block.codes.tolist() == [first.setdefault(f, block.codes[i]) for i, f in enumerate(fields)]


def test_a_hash_collision_refuses_the_block(monkeypatch):
    # a multiplier of 0 keeps only each line's last 8-byte word in the hash: two lines that differ
    # in their first word then collide, and the block must go to the line-by-line reader
    monkeypatch.setattr(bd, "_MIX", np.uint64(0))
    fields = ["+0.100000 mm", "+0.200000 mm"]
    assert fields[0][-8:] == fields[1][-8:] and fields[0] != fields[1]
    assert bd.decode_block(_block(fields), Decoder("mm").parse) is None
    assert bd.decode_block(_block(fields[:1] * 3), Decoder("mm").parse) is not None


@given(st.lists(st.integers(-3, 3), min_size=1, max_size=50))
def test_unique_inverse_is_numpys(values):
    # reference: numpy.unique(return_inverse=True), which sorts every element
    key = np.array(values, np.int64)
    kinds, inverse = unique_inverse(key)
    ref_kinds, ref_inverse = np.unique(key, return_inverse=True)
    assert np.array_equal(kinds, ref_kinds) and np.array_equal(inverse, ref_inverse)
