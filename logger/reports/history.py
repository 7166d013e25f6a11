"""`saglog history RUN_DIR... --out FILE.png`: the radius across grinding sessions.

Session after session the question is how far the curve still is from the
radius wanted, and whether the tool keeps up with the mirror.  The figure
shows radius ± U of each run against its start time, mirror and tool runs
in different colours, shapes and line styles, with the target and a band.
FILE.csv next to it holds the same numbers (mm).

The plain-language trend ("about N more sessions at the current rate") is
said only when the data carry it: at least three runs with a radius, a
target, a least-squares slope per session whose t statistic clears the
two-sided 5 % Student t quantile (the test scipy.stats.linregress reports as
its p-value), every step going the slope's way (or back by no more than the
two runs' combined U), and the slope heading towards the target.  Otherwise
it says the trend is not clear, and why.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd
from scipy import stats

from logger.checks import is_positive
from logger.reports import plotstyle as ps
from logger.errors import UserError
from logger.run.rows import formula_safe
from logger.run.load import load_runs, runs_table
from logger.units import from_mm, to_mm
from logger.words import plural

MIN_RUNS_FOR_TREND = 3
TREND_CONFIDENCE = 0.95  # two-sided, for the slope's t test

HISTORY_COLUMNS = ("started", "label", "kind", "status", "surface", "radius_mm", "radius_U_mm", "radius_u_mm",
                   "focal_length_mm", "target_radius_mm", "radius_to_go_mm", "path")


def run_kind(label: str, surface: str) -> str:
    """'mirror' or 'tool' from the label's words; failing that, concave is a mirror, convex a tool."""
    words = set(re.findall(r"[a-z]+", (label or "").lower()))
    if "tool" in words:
        return "tool"
    if "mirror" in words:
        return "mirror"
    return {"concave": "mirror", "convex": "tool"}.get(surface or "", "other")


def history_table(runs, target_radius_mm: float | None = None) -> pd.DataFrame:
    """One row per run in time order: start, label, kind, radius ± U (mm), the target and what is left.

    The target is the one given, else the latest run's summary target (the same for every row);
    radius_to_go_mm = radius - target (as in summary.json: positive while the radius is still too long).
    """
    t = runs_table(runs)
    t["kind"] = [run_kind(lab, sur) for lab, sur in zip(t["label"], t["surface"])]
    if target_radius_mm is None:
        known = t["target_radius_mm"].dropna()
        target_radius_mm = float(known.iloc[-1]) if len(known) else math.nan
    t["target_radius_mm"] = float(target_radius_mm)
    t["radius_to_go_mm"] = t["radius_mm"] - t["target_radius_mm"]
    return t[list(HISTORY_COLUMNS)].reset_index(drop=True)


@dataclass(frozen=True)
class Trend:
    kind: str
    supported: bool
    sentence: str
    slope_mm_per_session: float = math.nan
    t_stat: float = math.nan
    sessions_left: int | None = None


def trend(table: pd.DataFrame, kind: str, target_mm: float | None, band_mm: float, unit: str) -> Trend:
    """The trend of one kind of run towards the target, as a sentence (see the module docstring)."""
    rows = table[(table["kind"] == kind) & table["radius_mm"].notna()]
    r = rows["radius_mm"].to_numpy(dtype=float)
    U = np.nan_to_num(rows["radius_U_mm"].to_numpy(dtype=float), nan=0.0)
    n = len(r)

    def unclear(why: str, **kw) -> Trend:
        return Trend(kind, False, f"{kind}: trend not clear ({why}).", **kw)

    if n < MIN_RUNS_FOR_TREND:
        return unclear(f"{n} run{'s' if n != 1 else ''} with a radius; at least {MIN_RUNS_FOR_TREND} needed")
    if target_mm is None:
        return unclear("no target radius; give --target-radius")
    to_go = target_mm - r[-1]
    if abs(to_go) <= band_mm:
        return Trend(kind, False, f"{kind}: at the target: the last radius is within "
                                  f"{from_mm(band_mm, unit):.3g} {unit} of it.")
    fit = stats.linregress(np.arange(n, dtype=float), r)
    slope = float(fit.slope)
    t_stat = math.inf if fit.stderr == 0 and slope != 0 else (slope / fit.stderr if fit.stderr else 0.0)
    t_crit = float(stats.t.ppf(0.5 + TREND_CONFIDENCE / 2, n - 2))
    kw = dict(slope_mm_per_session=slope, t_stat=t_stat)
    if not abs(t_stat) >= t_crit:
        return unclear(f"change per session not significantly different from zero: |t| = {abs(t_stat):.2g}, "
                       f"{t_crit:.3g} needed with {n} runs", **kw)
    steps = np.diff(r) * math.copysign(1.0, slope)
    slack = np.hypot(U[1:], U[:-1])
    if np.any(steps < -slack):
        return unclear("the radius went back and forth by more than its uncertainty", **kw)
    if math.copysign(1.0, slope) != math.copysign(1.0, to_go):
        return unclear("the radius is moving away from the target", **kw)
    left = max(1, math.ceil(round(to_go / slope, 6)))  # rounded first: 3.0000000001 sessions is 3
    per = from_mm(abs(slope), unit)
    return Trend(kind, True, f"{kind}: about {left} more session{'s' if left != 1 else ''} at the current rate "
                             f"({per:.3g} {unit} per session, {from_mm(abs(to_go), unit):.4g} {unit} to go).",
                 sessions_left=left, **kw)


