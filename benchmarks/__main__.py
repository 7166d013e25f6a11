"""`python -m benchmarks`: run every benchmark, print the table, write results.json and results.md.

Each benchmark is bounded in time; the whole run takes a few minutes on two cores.
"""

from __future__ import annotations

import json
import platform
import sys
import tempfile
import time
from pathlib import Path

from . import analysis_bench, budget_study, capture_bench, grit_study, replay_bench, runs_bench, stand_bench

HERE = Path(__file__).resolve().parent


def main() -> int:
    t0 = time.perf_counter()
    figures: list[dict] = []
    with tempfile.TemporaryDirectory(prefix="saglog-bench-") as tmp:
        tmp = Path(tmp)
        for bench in (replay_bench.run, runs_bench.run, analysis_bench.run, capture_bench.run, stand_bench.run,
                      budget_study.run, grit_study.run):
            for fig in bench(tmp):
                figures.append(fig)
                print(f"  {fig['name']}: {fig['text']}   (goal: {fig['goal']})", flush=True)
    took = time.perf_counter() - t0
    meta = {"python": sys.version.split()[0], "machine": platform.machine(), "platform": platform.platform(),
            "date_utc": time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime()), "took_s": round(took, 1)}
    (HERE / "results.json").write_text(json.dumps({"meta": meta, "figures": figures}, indent=2) + "\n")
    rows = ["| figure | measured | goal | met |", "|---|---|---|---|"]
    rows += [f"| {f['name']} | {f['text']} | {f['goal']} | {'yes' if f['met'] else 'NO'} |" for f in figures]
    table = "\n".join(rows)
    (HERE / "results.md").write_text(
        f"# saglog benchmark results\n\n`make bench` on {meta['platform']}, Python {meta['python']}, "
        f"{meta['date_utc']} ({took:.0f} s).\n\n{table}\n")
    print()
    print(table)
    print(f"\nwrote {HERE / 'results.json'} and {HERE / 'results.md'} ({took:.0f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
