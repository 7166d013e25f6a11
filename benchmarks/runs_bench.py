"""Big runs after the replay: load_run against a plain read_csv, report's peak memory, history over 200 runs.

Each load and the report run in a fresh interpreter (time and peak resident
memory of that process, best of three), so neither inherits the other's
memory; the figures include the interpreter and pandas themselves.
"""

from __future__ import annotations

import json
import shutil
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
N_HISTORY = 200

_LOAD = """
import sys, time
from benchmarks.peak import peak_kb
import pandas as pd
t = time.perf_counter()
if sys.argv[1] == "read_csv":
    df = pd.read_csv(sys.argv[2] + "/samples.csv")
else:
    from logger import load_run
    df = load_run(sys.argv[2]).samples
print(time.perf_counter() - t, peak_kb(), len(df))
"""

_REPORT = """
import sys
from benchmarks.peak import peak_kb
from logger.reports.report import write_report
write_report(sys.argv[1])
print(peak_kb())
"""


def _child(code: str, *args: str) -> list[str]:
    out = subprocess.run([sys.executable, "-c", code, *args], capture_output=True, text=True, check=True, cwd=ROOT,
                         timeout=600)
    return out.stdout.split()


def _load(how: str, run_dir: Path) -> tuple[float, float]:
    """Best of three: seconds and peak MB of one process that loads the samples."""
    runs = [_child(_LOAD, how, str(run_dir)) for _ in range(3)]
    return min(float(r[0]) for r in runs), min(int(r[1]) for r in runs) / 1024


def _history(tmp: Path, run_dir: Path) -> float:
    """200 run folders (the big run's summary and settings, small CSVs), `saglog history` over them in-process."""
    from logger.reports.history import write_history

    folders = []
    summary = json.loads((run_dir / "summary.json").read_text())
    for k in range(N_HISTORY):
        d = tmp / f"hist{k:03d}"
        d.mkdir()
        summary.update(started_utc=f"2026-{1 + k // 28:02d}-{1 + k % 28:02d}T09:00:00.000000Z",
                       radius_mm=(summary.get("radius_mm") or 2400.0) + k * 0.1)
        (d / "summary.json").write_text(json.dumps(summary))
        shutil.copy(run_dir / "settings.json", d / "settings.json")
        shutil.copy(run_dir / "seatings.csv", d / "seatings.csv")
        (d / "samples.csv").write_text((run_dir / "samples.csv").open().readline())
        folders.append(d)
    t = time.perf_counter()
    write_history(folders, tmp / "history.png")
    return time.perf_counter() - t


def run(tmp: Path) -> list[dict]:
    run_dir = next(p for p in sorted(tmp.glob("replay-batch*")) if (p / "samples.csv").exists())
    csv_s, csv_mb = _load("read_csv", run_dir)
    load_s, load_mb = _load("load_run", run_dir)
    report_mb = int(_child(_REPORT, str(run_dir))[0]) / 1024
    hist_s = _history(tmp, run_dir)
    return [
        dict(name="load_run samples (1M rows)", value={"s": round(load_s, 3), "MB": round(load_mb)}, unit="s, MB",
             text=f"{load_s:.2f} s, {load_mb:.0f} MB", goal="no slower and smaller than read_csv",
             met=load_s <= csv_s and load_mb < csv_mb),
        dict(name="pandas.read_csv samples.csv, defaults", value={"s": round(csv_s, 3), "MB": round(csv_mb)},
             unit="s, MB", text=f"{csv_s:.2f} s, {csv_mb:.0f} MB", goal="(reference)", met=True),
        dict(name="report peak memory (1M samples)", value=round(report_mb), unit="MB", text=f"{report_mb:.0f} MB",
             goal="< 200 MB", met=report_mb < 200),
        dict(name=f"history over {N_HISTORY} run folders", value=round(hist_s, 2), unit="s", text=f"{hist_s:.2f} s",
             goal="< 2 s", met=hist_s < 2.0),
    ]
