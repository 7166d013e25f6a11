"""The batch replay gives the very run folder the incremental pipeline gives (byte for byte).

The incremental pipeline (Pipeline.line per record) is the reference: the
batch path (logger.live.batch) must agree with it on every file of the run
folder, on the shipped sample streams, on the fault suite's messy streams
(baud-rate noise, a unit switch, gaps, a file edited into CRLF, a bad record
half-way) and on hypothesis-drawn streams.  Small blocks put block
boundaries everywhere, so seatings, holds and rests are cut across them.
"""

from __future__ import annotations

import json
import random
import threading
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

import logger.live.batch as batch
from benchmarks.feeder import session
from logger.errors import UserError
from logger.formats.batch_decode import decode_block
from logger.formats.decode import Decoder
from logger.formats.recording import RecWriter, end_comment, gap_comment, partial_comment
from logger.live.replay import replay_file
from logger.run.writer import RunWriter
from tests.helpers.paths import ROOT
from tests.live.test_faults import fresh_settings, timed, write_rec

FILES = ("samples.csv", "seatings.csv", "summary.json", "settings.json")


def both(rec: Path, out: Path, profile, **over) -> dict:
    """Replay `rec` line by line and in batches; the files of the two run folders, by name."""
    got = {}
    for mode in (False, True):
        folder = out / f"batch-{mode}"
        error = None
        try:
            replay_file(rec, profile, fresh_settings(profile, **over), folder, batch=mode, force=True)
        except UserError as exc:
            error = str(exc)
        got[mode] = {name: (folder / name).read_bytes() for name in FILES if (folder / name).exists()}, error
    return got


def assert_same(got: dict) -> None:
    (inc, inc_error), (bat, bat_error) = got[False], got[True]
    assert bat_error == inc_error
    assert inc.keys() == bat.keys()
    for name in inc:
        assert bat[name] == inc[name], name


@pytest.fixture(params=[1 << 22, 700, 97], ids=["big-blocks", "small-blocks", "tiny-blocks"])
def blocks(request, monkeypatch):
    monkeypatch.setattr(batch, "BLOCK_BYTES", request.param)
    return request.param


@pytest.mark.parametrize("rec", sorted((ROOT / "sample_streams").glob("*.rec")), ids=lambda p: p.stem)
def test_every_sample_stream(rec, blocks, tmp_path, profile):
    assert_same(both(rec, tmp_path, profile))


def test_a_long_session_with_rests_holds_and_compaction(blocks, tmp_path, profile):
    # 40 s holds at 1 kHz pass the detector's 20,000-sample compaction, cut across blocks
    stream = session(3, rate_hz=1000, seated_s=40, lifted_s=2, seed=3)
    write_rec(tmp_path / "long.rec", timed(stream.lines, 1000))
    assert_same(both(tmp_path / "long.rec", tmp_path, profile))


