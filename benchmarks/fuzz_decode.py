"""Coverage-guided fuzzing of LineSplitter + Decoder with atheris (optional extra "fuzz").

Usage: python -m benchmarks.fuzz_decode [-atheris_runs=200000] [corpus_dir]

The input is cut into blocks at points taken from its first bytes, fed
through the splitter and every line through the decoder; the same byte
accounting as the hypothesis test in tests/live/test_faults.py must hold.
"""

from __future__ import annotations

import math
import sys

import atheris

with atheris.instrument_imports():
    from logger.formats.decode import Decoder, LineSplitter


def one_input(data: bytes) -> None:
    fdp = atheris.FuzzedDataProvider(data)
    max_line = fdp.ConsumeIntInRange(1, 300)
    cuts = [fdp.ConsumeIntInRange(0, 64) for _ in range(fdp.ConsumeIntInRange(0, 16))]
    body = fdp.ConsumeBytes(fdp.remaining_bytes())
    splitter, decoder = LineSplitter(max_line), Decoder("mm", max_line)
    lines, pos = [], 0
    for c in cuts + [len(body)]:
        lines += splitter.feed(body[pos:pos + c])
        pos += c
        assert splitter.bytes_in == splitter.bytes_in_lines + splitter.bytes_dropped + len(splitter.pending)
    lines += splitter.flush()
    assert splitter.bytes_in == len(body) == splitter.bytes_in_lines + splitter.bytes_dropped
    for raw in lines:
        assert len(raw) <= max_line
        value, _, why = decoder.value(raw)
        assert (value is None) == bool(why) and (value is None or math.isfinite(value))
    assert decoder.good + decoder.bad == len(lines)


def main(argv: list[str]) -> None:
    if not any(a.startswith("-atheris_runs=") for a in argv):
        argv = argv + ["-atheris_runs=200000"]
    atheris.Setup(argv, one_input)
    atheris.Fuzz()


if __name__ == "__main__":
    main(sys.argv)
