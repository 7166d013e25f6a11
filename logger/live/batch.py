"""The batch replay: a recording through the pipeline a block at a time, with the same run folder as line by line.

`saglog replay` has nobody watching, so it need not tell anyone about each
line: blocks of the common kind are decoded (logger.formats.batch_decode),
detected (logger.analysis.batch_seating) and written (logger.run.block_rows)
with array operations, and every other block (comments, gaps, odd lines)
goes through `Pipeline.line` as in a capture.  Both feed the same decoder
counts, detector and list of seatings, and the pipeline's `finish` analyses
and writes the rest, so the run folder is byte-identical to the incremental
replay's (tests/live/test_batch_replay.py).
"""

from __future__ import annotations

from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path
from typing import Callable

import numpy as np

from logger.analysis.batch_seating import BAD_CODE, detect_block
from logger.formats.batch_decode import decode_block
from logger.formats.recording import block_records, record_blocks
from logger.live.pipeline import Pipeline
from logger.run.block_rows import block_rows
from logger.run.writer import RunWriter

BLOCK_BYTES = 1 << 21  # about 160,000 lines of a 100 Hz recording: a few tens of MB at most in arrays


def feed_recording(p: Path, f, first: bytes | None, lineno: int, pipeline: Pipeline, writer: RunWriter,
                   on_comment: Callable[[str], None]) -> None:
    """Every record of an open recording into `pipeline`, whose only listener is `writer`.

    The detector is Python and holds the interpreter; the rows of a block
    are array work and a file write, which mostly do not.  So while one
    block is detected, the block before it is formatted and written by a
    second thread: one block at a time, in order, and always finished
    before anything else reaches the writer (an odd block, the end, an error).
    """
    with f, ThreadPoolExecutor(max_workers=1, thread_name_prefix="saglog-rows") as rows:
        pending = None
        try:
            for data in record_blocks(f, first, BLOCK_BYTES):
                block = decode_block(data, pipeline.decoder.parse)
                if block is None:
                    pending = _done(pending)
                    for t_s, raw, text in block_records(p, data, lineno, on_comment):
                        pipeline.line(t_s, raw, text)
                else:
                    states, seats = _detect(block, pipeline)
                    pending = _done(pending)
                    pending = rows.submit(_write, block, states, seats, pipeline.start_wall, writer)
                lineno += data.count(b"\n") + (not data.endswith(b"\n"))
        finally:
            _done(pending)


def _done(pending: Future | None) -> None:
    """Wait for the rows in hand to be written (raising what writing them raised)."""
    if pending is not None:
        pending.result()


def _detect(block, pipeline: Pipeline) -> tuple[np.ndarray, np.ndarray]:
    """One decoded block through the counts and the detector: what `Pipeline.line` does for each of its lines."""
    good = block.good()
    n_good = int(good.sum())
    decoder = pipeline.decoder
    decoder.good += n_good
    decoder.bad += len(good) - n_good
    states = (~good).astype("int8") * BAD_CODE
    seats = (good * 0 - 1).astype("int64")
    if n_good:
        states[good], seats[good] = detect_block(pipeline.detector, block.t_s[good], block.values_mm()[good],
                                                 pipeline.seatings)
    pipeline.last_t_s = float(block.t_s[-1])
    pipeline._state = pipeline.detector.state  # as Pipeline.line leaves it (no listener here hears states)
    return states, seats


def _write(block, states: np.ndarray, seats: np.ndarray, start_wall: float, writer: RunWriter) -> None:
    writer.sample_block(block_rows(block, start_wall + block.t_s, states, seats))
