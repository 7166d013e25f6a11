"""Decoder and line splitter: a table of the lines docs/streams.md describes, and property tests.

The reference for splitting is a byte-by-byte state machine written here,
independent of the regular expressions in logger/formats/decode.py.  The reference
for values is Python's decimal arithmetic with the inch defined as exactly
25.4 mm (international yard and pound agreement, 1959).
"""

from __future__ import annotations

import re
from decimal import Decimal

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from logger.formats import decode
from logger.formats.decode import MAX_LINE, Decoder, LineSplitter

INCH = Decimal("25.4")  # exact by definition


def exact_mm(text: str, unit: str) -> float:
    return float(Decimal(text) * (INCH if unit == "in" else 1))


# (line as received without LF, default unit, expected value text, unit the value is in)
ACCEPTED = [
    (b"1.234", "mm", "1.234", "mm"),
    (b"+1.234", "mm", "1.234", "mm"),
    (b"-0.005", "mm", "-0.005", "mm"),
    (b"-0,005", "mm", "-0.005", "mm"),  # comma as decimal mark
    (b"  -12.500 mm\r", "in", "-12.500", "mm"),  # the line's own unit wins
    (b"0.01230 in", "mm", "0.01230", "in"),
    (b'0.01230"', "mm", "0.01230", "in"),
    (b"0.0123 INCH\r", "mm", "0.0123", "in"),
    (b"0.0123inch", "mm", "0.0123", "in"),
    (b"1.5 MM", "in", "1.5", "mm"),
    (b"1.5mm", "in", "1.5", "mm"),
    (b"- 0.250", "in", "-0.250", "in"),  # sign, blank, digits
    (b"0012.340", "mm", "12.340", "mm"),  # zero padded
    (b"     3.000", "mm", "3.000", "mm"),  # space padded
    (b"7", "mm", "7", "mm"),
    (b"7.", "mm", "7", "mm"),
    (b".5", "mm", "0.5", "mm"),
    (b",5", "mm", "0.5", "mm"),
    (b"\t2.000\t", "mm", "2.000", "mm"),
    (b"+0.000\r", "mm", "0", "mm"),
]

REJECTED = [
    (b"", "empty line"),
    (b"\r", "empty line"),
    (b"   ", "empty line"),
    (b"ERR 3", "not a reading"),
    (b"1.2.3", "not a reading"),
    (b"1.234 cm", "not a reading"),
    (b"1.234 mm mm", "not a reading"),
    (b"+-1.0", "not a reading"),
    (b"--1.0", "not a reading"),
    (b"1.0 -", "not a reading"),
    (b"1 000.5", "not a reading"),
    (b"mm", "not a reading"),
    (b".", "not a reading"),
    (b"1.0\r\r", "not a reading"),
    (b"\x00\x00\x00", "non-text bytes (wrong baud rate or line noise?)"),
    (b"\xff\xfe1.000", "non-text bytes (wrong baud rate or line noise?)"),
    (b"1.000\x00", "non-text bytes (wrong baud rate or line noise?)"),
    (b"\xb1\xb2\xb3.\xb4", "non-text bytes (wrong baud rate or line noise?)"),  # digits with bit 7 set
    (b"1" * MAX_LINE, "over-long line"),
]


@pytest.mark.parametrize("raw,default,text,unit", ACCEPTED)
def test_accepted_lines(raw, default, text, unit):
    d = Decoder(default)
    r = d.decode(raw, 1.5, 1000.0)
    assert r.bad == "" and r.unit == unit and r.raw == raw
    assert r.value_mm == pytest.approx(exact_mm(text, unit), rel=1e-15, abs=1e-15)
    assert (r.t_s, r.t_wall) == (1.5, 1000.0)
    assert (d.good, d.bad) == (1, 0)


@pytest.mark.parametrize("raw,why", REJECTED)
def test_rejected_lines(raw, why):
    d = Decoder("mm")
    r = d.decode(raw, 0.0, 0.0)
    assert r.value_mm is None and r.unit is None and r.raw == raw and r.bad == why
    assert (d.good, d.bad) == (0, 1)


