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
from logger.run.rows import seconds_text

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


_TIME = st.one_of(
    st.floats(0, 99_999_999, allow_nan=False).map(lambda x: "%.6f" % x),  # the recorder's own form
    st.text(alphabet="0123456789.", min_size=1, max_size=17),  # anything of digits and dots
    st.sampled_from(["0.000000", "00.000000", "1.5", "12", ".5", "5.", ".", "0012.000000", "123456789.000000"]),
)


@given(st.lists(_TIME, min_size=1, max_size=40))
def test_times_are_what_float_reads(times):
    # reference: Python's float() of the time text, as the line-by-line reader takes it; a time that
    # is written as seconds_text writes it may be copied into samples.csv as it stands
    data = b"".join(b"%s\t+0.100 mm\n" % t.encode() for t in times)
    block = bd.decode_block(data, Decoder("mm").parse)
    readable = all(t.count(".") <= 1 and t != "." and len(t) <= 16 for t in times)
    if not readable:
        assert block is None
        return
    assert block is not None
    assert block.t_s.tolist() == [float(t) for t in times]
    for t, reused in zip(times, block.time_reused.tolist()):
        if reused:
            assert seconds_text(float(t)) == t
        else:  # only a time beyond 15 characters may be written again when it is the recorder's form
            assert seconds_text(float(t)) != t or len(t) > 15