def messy_streams(tmp_path: Path) -> list[Path]:
    """The fault suite's kinds of trouble, each in a recording of its own."""
    stream = session(6, rate_hz=100, seed=5)
    lines = timed(stream.lines)
    rng = random.Random(7)
    noisy = []
    for t_s, raw in lines:
        noisy.append((t_s, raw))
        if rng.random() < 0.05:  # a wrong baud rate: high bytes, NUL, 0xFF
            noisy.append((t_s, bytes(rng.choice([0x00, 0xFF, *range(0x80, 0xFF)]) for _ in range(rng.randint(1, 30)))))
    inch = [(t, b"%+.5f in\r" % (float(r.split()[0]) / 25.4) if 600 < i < 1500 else r) for i, (t, r) in enumerate(lines)]
    out = []
    for name, recs in (("noisy", noisy), ("inch", inch)):
        write_rec(tmp_path / f"{name}.rec", recs)
        out.append(tmp_path / f"{name}.rec")
    w = RecWriter(tmp_path / "gaps.rec", 1_780_000_000.0, {"source": "invented test stream"})
    for i, (t_s, raw) in enumerate(lines):
        if i in (500, 1300):
            w.comment(gap_comment(t_s - 0.005, t_s))
        w.write(t_s, raw)
    w.close()
    out.append(tmp_path / "gaps.rec")
    text = (tmp_path / "noisy.rec").read_bytes()
    (tmp_path / "crlf.rec").write_bytes(text.replace(b"\n", b"\r\n"))
    records = text.split(b"\n")
    records[len(records) // 2] = b"12.5 no tab here"
    (tmp_path / "broken.rec").write_bytes(b"\n".join(records))
    odd = text.replace(b"0000\t", b"\t").replace(b"5.0", b"5.00")  # times written otherwise, still numbers
    (tmp_path / "odd-times.rec").write_bytes(odd)
    return out + [tmp_path / "crlf.rec", tmp_path / "broken.rec", tmp_path / "odd-times.rec"]


def test_the_fault_suites_messy_streams(blocks, tmp_path, profile):
    for rec in messy_streams(tmp_path):
        got = both(rec, tmp_path / rec.stem, profile)
        assert_same(got)
        if rec.stem == "broken":  # the malformed record is reported, and what came before it kept
            assert "malformed record" in got[True][1] and got[True][0]["samples.csv"].count(b"\n") > 100


_LINE = st.one_of(
    st.floats(-3, 3).map(lambda x: b"%+.3f mm\r" % x),
    st.floats(-0.1, 0.1).map(lambda x: b"%+.5fin" % x),
    st.sampled_from([b"", b"\x00\xff", b"-0,341 MM", b'1.5"', b"=HYPERLINK()", b"F:A:24:1234AB", b"a\\b"]),
)


@st.composite
def streams(draw):
    """Levels held for a while with a little noise, lifts between, odd lines and gaps here and there.

    (t, None) stands for a gap comment, (t, ("partial", raw)) for the tail of a line the port opened
    in; the stream may end with the end comment a capture writes.
    """
    t, recs = 0.0, []
    for _ in range(draw(st.integers(1, 8))):
        level = draw(st.floats(-2, 0))
        noise = draw(st.sampled_from([0.0, 0.0005, 0.002, 0.03]))
        creep = draw(st.sampled_from([0.0, 0.0, 0.0028, 0.003, 0.004]))  # mm per reading: the centre's lag decides
        on_change = draw(st.booleans())  # only changed values are sent: silence holds the value
        rate = draw(st.sampled_from([10.0, 50.0, 200.0]))
        rng = random.Random(draw(st.integers(0, 99)))
        last = None
        for k in range(draw(st.integers(1, 300))):
            t += 1 / rate * draw(st.sampled_from([1, 1, 1, 3, 150])) if rng.random() < 0.1 else 1 / rate
            if rng.random() < 0.005:
                t = max(t - 0.5, 0.0)  # a clock that stepped back
            if rng.random() < 0.03:
                recs.append((t, draw(_LINE)))
                continue
            if rng.random() < 0.005:
                recs.append((t, None))  # the device was away: a gap comment among the records
                if draw(st.booleans()):  # and came back mid-line: the tail of a line, kept in a comment
                    recs.append((t + 0.5, ("partial", draw(_LINE))))
            line = b"%+.3f mm\r" % (level + creep * k + rng.gauss(0, noise))
            if not (on_change and line == last):
                recs.append((t, line))
            last = line
    if draw(st.booleans()):
        recs.append((t, "end"))
    return recs


def write_drawn(path: Path, recs) -> None:
    w = RecWriter(path, 1_780_000_000.0, {"source": "invented test stream"})
    for t_s, raw in recs:
        if raw is None:
            w.comment(gap_comment(t_s, t_s + 0.5))
        elif raw == "end":
            w.comment(end_comment(t_s))
        elif isinstance(raw, tuple):
            w.comment(partial_comment(t_s, raw[1]))
        else:
            w.write(t_s, raw)
    w.close()


@settings(max_examples=80, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])  # the profile is read-only
@given(recs=streams(), block=st.sampled_from([64, 300, 1 << 22]))
def test_batch_equals_incremental_on_drawn_streams(recs, block, tmp_path_factory, profile):
    tmp = tmp_path_factory.mktemp("drawn")
    write_drawn(tmp / "drawn.rec", recs)
    old = batch.BLOCK_BYTES
    batch.BLOCK_BYTES = block
    try:
        assert_same(both(tmp / "drawn.rec", tmp, profile, settle=0.2))
    finally:
        batch.BLOCK_BYTES = old


