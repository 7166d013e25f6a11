"""ISO 8601 UTC text of receipt times, one at a time and a block at a time.

Reference: the standard library's datetime formatting of the same epoch
seconds (ISO 8601 extended format, UTC designator Z), and the one-at-a-time
formatter for the block one.
"""

from __future__ import annotations

import datetime as dt

import numpy as np
from hypothesis import given, strategies as st

from logger.timestamps import IsoClock, iso_utc

_EPOCHS = st.floats(0, 4_102_444_800, allow_nan=False)  # 1970 to 2100


@given(_EPOCHS)
def test_iso_text_is_the_standard_librarys(epoch_s):
    sec = int(epoch_s // 1)
    micros = min(int((epoch_s - sec) * 1e6 + 0.5), 999999)  # to the microsecond, as the recorder keeps times
    ref = (dt.datetime(1970, 1, 1, tzinfo=dt.timezone.utc) + dt.timedelta(seconds=sec, microseconds=micros))
    assert iso_utc(epoch_s) == ref.strftime("%Y-%m-%dT%H:%M:%S.%fZ")


@given(st.lists(_EPOCHS, min_size=1, max_size=50))
def test_a_block_of_times_is_each_time_formatted_alone(epochs):
    rows = IsoClock.many(np.array(epochs))
    assert [bytes(r).decode() for r in rows] == [IsoClock()(t) for t in epochs]
