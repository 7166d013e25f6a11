"""Replay throughput against the baseline loop, and replay peak memory against run length.

The baseline loop (issue 17) is the plainest Python over the same recording:
read it in binary and, per line, split at the TAB, unescape `\\xHH` with one
compiled bytes regex (`re.sub` with a function), take the first
whitespace-separated token, replace a comma with a dot and call `float()` on
it and on the time; nothing else.  The replay does all of that's job and the
seating detection, the analysis and the run folder; it is timed both ways
(batch, the default, and line by line, the reference), best of three,
interleaved with the loop in one process.
"""

from __future__ import annotations

import re
import subprocess
import sys
import time
from pathlib import Path

from logger.config.profile import load_profile
from logger.formats.recording import RecWriter, end_comment

from .feeder import session

ROOT = Path(__file__).resolve().parents[1]
PROFILE = ROOT / "logger" / "config" / "profiles" / "example-three-ball.toml"
N_SEATINGS = 2500  # 4 s per seating at 100 Hz: about 1,000,000 lines
LENGTHS = (250_000, 500_000, 1_000_000)

_CHILD = """
import sys
from benchmarks.peak import peak_kb
from logger.cli.options import run_settings_from
from logger.config.profile import load_profile
from logger.live.replay import replay_file
p = load_profile(sys.argv[2])
kw = dict(label="", rejection="modified-z", z_cut=3.5, alpha=None, flat_first=None, phase_gap=None, max_spread=None,
          settle=None, band=None, lift=None, target_radius=None, focal_length=None, focal_ratio=None, diameter=None)
s = replay_file(sys.argv[1], p, run_settings_from(p, kw), sys.argv[3])
print(s["lines"], peak_kb())
"""


def write_recording(path: Path) -> int:
    stream = session(N_SEATINGS, rate_hz=100.0, seated_s=2.5, lifted_s=1.5, seed=42)
    w = RecWriter(path, 1_780_000_000.0, {"source": "invented benchmark stream"})
    for i, line in enumerate(stream.lines):
        w.write((i + 1) / 100.0, line[:-1])
    w.comment(end_comment((len(stream.lines) + 1) / 100.0))  # as a capture's recording ends
    w.close()
    return len(stream.lines)


def prefix(src: Path, dst: Path, n_records: int) -> None:
    """The first n records of a recording (with its header): a shorter run of the same kind."""
    with open(src) as f, open(dst, "w") as g:
        k = 0
        for line in f:
            if line[:1] != "#":
                k += 1
                if k > n_records:
                    break
            g.write(line)


_HEX = re.compile(rb"\\x([0-9a-f]{2})")


def _byte(m: re.Match) -> bytes:
    return bytes((int(m[1], 16),))


def baseline_loop(path: Path) -> int:
    """Exactly the issue's baseline: binary read, TAB split, regex unescape, first token, comma to dot, two floats."""
    n = 0
    sub = _HEX.sub
    with open(path, "rb") as f:
        for line in f:
            if line[:1] == b"#":
                continue
            t, _, field = line.rstrip(b"\n").partition(b"\t")
            tokens = sub(_byte, field).split()
            try:
                float(tokens[0].replace(b",", b".")) if tokens else None
            except ValueError:
                pass
            float(t)
            n += 1
    return n


def run(tmp: Path) -> list[dict]:
    from logger.cli.options import run_settings_from
    from logger.live.replay import replay_file

    print("replay: writing an invented ~1,000,000-line recording ...", flush=True)
    rec = tmp / "long.rec"
    n = write_recording(rec)
    profile = load_profile(PROFILE)
    kw = dict(label="", rejection="modified-z", z_cut=3.5, alpha=None, flat_first=None, phase_gap=None, max_spread=None,
              settle=None, band=None, lift=None, target_radius=None, focal_length=None, focal_ratio=None,
              diameter=None)
    baseline_loop(rec)  # warm the page cache for all
    best = dict(loop=float("inf"), batch=float("inf"), incremental=float("inf"))
    for k in range(3):  # best of three, interleaved
        t = time.perf_counter()
        assert baseline_loop(rec) == n
        best["loop"] = min(best["loop"], time.perf_counter() - t)
        for mode in ("batch", "incremental"):
            t = time.perf_counter()
            summary = replay_file(rec, profile, run_settings_from(profile, dict(kw)), tmp / f"replay-{mode}{k}",
                                  batch=mode == "batch")
            best[mode] = min(best[mode], time.perf_counter() - t)
            assert summary["lines"] == n
    lps = {k: n / v for k, v in best.items()}
    ratio, ratio_inc = lps["batch"] / lps["loop"], lps["incremental"] / lps["loop"]
    print(f"replay: {summary['seatings_total']} seatings found in {n} lines", flush=True)

    peaks = {}
    for length in LENGTHS:
        part = tmp / f"part{length}.rec"
        prefix(rec, part, length)
        out = subprocess.run([sys.executable, "-c", _CHILD, str(part), str(PROFILE), str(tmp / f"mem{length}")],
                             capture_output=True, text=True, check=True, cwd=ROOT, timeout=300)
        lines, maxrss_kb = map(int, out.stdout.split())
        assert lines == length, (lines, length)
        peaks[length] = maxrss_kb / 1024
        part.unlink()
    flat = max(peaks.values()) - min(peaks.values())
    return [
        dict(name="replay throughput (batch)", value=round(lps["batch"]), unit="lines/s",
             text=f"{lps['batch']:,.0f} lines/s ({n:,} lines, {best['batch']:.2f} s)", goal="-", met=True),
        dict(name="replay throughput (line by line, the reference)", value=round(lps["incremental"]), unit="lines/s",
             text=f"{lps['incremental']:,.0f} lines/s ({best['incremental']:.2f} s)", goal="-", met=True),
        dict(name="baseline loop (issue 17)", value=round(lps["loop"]), unit="lines/s",
             text=f"{lps['loop']:,.0f} lines/s ({best['loop']:.2f} s)", goal="-", met=True),
        dict(name="replay / baseline loop", value={"batch": round(ratio, 3), "line by line": round(ratio_inc, 3)},
             unit="ratio", text=f"batch {ratio:.2f}, line by line {ratio_inc:.2f}", goal=">= 1 (aim 3)",
             met=ratio >= 1.0),
        dict(name="replay peak memory (250k / 500k / 1M lines)", value={str(k): round(v, 1) for k, v in peaks.items()},
             unit="MB", text=" / ".join(f"{v:.0f}" for v in peaks.values()) + " MB",
             goal="flat in run length, < 200 MB",
             met=max(peaks.values()) < 200 and flat < 0.15 * min(peaks.values())),
    ]
