"""Replay throughput against a bare parse loop, and replay peak memory against run length.

The bare loop is the least any replay must do: read each record, split time
from text, unescape it (logger.formats.recording.unescape), match the same reading
regex as the decoder and make a float.  The replay does all that plus
seating detection, the analysis and the run folder.
"""

from __future__ import annotations

import subprocess
import sys
import time
from pathlib import Path

from logger.formats.decode import _READING
from logger.config.profile import load_profile
from logger.formats.recording import RecWriter, unescape

from .feeder import session

ROOT = Path(__file__).resolve().parents[1]
PROFILE = ROOT / "logger" / "config" / "profiles" / "example-three-ball.toml"
N_SEATINGS = 2500  # 4 s per seating at 100 Hz: about 1,000,000 lines
LENGTHS = (250_000, 500_000, 1_000_000)

_CHILD = """
import resource, sys
from logger.cli.options import run_settings_from
from logger.config.profile import load_profile
from logger.live.replay import replay_file
p = load_profile(sys.argv[2])
kw = dict(label="", rejection="modified-z", z_cut=3.5, alpha=None, flat_first=None, phase_gap=None, max_spread=None,
          settle=None, band=None, lift=None, target_radius=None, focal_length=None, focal_ratio=None, diameter=None)
s = replay_file(sys.argv[1], p, run_settings_from(p, kw), sys.argv[3])
print(s["lines"], resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def write_recording(path: Path) -> int:
    stream = session(N_SEATINGS, rate_hz=100.0, seated_s=2.5, lifted_s=1.5, seed=42)
    w = RecWriter(path, 1_780_000_000.0, {"source": "invented benchmark stream"})
    for i, line in enumerate(stream.lines):
        w.write((i + 1) / 100.0, line[:-1])
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


def bare_loop(path: Path) -> int:
    n = 0
    total = 0.0
    match = _READING.match
    with open(path, encoding="utf-8", newline="\n") as f:
        for line in f:
            if line[:1] == "#":
                continue
            tab = line.find("\t")
            float(line[:tab])
            m = match(unescape(line[tab + 1:-1]))
            if m is not None:
                total += float(m.group(2))
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
    bare_loop(rec)  # warm the page cache for both
    best_bare = best_replay = float("inf")
    for k in range(2):  # best of two, interleaved
        t = time.perf_counter()
        assert bare_loop(rec) == n
        best_bare = min(best_bare, time.perf_counter() - t)
        t = time.perf_counter()
        summary = replay_file(rec, profile, run_settings_from(profile, dict(kw)), tmp / f"replay{k}")
        best_replay = min(best_replay, time.perf_counter() - t)
        assert summary["lines"] == n
    bare_lps, replay_lps = n / best_bare, n / best_replay
    ratio = replay_lps / bare_lps
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
        dict(name="replay throughput", value=round(replay_lps), unit="lines/s",
             text=f"{replay_lps:,.0f} lines/s ({n:,} lines, {best_replay:.1f} s)", goal="-", met=True),
        dict(name="bare unescape+parse loop", value=round(bare_lps), unit="lines/s",
             text=f"{bare_lps:,.0f} lines/s ({best_bare:.1f} s)", goal="-", met=True),
        dict(name="replay / bare loop", value=round(ratio, 3), unit="ratio", text=f"{ratio:.2f}",
             goal=">= 0.50", met=ratio >= 0.5),
        dict(name="replay peak memory (250k / 500k / 1M lines)", value={str(k): round(v, 1) for k, v in peaks.items()},
             unit="MB", text=" / ".join(f"{v:.0f}" for v in peaks.values()) + " MB",
             goal="flat in run length, < 200 MB",
             met=max(peaks.values()) < 200 and flat < 0.15 * min(peaks.values())),
    ]