def test_unit_switch_mid_stream():
    # The user presses the unit button: each line's own unit wins, line by line;
    # lines without a unit take the default (the profile's indicator unit).
    sp, d = LineSplitter(), Decoder("in")
    lines = sp.feed(b"1.000 mm\r\n0.03937 in\r\n2.5\r\n-0.100 mm\r\n0.5\"\r\n")
    got = [(r.unit, r.value_mm) for r in (d.decode(x, 0, 0) for x in lines)]
    want = [("mm", 1.0), ("in", exact_mm("0.03937", "in")), ("in", exact_mm("2.5", "in")),
            ("mm", -0.1), ("in", exact_mm("0.5", "in"))]
    assert [u for u, _ in got] == [u for u, _ in want]
    assert [v for _, v in got] == pytest.approx([v for _, v in want], rel=1e-15)


@pytest.mark.parametrize("ending", [b"\n", b"\r", b"\r\n"])
def test_endings_and_split_points(ending):
    data = b"".join(b"%d.%03d mm" % (i, i) + ending for i in range(20))
    want_cr = ending != b"\n"
    for cut in range(len(data) + 1):  # every split point, incl. inside a CRLF
        sp = LineSplitter()
        lines = sp.feed(data[:cut]) + sp.feed(data[cut:]) + sp.flush()
        assert len(lines) == 20
        assert all(line.endswith(b"\r") == want_cr for line in lines)
        assert sp.bytes_in == sp.bytes_in_lines + sp.bytes_dropped == len(data)


def test_crlf_split_exactly_between_cr_and_lf():
    sp = LineSplitter()
    assert sp.feed(b"1.000\r") == [b"1.000\r"]
    assert sp.feed(b"\n2.000\r") == [b"2.000\r"]
    assert sp.feed(b"\n") == []
    assert sp.feed(b"3.000\n") == [b"3.000"]
    assert sp.lines_out == 3 and sp.bytes_in == sp.bytes_in_lines == 20


def test_cr_line_then_partial_line_then_lf():
    # A CR ending in the middle of a block must not swallow a later LF.
    sp = LineSplitter()
    assert sp.feed(b"1.0\rab") == [b"1.0\r"]
    assert sp.feed(b"c\n") == [b"abc"]


def test_overlong_line_memory_is_bounded():
    sp, d = LineSplitter(), Decoder()
    block = b"7" * 65536
    lines = []
    for _ in range(160):  # 10 MiB without a line ending
        lines += sp.feed(block)
        assert len(sp.pending) < sp.max_line
    lines += sp.feed(b"tail\n1.000\n")
    lines += sp.flush()
    assert len(lines) == 2 and len(lines[0]) == MAX_LINE and lines[1] == b"1.000"
    assert [d.decode(x, 0, 0).bad for x in lines] == ["over-long line", ""]
    assert sp.bytes_dropped == 160 * 65536 - MAX_LINE + 4
    assert sp.bytes_in == sp.bytes_in_lines + sp.bytes_dropped


def reference_lines(data: bytes, limit: int) -> list[bytes]:
    """Byte-by-byte model: LF, CR or CRLF end a line; a CR is kept, an LF is not."""
    out, line, i, n = [], bytearray(), 0, len(data)
    while i < n:
        b = data[i]
        if b == 0x0A:
            out.append(bytes(line))
            line.clear()
        elif b == 0x0D:
            line.append(b)
            out.append(bytes(line))
            line.clear()
            if i + 1 < n and data[i + 1] == 0x0A:
                i += 1
        else:
            line.append(b)
        i += 1
    if line:
        out.append(bytes(line))
    return [x[:limit] for x in out]


stream_bytes = st.lists(
    st.one_of(
        st.sampled_from([b"\r", b"\n", b"\r\n", b"1.234", b"-0,5 mm", b" in", b"\x00", b"\xff"]),
        st.binary(max_size=40),
    ),
    max_size=60,
).map(b"".join)