def default_band_mm(table: pd.DataFrame) -> float:
    """Without a stated tolerance: the typical (median) expanded U of the runs, or 0."""
    u = table["radius_U_mm"].dropna()
    return float(u.median()) if len(u) else 0.0


def make_history_figure(table: pd.DataFrame, target_mm: float | None, band_mm: float, unit: str,
                        trends: list[Trend] | None = None, band_label: str = "tolerance"):
    """Radius ± U against start time per kind of run, the target line and band; returns the Figure."""
    k = from_mm(1.0, unit)
    fig = ps.new_figure(10, 6)
    ax = fig.add_subplot(gid="history")
    shown = table[table["radius_mm"].notna() & table["started"].notna()]
    for kind, style in ps.KIND_STYLE.items():
        rows = shown[shown["kind"] == kind]
        if not len(rows):
            continue
        x = rows["started"].dt.tz_convert("UTC").dt.tz_localize(None).to_numpy()
        err = rows["radius_U_mm"].fillna(0).to_numpy() * k
        ax.errorbar(x, rows["radius_mm"].to_numpy() * k, yerr=err, capsize=4, gid=f"runs-{kind}",
                    label=f"{kind} runs ({len(rows)}), ± U", **style)
    if target_mm is not None:
        ax.axhline(target_mm * k, gid="target", label=f"target {target_mm * k:.5g} {unit}", **ps.TARGET_LINE)
        if band_mm > 0:
            ax.axhspan((target_mm - band_mm) * k, (target_mm + band_mm) * k, gid="target-band",
                       label=f"target ± {band_mm * k:.3g} {unit} ({band_label})", **ps.TARGET_BAND)
    left_out = len(table) - len(shown)
    if left_out:
        ax.text(0.01, 0.01, f"{left_out} {plural(left_out, 'run')} without a radius or start time not shown",
                transform=ax.transAxes, fontsize=8, gid="left-out")
    ax.set_xlabel("start of run (UTC)")
    ax.set_ylabel(f"radius of curvature ({unit})")
    ax.set_title("\n".join(t.sentence for t in trends or []) or "radius across sessions", loc="left", fontsize=10)
    if ax.get_legend_handles_labels()[0]:
        ax.legend(loc="best", fontsize=8)
    fig.autofmt_xdate()
    return fig


def write_history(run_dirs, out_png, target_radius: float | None = None, tolerance: float | None = None,
                  unit: str | None = None) -> tuple[Path, Path, list[Trend]]:
    """Load the runs, write FILE.png and FILE.csv, return their paths and the trend per kind.

    `target_radius` and `tolerance` are in `unit` (default: the latest run's unit).
    """
    out_png = Path(out_png)
    if out_png.suffix.lower() != ".png":
        raise UserError(f"--out {out_png}: the history picture must be a .png file")
    runs = load_runs(run_dirs)
    unit = unit or runs[-1].unit
    for name, v in (("--target-radius", target_radius), ("--tolerance", tolerance)):
        if v is not None and not is_positive(v):
            raise UserError(f"{name} {v}: must be a positive length in {unit}")
    table = history_table(runs, None if target_radius is None else to_mm(target_radius, unit))
    target_mm = float(table["target_radius_mm"].iloc[0])
    target_mm = target_mm if math.isfinite(target_mm) else None
    if tolerance is not None:
        band_mm, band_label = to_mm(tolerance, unit), "tolerance"
    else:
        band_mm, band_label = default_band_mm(table), "typical U of the runs"
    kinds = [k for k in ps.KIND_STYLE if (table["kind"] == k).any()]
    trends = [trend(table, k, target_mm, band_mm, unit) for k in kinds]
    fig = make_history_figure(table, target_mm, band_mm, unit, trends, band_label)
    png = ps.save_figure(fig, out_png)
    csv_out = table.assign(started=table["started"].map(lambda t: "" if pd.isna(t) else t.isoformat()))
    for col in ("label", "kind", "status", "surface", "path"):  # free text: never a spreadsheet formula
        csv_out[col] = csv_out[col].map(lambda x: x if not isinstance(x, str) else formula_safe(x))
    csv_path = ps.write_text(out_png.with_suffix(".csv"), csv_out.to_csv(index=False, lineterminator="\n"))
    return png, csv_path, trends
