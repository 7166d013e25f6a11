"""Recording format (*.rec), checked against its definition in docs/streams.md ("Recording format").

The escape rule is restated here byte by byte (every byte outside 0x20..0x7E
and the backslash become \\xHH, lower-case hex) rather than taken from the code.
"""

from __future__ import annotations


import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from logger.errors import UserError
from logger.formats.recording import (RecWriter, escape, is_recording, parse_event, parse_partial, partial_comment,
                                      read_plain, read_recording, unescape)


def contract_escape(raw: bytes) -> str:
    return "".join(chr(b) if 0x20 <= b <= 0x7E and b != 0x5C else f"\\x{b:02x}" for b in raw)


@pytest.mark.parametrize("raw,text", [
    (b"+1.234 mm\r", "+1.234 mm\\x0d"),
    (b"a\\b", "a\\x5cb"),
    (b"\t\x00\xff\x7f ~", "\\x09\\x00\\xff\\x7f ~"),
    (b"", ""),
    (b"\r\r", "\\x0d\\x0d"),
])
def test_escape_table(raw, text):
    assert escape(raw) == text == contract_escape(raw)
    assert unescape(text) == raw


@given(st.binary(max_size=80))
def test_escape_matches_contract_and_inverts(raw):
    assert escape(raw) == contract_escape(raw)
    assert unescape(escape(raw)) == raw


@pytest.mark.parametrize("bad", ["\\x0D", "\\x1", "a\\b", "\\", "tab\there", "caf\u00e9"])
def test_unescape_rejects_malformed(bad):
    with pytest.raises(UserError):
        unescape(bad)


records = st.lists(st.tuples(st.floats(0, 1e6, allow_nan=False), st.binary(max_size=60)), max_size=40)


@settings(max_examples=100, deadline=None)
@given(records)
def test_round_trip_byte_exact(tmp_path_factory, recs):
    d = tmp_path_factory.mktemp("rec")
    p, q = d / "a.rec", d / "b.rec"
    with RecWriter(p, 1_700_000_000.25, {"port": "/dev/ttyUSB0", "baudrate": 9600}) as w:
        for t, raw in recs:
            w.write(t, raw)
        w.comment("a gap: device gone for 2 s")
    header, it = read_recording(p)
    triples = list(it)
    assert all(text == escape(raw) for _, raw, text in triples)  # the text is the field as written
    back = [(t, raw) for t, raw, _ in triples]
    assert [r for _, r in back] == [r for _, r in recs]
    assert all(abs(a - b) <= 5e-7 * max(1.0, b) for (a, _), (b, _) in zip(back, recs))
    assert header["start_wall"] == 1_700_000_000.25 and header["port"] == "/dev/ttyUSB0"
    assert header["start_utc"] == "2023-11-14T22:13:20.250000Z"  # 1.7e9 s after the Unix epoch
    # Writing what was read gives the very same file.
    with RecWriter(q, header["start_wall"], {"port": "/dev/ttyUSB0", "baudrate": 9600}) as w:
        for t, raw in back:
            w.write(t, raw)
        w.comment("a gap: device gone for 2 s")
    assert q.read_bytes() == p.read_bytes()


def test_file_layout_is_the_contract(tmp_path):
    p = tmp_path / "x.rec"
    with RecWriter(p, 0.0, {"url": "loop://"}) as w:
        w.write(0.5, b"-0.012 mm\r")
        w.write(1.0, b"\xff")
    lines = p.read_text("utf-8").splitlines()
    assert lines[0] == "# saglog recording"
    assert lines[1] == "# start_utc: 1970-01-01T00:00:00.000000Z"
    assert "# url: loop://" in lines and any(x.startswith("# saglog_version: ") for x in lines)
    assert lines[-2:] == ["0.500000\t-0.012 mm\\x0d", "1.000000\t\\xff"]


def test_malformed_record_keeps_what_came_before(tmp_path):
    p = tmp_path / "bad.rec"
    p.write_text("# saglog recording\n0.1\t1.000\n# note\n\n0.2\t2.000\\x0d\nthis is not a record\n0.3\t3\n")
    _, it = read_recording(p)
    got = []
    with pytest.raises(UserError, match=r"bad\.rec:6: malformed record"):
        for t, raw, _ in it:
            got.append((t, raw))
    assert got == [(0.1, b"1.000"), (0.2, b"2.000\r")]


@pytest.mark.parametrize("line", ["nan\tx", "1.0 no tab", "1.0\tbad\\q", "1.0\ta\x01b", "inf\t1"])
def test_malformed_variants(tmp_path, line):
    p = tmp_path / "m.rec"
    p.write_bytes(b"0\tok\n" + line.encode() + b"\n")
    _, it = read_recording(p)
    assert next(it)[:2] == (0.0, b"ok")
    with pytest.raises(UserError, match=r"m\.rec:2:"):
        next(it)


def test_crlf_edited_file_still_reads(tmp_path):
    p = tmp_path / "w.rec"
    p.write_bytes(b"# saglog recording\r\n0.000000\t1.0\\x0d\r\n0.100000\t2.0\r\n")
    _, it = read_recording(p)
    assert [(t, raw) for t, raw, _ in it] == [(0.0, b"1.0\r"), (0.1, b"2.0")]


def test_missing_file_is_a_user_error(tmp_path):
    with pytest.raises(UserError, match="not found"):
        read_recording(tmp_path / "nope.rec")


def test_plain_capture_at_a_rate(tmp_path):
    p = tmp_path / "cap.txt"
    p.write_bytes(b"1.000\r\n2.000\r\n\xff\xfe\r\n3.0" * 30000)  # blocks split mid-line and mid-CRLF
    got = [(t, raw) for t, raw, _ in read_plain(p, 50.0)]
    assert len(got) == 3 * 30000 + 1
    assert got[0] == (0.0, b"1.000\r") and got[2] == (2 / 50.0, b"\xff\xfe\r")
    assert got[3] == (3 / 50.0, b"3.01.000\r")  # the unterminated "3.0" runs into the next line
    assert got[-1] == (90000 / 50.0, b"3.0")  # the unterminated tail at the end is a last line
    with pytest.raises(UserError, match="--rate"):
        read_plain(p, 0)


def test_is_recording(tmp_path):
    rec, bare, plain = tmp_path / "a.rec", tmp_path / "b.rec", tmp_path / "c.txt"
    with RecWriter(rec, 0.0) as w:
        w.write(0.0, b"1")
    bare.write_text("0.000000\t1.000\n")
    plain.write_bytes(b"+1.000 mm\r\n+1.001 mm\r\n")
    assert is_recording(rec) and is_recording(bare) and not is_recording(plain)


@given(raw=st.binary(max_size=300), t_s=st.floats(0, 1e6, allow_nan=False))
def test_a_partial_line_comment_gives_back_its_bytes_and_time(raw, t_s):
    # written by RecWriter.comment and read back stripped, as block_records hands comments on
    text = partial_comment(t_s, raw)
    assert parse_partial(text.strip()) == (float(f"{t_s:.6f}"), raw)


@pytest.mark.parametrize("text", ["partial inf 1", "partial nan 1", "gap nan 1.0", "gap 1.0 inf", "end -inf",
                                  "partial x 1", "partial 1.0 \\xz1", "gap 1.0"])
def test_an_event_comment_with_an_unusable_time_is_no_event(text):
    assert parse_partial(text) is None and parse_event(text) is None
