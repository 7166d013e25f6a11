"""The batch replay: a recording through the pipeline a block at a time, with the same run folder as line by line.

`saglog replay` has nobody watching, so it need not tell anyone about each
line: blocks of the common kind are decoded (logger.formats.batch_decode),
detected (logger.analysis.batch_seating) and written (logger.run.block_rows)
with array operations; comment lines (a capture's gaps, end and partial lines) are cut out
of their block and read as the incremental reader reads them, and every
other block (odd lines) goes through `Pipeline.line` as in a capture.  Both
feed the same decoder counts, detector and list of seatings, and the
pipeline's `finish` analyses and writes the rest, so the run folder is
byte-identical to the incremental replay's (tests/live/test_batch_replay.py).

A block's rows are formatted and written on a second thread while the next
block is decoded and detected (`RowsBehind`): the write and much of the
formatting are system calls and numpy loops, during which the other thread
runs (docs/performance.md has the figures).  One block at most is in
flight, and it is always finished before anything else reaches the run
folder, so the bytes land in the same order.
"""

from __future__ import annotations

import re
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path
from typing import Callable

from logger.analysis.batch_seating import BAD_CODE, detect_block
from logger.formats.batch_decode import decode_block
from logger.formats.recording import block_records, record_blocks
from logger.live.pipeline import Pipeline
from logger.live.stop import NEVER
from logger.run.block_rows import block_rows
from logger.run.writer import RunWriter

BLOCK_BYTES = 1 << 21  # about 160,000 lines of a 100 Hz recording: a few tens of MB at most in arrays
_COMMENT_LINE = re.compile(rb"^#[^\n]*(?:\n|$)", re.MULTILINE)


def feed_recording(p: Path, f, first: bytes | None, lineno: int, pipeline: Pipeline, writer: RunWriter,
                   on_comment: Callable[[str], None], stop=NEVER) -> bool:
    """Every record of an open recording into `pipeline` (`writer` its one listener); True if a `stop` cut it short.

    A stop is looked at before each block and each line taken one by one,
    so what has been fed when it ends is a whole prefix of the records.
    """
    with f, RowsBehind(writer) as rows:
        for data in record_blocks(f, first, BLOCK_BYTES):
            for part in _around_comments(data):
                if stop.requested:
                    return True
                block = None if part[:1] == b"#" else decode_block(part, pipeline.decoder.parse)
                if block is None:
                    rows.wait()  # the rows before these first: they go to the same files
                    for t_s, raw, text in block_records(p, part, lineno, on_comment):
                        if stop.requested:
                            return True
                        pipeline.line(t_s, raw, text)
                else:
                    _feed_block(block, pipeline, rows)
                lineno += part.count(b"\n") + (not part.endswith(b"\n"))
    return False


class RowsBehind:
    """A block's samples.csv rows, formatted and written on one worker thread while the caller goes on.

    `put` first waits for the block before (rows stay in order), `wait`
    before anything else writes to the run folder; leaving the `with`
    waits too, so nothing is still writing when the run is finished.  A
    write error (a full disk) is raised by the next `put` or `wait`, or on
    leaving the `with`, in the caller's thread, as the incremental writer
    raises it.
    """

    def __init__(self, writer: RunWriter):
        self._writer = writer
        self._pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="saglog-rows")
        self._pending: Future | None = None

    def put(self, block, t_wall, states, seats) -> None:
        self.wait()
        self._pending = self._pool.submit(lambda: self._writer.sample_block(block_rows(block, t_wall, states, seats)))

    def wait(self) -> None:
        pending, self._pending = self._pending, None
        if pending is not None:
            pending.result()

    def __enter__(self) -> "RowsBehind":
        return self

    def __exit__(self, kind, exc, tb) -> None:
        try:
            if kind is None:
                self.wait()  # the last block's error, if any, is this run's
        finally:
            self._pool.shutdown()  # waits for a block still in flight; an error already on its way wins


def _around_comments(data: bytes) -> list[bytes]:
    """A block cut into its comment lines and the runs of records between them, in order.

    A capture's recording has comments among its records (every gap, a
    partial line after an opening, the end); the records around them still
    go the batch way.
    """
    if data[:1] != b"#" and b"\n#" not in data:
        return [data]
    parts, pos = [], 0
    for m in _COMMENT_LINE.finditer(data):
        if m.start() > pos:
            parts.append(data[pos:m.start()])
        parts.append(m[0])
        pos = m.end()
    if pos < len(data):
        parts.append(data[pos:])
    return parts


def _feed_block(block, pipeline: Pipeline, rows: RowsBehind) -> None:
    """One decoded block: counts, detection, rows; what `Pipeline.line` does for each of its lines."""
    good = block.good()
    n_good = int(good.sum())
    decoder = pipeline.decoder
    decoder.good += n_good
    decoder.bad += len(good) - n_good
    if n_good == len(good):  # the usual block: every line a reading
        states, seats = detect_block(pipeline.detector, block.t_s, block.values_mm(), pipeline.seatings)
    else:
        states = (~good).astype("int8") * BAD_CODE
        seats = (good * 0 - 1).astype("int64")
        if n_good:
            states[good], seats[good] = detect_block(pipeline.detector, block.t_s[good], block.values_mm()[good],
                                                     pipeline.seatings)
    pipeline.last_t_s = float(block.t_s[-1])
    pipeline._state = pipeline.detector.state  # as Pipeline.line leaves it (no listener here hears states)
    rows.put(block, pipeline.start_wall + block.t_s, states, seats)