@settings(max_examples=300, deadline=None)
@given(stream_bytes, st.lists(st.integers(0, 80), max_size=30), st.sampled_from([8, 16, MAX_LINE]))
def test_any_bytes_any_blocks_every_line_accounted(data, cuts, limit):
    sp, d = LineSplitter(max_line=limit), Decoder("mm", max_line=limit)
    lines, pos = [], 0
    for c in cuts:
        lines += sp.feed(data[pos : pos + c])
        pos += c
        assert sp.bytes_in == sp.bytes_in_lines + sp.bytes_dropped + len(sp.pending)
        assert len(sp.pending) < limit
    lines += sp.feed(data[pos:])
    lines += sp.flush()
    assert lines == reference_lines(data, limit)
    assert sp.lines_out == len(lines)
    assert sp.bytes_in == len(data) == sp.bytes_in_lines + sp.bytes_dropped
    readings = [d.decode(x, 0.0, 0.0) for x in lines]
    assert d.good + d.bad == len(lines)
    assert all((r.value_mm is None) == bool(r.bad) for r in readings)


number_lines = st.tuples(
    st.sampled_from(["", "+", "-"]),
    st.integers(0, 99999),
    st.integers(0, 5),  # decimals
    st.sampled_from([".", ","]),
    st.sampled_from(["", " "]),
    st.sampled_from(["", "mm", "MM", "in", "IN", "inch", "Inch", '"']),
    st.sampled_from(["\n", "\r", "\r\n"]),
    st.integers(0, 4),  # leading spaces
)


@settings(max_examples=300, deadline=None)
@given(number_lines, st.sampled_from(["mm", "in"]))
def test_generated_good_lines_decode_exactly(parts, default):
    sign, counts, decimals, mark, gap, suffix, ending, lead = parts
    digits = str(counts).rjust(decimals + 1, "0")
    text = digits[: len(digits) - decimals] + ("." + digits[len(digits) - decimals :] if decimals else "")
    line = (" " * lead + sign + text.replace(".", mark) + (gap + suffix if suffix else "") + ending).encode()
    sp, d = LineSplitter(), Decoder(default)
    (raw,) = sp.feed(line)
    r = d.decode(raw, 0.0, 0.0)
    unit = default if not suffix else ("mm" if suffix.lower() == "mm" else "in")
    want = exact_mm(("-" if sign == "-" else "") + text, unit)
    assert r.bad == "" and r.unit == unit
    assert r.value_mm == pytest.approx(want, rel=1e-15, abs=1e-300)


@settings(max_examples=200, deadline=None)
@given(st.binary(max_size=300))
def test_decoder_never_raises_and_rejects_non_ascii(raw):
    r = Decoder().decode(raw, 0.0, 0.0)
    if re.search(rb"[^\x20-\x7e\t\r]", raw):
        assert r.value_mm is None and r.bad


def test_line_formats_are_tried_in_their_declared_order(monkeypatch):
    # The indicator's own line first, then the bridge's raw-frame line (firmware_notes/README.md);
    # a format added to the tuple is tried after them, and only for lines they do not read.
    assert [name for name, _ in decode.LINE_FORMATS] == ["indicator", "bridge-frame"]
    # the README's example frame: bytes D2 04 00, first-sent bit lowest -> 0x4D2 = 1234 counts of 0.01 mm
    assert Decoder().decode(b"F:sign24:24:D20400", 0, 0).value_mm == pytest.approx(12.34, rel=1e-15)

    def hundredths(raw, default_unit):  # an invented format: "H<counts>" in 0.01 mm
        return (int(raw[1:]) / 100, "mm") if raw[:1] == b"H" and raw[1:].isdigit() else None

    monkeypatch.setattr(decode, "LINE_FORMATS", decode.LINE_FORMATS + (("hundredths", hundredths),))
    d = Decoder()
    assert [d.decode(x, 0, 0).value_mm for x in (b"H250", b"2.5", b"Hx")] == [2.5, 2.5, None]
    assert d.decode(b"H" + b"1" * MAX_LINE, 0, 0).bad == "over-long line"  # the length bound holds for every format