def test_a_stream_that_stops_repeating(blocks, tmp_path, profile):
    # Continuous at the stop for 3 s (values repeat), then a placement sent only on change and lifted
    # again 0.7 s later: silence within a second of the last repeat is a delivery delay, not a hold,
    # so no seating (DetectorSettings: settle 0.4 s).  The batch path must remember the last repeat.
    recs = [((k + 1) / 100, b"-1.500 mm\r") for k in range(300)]
    recs += [(3.2, b"-0.340 mm\r"), (3.4, b"-0.339 mm\r"), (3.9, b"-1.500 mm\r")]
    recs += [(3.9 + (k + 1) / 100, b"-1.500 mm\r") for k in range(100)]
    write_rec(tmp_path / "stops.rec", recs)
    got = both(tmp_path / "stops.rec", tmp_path, profile)
    assert_same(got)
    assert b'"seatings_total": 0' in got[True][0]["summary.json"]


def test_records_around_a_captures_comments_still_go_the_batch_way(tmp_path, profile, monkeypatch):
    # A capture's recording has its gaps and its end as comments; only those lines go the careful way.
    recs = [(t_s, raw) for t_s, raw in timed(session(3, rate_hz=100, seed=2).lines)]
    recs[400:400] = [(recs[400][0], None)]
    recs.append((recs[-1][0], "end"))
    write_drawn(tmp_path / "cap.rec", recs)
    batched = []
    feed_block = batch._feed_block

    def counting(block, *args):
        batched.append(len(block.t_s))
        return feed_block(block, *args)

    monkeypatch.setattr(batch, "_feed_block", counting)
    replay_file(tmp_path / "cap.rec", profile, fresh_settings(profile), tmp_path / "out", force=True)
    assert len(batched) == 2 and sum(batched) == len(recs) - 2  # before the gap, after it up to the end


def test_an_event_before_the_first_record_is_not_taken_for_the_header(blocks, tmp_path, profile):
    # The device went away before its first line: the gap comes straight after the header, and must
    # reach the run (it was read as part of the header and lost), both ways.
    recs = [(0.0, None)] + [(0.5 + t_s, raw) for t_s, raw in timed(session(2, rate_hz=100, seed=4).lines)]
    write_drawn(tmp_path / "early-gap.rec", recs)
    got = both(tmp_path / "early-gap.rec", tmp_path, profile)
    assert_same(got)
    assert json.loads(got[True][0]["summary.json"])["gaps"] == [{"t_start_s": 0.0, "t_end_s": 0.5}]


def _one_block() -> tuple:
    """A decoded block of a few records and its rows' states, as `_feed_block` hands them to RowsBehind."""
    data = b"".join(b"%.6f\t-0.340 mm\\x0d\n" % (k / 100) for k in range(1, 6))
    block = decode_block(data, Decoder("mm").parse)
    n = len(block.t_s)
    return block, 1_780_000_000.0 + block.t_s, np.zeros(n, np.int8), np.full(n, -1, np.int64)


def _no_worker_left() -> bool:
    return not [t for t in threading.enumerate() if t.name.startswith("saglog-rows")]


@pytest.mark.parametrize("hand_over", ["put", "wait", "end"])
def test_a_write_error_on_the_worker_reaches_the_caller_at_each_hand_over(tmp_path, hand_over):
    # RowsBehind writes a block's rows on a worker thread; its write error must come out at the next
    # block's put, at the wait before the line-by-line path, or at the end of the replay (a disk that
    # fills on the last block), and no worker may be left.  A closed RunWriter refuses every write.
    (tmp_path / "run").mkdir()
    writer = RunWriter(tmp_path / "run", 0.0, {})
    writer.close()
    args, raised_at = _one_block(), None
    try:
        with batch.RowsBehind(writer) as rows:
            rows.put(*args)
            try:
                if hand_over == "put":
                    rows.put(*args)
                elif hand_over == "wait":
                    rows.wait()
            except UserError:
                raised_at = hand_over
                raise
    except UserError as exc:
        assert "samples.csv" in str(exc)
        raised_at = raised_at or "end"
    assert raised_at == hand_over
    assert _no_worker_left()


def test_an_error_of_the_replay_itself_wins_over_one_on_the_worker(tmp_path):
    (tmp_path / "run").mkdir()
    writer = RunWriter(tmp_path / "run", 0.0, {})
    writer.close()
    with pytest.raises(RuntimeError, match="the replay's own"):
        with batch.RowsBehind(writer) as rows:
            rows.put(*_one_block())
            raise RuntimeError("the replay's own")
    assert _no_worker_left()
