"""The first line after the port opens (logger.live.opening): whole, or the tail of a line sent before."""

from __future__ import annotations

import pytest
from hypothesis import given, strategies as st

from logger.formats.decode import Decoder
from logger.live.opening import HOLD_S, MAX_HELD, FirstLine

# Lines of one form and one width, the sign always written: an indicator's usual stream
# (common practice; the decoder's forms are those of the contract's "Stream lines").
_VALUES = st.lists(st.floats(-9.999, 9.999, allow_nan=False), min_size=2, max_size=12)
_UNITS = st.sampled_from([b" mm", b"mm", b"in", b""])


def _judge(first: FirstLine, lines: list[bytes], t0: float = 0.0) -> list[tuple[float, bytes, bool]]:
    return [item for k, raw in enumerate(lines) for item in first.lines(t0 + k, raw)]


def _checker() -> FirstLine:
    decoder = Decoder()
    return FirstLine(lambda raw: decoder.parse(raw)[0] is not None)


@given(values=_VALUES, cut=st.integers(0, 12), unit=_UNITS)
def test_a_tail_is_never_taken_as_a_reading(values, cut, unit):
    # The port opened `cut` bytes into the first line: what came is its tail.  Every line is taken,
    # in order, at its own time; the tail is marked exactly when it is one and reads as a value
    # (a tail that reads as nothing is an ordinary bad line); no whole line is ever marked.
    lines = [b"%+.3f%s\r" % (v, unit) for v in values]
    cut = min(cut, len(lines[0]))
    got = lines[:]
    got[0] = lines[0][cut:]
    first = _checker()
    taken = _judge(first, got) + first.release()
    assert [(t, raw) for t, raw, _ in taken] == [(float(k), raw) for k, raw in enumerate(got)]
    reads = Decoder().parse(got[0])[0] is not None
    assert [p for _, _, p in taken] == [cut > 0 and reads] + [False] * (len(got) - 1)


@given(values=_VALUES, cut=st.integers(1, 5))
def test_each_opening_is_judged_again(values, cut):
    # After a gap the port opens again: its first line is in question again, the lines between not.
    lines = [b"%+.3f mm\r" % v for v in values]
    first = _checker()
    before = _judge(first, lines) + first.release()
    first.opened()
    after = _judge(first, [lines[0][cut:], *lines[1:]], t0=100.0) + first.release()
    assert [p for _, _, p in before] == [False] * len(lines)
    assert [p for _, _, p in after] == [True] + [False] * (len(lines) - 1)


def test_a_first_line_with_nothing_after_it_is_taken_as_it_came():
    # The device went away after one line: nothing to judge it by, so it is taken as received.
    first = _checker()
    assert first.lines(1.0, b"841 mm\r") == []
    assert first.release() == [(1.0, b"841 mm\r", False)]
    assert first.lines(2.0, b"-1.841 mm\r") == [(2.0, b"-1.841 mm\r", False)]  # not armed until opened()


def test_a_shorter_first_line_of_another_form_is_a_reading():
    # Only a line shaped like the end of the next one is taken for its tail.
    first = _checker()
    assert first.lines(1.0, b"+1.5\r") == []
    assert first.lines(2.0, b"-0.0125 in\r") == [(1.0, b"+1.5\r", False), (2.0, b"-0.0125 in\r", False)]
    first.opened()
    first.lines(3.0, b"12.5 mm\r")
    assert first.lines(4.0, b"-0,125 mm\r")[0][2] is False  # another decimal mark: another form
    first.opened()
    first.lines(5.0, b"0.340 mm\r")  # unsigned before a minus: taken for a tail (whole or cut, it looks the same)
    assert first.lines(6.0, b"-0.341 mm\r")[0][2] is True


def test_lines_that_read_as_nothing_wait_with_the_first():
    # A blank line, noise or a message after the first line: the first is judged by the next reading,
    # and the lines between come out after it, in order.
    first = _checker()
    assert first.lines(1.0, b"841 mm\r") == [] and first.lines(1.1, b"\r") == [] and first.lines(1.2, b"ERR 3") == []
    assert first.lines(1.3, b"-1.841 mm\r") == [(1.0, b"841 mm\r", True), (1.1, b"\r", False), (1.2, b"ERR 3", False),
                                               (1.3, b"-1.841 mm\r", False)]


def test_waiting_is_bounded_in_time_and_in_lines():
    # An indicator that sends only on change, held still: the first line does not wait for ever.
    first = _checker()
    first.lines(10.0, b"-1.841 mm\r")
    assert first.due_in_s(10.2) == pytest.approx(HOLD_S - 0.2)
    assert first.due(10.0 + HOLD_S * 0.99) == []
    assert first.due(10.0 + HOLD_S) == [(10.0, b"-1.841 mm\r", False)] and first.due_in_s(11.0) is None
    # nor behind a long burst of lines that read as nothing
    first.opened()
    first.lines(20.0, b"841 mm\r")
    noise = [first.lines(20.0 + k / 100, b"\xff\x00") for k in range(1, MAX_HELD + 1)]
    assert all(x == [] for x in noise[:-1]) and len(noise[-1]) == MAX_HELD + 1
    assert [p for _, _, p in noise[-1]] == [False] * (MAX_HELD + 1)
