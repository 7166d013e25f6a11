"""`saglog report RUN_DIR`: one picture and one page that explain a run.

report.png shows what happened, so a surprising radius can be traced back
to its seatings: the reading trace with each seated window shaded by phase,
every seating's value (rejected ones in another shape and colour, with the
reason beside them), the fitted zero and its drift; below, the flats close
up against the zero line, and the accepted sagittas with their mean and its
standard uncertainty.  A header states the result, the counts, the
spherometer and the settings.  report.md is the same in words, with the
uncertainty budget table.

Lengths are shown in the run's unit (the profile's); the files stay in mm.
A trace of a million samples is drawn from its envelope per pixel column
(first, last, lowest and highest sample: logger.reports.envelope), read in
chunks, so it looks the same as every point drawn and memory stays flat;
seating markers are never thinned.
"""

from __future__ import annotations

import math
import textwrap
from pathlib import Path

import numpy as np
import pandas as pd

from logger.reports import plotstyle as ps
from logger.reports.envelope import TraceEnvelope
from logger.checks import is_number
from logger.config.profile import Spherometer, profile_words
from logger.live.present import bad_lines_words, to_go, to_go_words
from logger.run.columns import REPORT_PICTURE, REPORT_TEXT
from logger.run.load import Run, load_run
from logger.units import from_mm
from logger.words import plain_number

TRACE_COLUMNS = 2600  # envelope columns of the trace: twice the figure's width in pixels (13 in at 100 dpi)
MAX_HATCHED_WINDOWS = 400  # beyond this, seated windows are drawn without hatching
MAX_REASON_NOTES = 25  # rejected seatings annotated in the figure; all are in report.md


# --- formatting ------------------------------------------------------------


def fmt_len(value_mm, unit: str, digits: int = 6) -> str:
    """A length in the display unit with `digits` significant figures, or 'n/a'."""
    if not is_number(value_mm):
        return "n/a"
    return f"{from_mm(value_mm, unit):.{digits}g} {unit}"


def fmt_pm(value_mm, u_mm, unit: str) -> str:
    """value ± u in the display unit, rounded to two significant figures of u."""
    if not is_number(value_mm):
        return "not estimable"
    if not is_number(u_mm) or u_mm <= 0:
        return fmt_len(value_mm, unit)
    v, u = from_mm(value_mm, unit), from_mm(u_mm, unit)
    d = max(0, 1 - math.floor(math.log10(u)))
    return f"{v:.{d}f} ± {u:.{d}f} {unit}"


def _num(summary: dict, key: str) -> float:
    v = summary.get(key)
    return float(v) if is_number(v) else math.nan


def _spherometer_text(s: dict, unit: str) -> str:
    sph = s.get("spherometer") or {}
    parts = []
    if sph.get("kind"):
        parts.append(Spherometer(kind=sph["kind"], params_mm=dict(sph.get("params_mm") or {})).describe(unit))
    for key, name in (("ring_radius_mm", "ring radius"), ("foot_radius_mm", "foot radius")):
        if is_number(s.get(key)):
            parts.append(f"{name} {fmt_len(s[key], unit)}")
    q = s.get("resolution_mm")
    if is_number(q):  # positional digits: an inch count reads 0.0000394 in, not 3.93701e-05
        parts.append(f"one count {plain_number(from_mm(q, unit), 3)} {unit}"
                     + (f" ({fmt_len(q, 'mm')})" if unit != "mm" else ""))
    return ", ".join(parts) or "not recorded"


def _settings_text(settings: dict) -> str:
    """settings.json in words: the version, the profile and its unit, the rejection method and its parameter."""
    parts = [f"saglog {settings['saglog_version']}"] if settings.get("saglog_version") else []
    if settings.get("profile"):
        parts.append(f"profile {profile_words(settings['profile'])}" + (f" (in {settings['profile_unit']})"
                                                          if settings.get("profile_unit") else ""))
    analysis = settings.get("analysis") or {}
    if analysis.get("rejection"):
        limit = ", ".join(f"{name.replace('_', ' ')} {analysis[name]:g}" for name in ("z_cut", "alpha")
                          if is_number(analysis.get(name)))
        parts.append(f"rejection {analysis['rejection']}" + (f" ({limit})" if limit else ""))
    return ", ".join(parts) or "defaults"


def header_lines(run: Run, unit: str) -> list[str]:
    """The result in a few lines: what the header of report.png and report.md say."""
    s = run.summary
    k, nu = _num(s, "coverage_factor"), _num(s, "dof_eff")
    cov = ", ".join(x for x in (f"k = {k:.2f}" if math.isfinite(k) else "", f"ν_eff = {nu:.0f}" if math.isfinite(nu) else "") if x)
    r_line = f"radius of curvature R = {fmt_pm(s.get('radius_mm'), s.get('radius_U_mm'), unit)}"
    if is_number(s.get("radius_U_mm")):
        r_line += f" (expanded, ~95 %{', ' + cov if cov else ''})"
    r_line += f"   focal length f = {fmt_pm(s.get('focal_length_mm'), s.get('focal_length_U_mm'), unit)}"
    if is_number(s.get("focal_ratio")):
        r_line += f"   f/{s['focal_ratio']:.2f}"
    target = ""
    if is_number(s.get("target_radius_mm")):
        words = to_go_words(s)[0]
        target = (f"target R {fmt_len(s['target_radius_mm'], unit)}, "
                  f"radius {words} {fmt_len(to_go(s, 'radius_to_go_mm'), unit, 4)}")
        if is_number(s.get("sagitta_to_go_mm")):
            target += f", sagitta {words} {fmt_len(to_go(s, 'sagitta_to_go_mm'), unit, 4)}"
    drift = _num(s, "drift_mm_per_min")
    z_line = (
        f"sagitta s = {fmt_pm(s.get('sagitta_mm'), s.get('sagitta_u_mm'), unit)} (standard u)"
        f"   zero {fmt_pm(s.get('zero_mm'), s.get('zero_u_mm'), unit)}"
    )
    if math.isfinite(drift):
        z_line += f", drift {from_mm(drift, unit):+.3g} {unit}/min ({s.get('drift_model') or 'no model'})"
    counts = (
        f"seatings: {s.get('seatings_flat', 'n/a')} flat, {s.get('seatings_surface', 'n/a')} "
        f"surface accepted, {s.get('seatings_rejected', 'n/a')} rejected"
        f" ({s.get('rejection') or 'no method'}) of {s.get('seatings_total', 'n/a')}"
        f"; {bad_lines_words(s.get('bad_lines', 'n/a'), s.get('lines', 'n/a'))}"
    )
    if s.get("same_count"):
        counts += "; every seating showed the same count (resolution term kept)"
    if is_number(s.get("rejection_shift_mm")):
        counts += f"; a seating must be off by {fmt_len(s['rejection_shift_mm'], unit, 4)} to be rejected"
    when = run.started
    span = _num(s, "t_end_s")
    when_text = "start not recorded" if pd.isna(when) else when.strftime("%Y-%m-%d %H:%M:%S UTC")
    if math.isfinite(span):
        when_text += f", {span / 60:.1f} min"
    return [
        f"{run.label or 'run'}: {s.get('status') or 'status unknown'}. {s.get('message') or ''}".strip(),
        r_line,
        *([target] if target else []),
        z_line,
        counts,
        f"spherometer: {_spherometer_text(s, unit)}",
        f"settings: {_settings_text(run.settings)}; {when_text}",
    ]


# --- drawing ---------------------------------------------------------------


def trace_points(run: Run, t_end_s: float, columns: int = TRACE_COLUMNS) -> tuple[np.ndarray, np.ndarray]:
    """The readings to draw: every one when `columns` is 0, else their M4 envelope (logger.reports.envelope)."""
    if not columns:
        chunks = list(run.trace_chunks())
        t = np.concatenate([c[0] for c in chunks]) if chunks else np.empty(0)
        v = np.concatenate([c[1] for c in chunks]) if chunks else np.empty(0)
        return t[~np.isnan(v)], v[~np.isnan(v)]
    env = TraceEnvelope(0.0, t_end_s, columns)
    for t, v in run.trace_chunks():
        env.add(t, v)
    return env.points()


def _break_at_gaps(x: np.ndarray, y: np.ndarray, gaps) -> tuple[np.ndarray, np.ndarray]:
    """Insert NaN at each stream gap so the trace is not drawn across missing data."""
    starts = [g["t_start_s"] for g in gaps or [] if is_number(g.get("t_start_s"))]
    if not starts:
        return x, y
    at = np.searchsorted(x, np.asarray(starts, dtype=float), side="right")
    return np.insert(x.astype(float), at, np.nan), np.insert(y.astype(float), at, np.nan)


def zero_at(summary: dict, t_s: np.ndarray) -> np.ndarray | None:
    """The fitted zero at times t_s: zero_mm + drift_mm_per_min * (t - zero_t_ref_s) / 60."""
    zero = _num(summary, "zero_mm")
    if not math.isfinite(zero):
        return None
    drift = _num(summary, "drift_mm_per_min")
    t_ref = _num(summary, "zero_t_ref_s")
    drift = drift if math.isfinite(drift) else 0.0
    t_ref = t_ref if math.isfinite(t_ref) else 0.0
    return zero + drift * (np.asarray(t_s, dtype=float) - t_ref) / 60.0


def make_report_figure(run: Run, unit: str | None = None, trace_columns: int = TRACE_COLUMNS):
    """Build the report Figure (not saved), so callers and tests can inspect it.

    `trace_columns=0` draws every reading instead of the envelope (to compare the two pictures).
    """
    unit = unit or run.unit
    s, st = run.summary, run.seatings
    fig = ps.new_figure(13, 9.5)
    grid = fig.add_gridspec(3, 2, height_ratios=[0.5, 1.35, 1.0])
    head = fig.add_subplot(grid[0, :], gid="header")
    trace = fig.add_subplot(grid[1, :], gid="trace")
    flats = fig.add_subplot(grid[2, 0], gid="zero")
    sag = fig.add_subplot(grid[2, 1], gid="sagitta")
    _draw_header(head, header_lines(run, unit))

    t_end = _num(s, "t_end_s")
    if not math.isfinite(t_end):
        t_end = max((float(np.nanmax(t)) for t, _ in run.trace_chunks() if len(t)), default=0.0)
    seat = _Seatings(st, from_mm(1.0, unit))  # mm -> display unit (linear)
    tt = np.array([0.0, max(t_end, 0.0)])
    z = zero_at(s, tt)
    _draw_trace(trace, s, trace_points(run, t_end, trace_columns), seat, tt, z, unit)
    _draw_flats(flats, s, seat, tt, z, unit)
    _draw_sagittas(sag, s, seat, unit)
    return fig


class _Seatings:
    """The seatings table as the panels draw it: mid times (min), values in the display unit, masks."""

    def __init__(self, st: pd.DataFrame, k: float):
        self.table, self.k = st, k
        self.mid_min = ((st["t_start_s"] + st["t_end_s"]) / 2 / 60).to_numpy()
        self.val = st["value_mm"].to_numpy(dtype=float) * k
        self.acc = st["accepted"].to_numpy(dtype=bool)
        self.is_flat = (st["phase"] == "flat").to_numpy()


HEADER_COLUMNS = 150  # monospace characters that fit across the figure at the header's size


def _draw_header(head, lines: list[str]) -> None:
    """The title, then the facts wrapped to the figure's width (a long path must not run off the picture)."""
    head.axis("off")
    head.text(0, 1, lines[0], va="top", ha="left", fontsize=12, fontweight="bold", transform=head.transAxes)
    body = [part for line in lines[1:] for part in textwrap.wrap(line, HEADER_COLUMNS, subsequent_indent="  ")]
    head.text(0, 0.72, "\n".join(body), va="top", ha="left", fontsize=9 if len(body) <= 6 else 8,
              family="monospace", transform=head.transAxes, linespacing=1.4 if len(body) <= 6 else 1.25)


def _draw_trace(trace, s: dict, points, seat: _Seatings, tt: np.ndarray, z, unit: str) -> None:
    """The reading trace, the seated windows, every seating and the fitted zero."""
    k, st = seat.k, seat.table
    t, v = points
    xd, yd = _break_at_gaps(t, v, s.get("gaps"))
    trace.plot(xd / 60, yd * k, gid="trace-line", label="readings", **ps.TRACE)
    if not len(t):
        trace.text(0.5, 0.5, "no readings in this run", transform=trace.transAxes, ha="center", fontsize=12)
    for phase, style in (("flat", ps.FLAT_WINDOW), ("surface", ps.SURFACE_WINDOW)):
        w = st[st["phase"] == phase]
        if len(w) > MAX_HATCHED_WINDOWS:  # hatching thousands of thin windows costs seconds, shows nothing
            style = {key: val for key, val in style.items() if key != "hatch"}
        if len(w):
            spans = list(zip(w["t_start_s"] / 60, (w["t_end_s"] - w["t_start_s"]) / 60))
            trace.broken_barh(spans, (0, 1), transform=trace.get_xaxis_transform(), gid=f"windows-{phase}",
                              label=f"seated on the {phase}", **style)
    for g in s.get("gaps") or []:
        if is_number(g.get("t_start_s")) and is_number(g.get("t_end_s")):
            trace.axvspan(g["t_start_s"] / 60, g["t_end_s"] / 60, color=ps.GREY, alpha=0.2, gid="gap")

    acc, is_flat = seat.acc, seat.is_flat
    for mask, gid, style, name in (
        (acc & is_flat, "seatings-flat", ps.FLAT_SEATING, "flat seating"),
        (acc & ~is_flat, "seatings-surface", ps.SURFACE_SEATING, "surface seating"),
        (~acc, "seatings-rejected", ps.REJECTED_SEATING, "rejected seating"),
    ):
        trace.plot(seat.mid_min[mask], seat.val[mask], gid=gid, label=f"{name} ({int(mask.sum())})", **style)
    _annotate_rejected(trace, st[~acc], seat.mid_min[~acc], seat.val[~acc])

    if z is not None:
        trace.plot(tt / 60, z * k, gid="zero-drift", label=f"fitted zero ({s.get('drift_model') or 'no model'})", **ps.ZERO_LINE)
    trace.set_xlabel("time since start (min)")
    trace.set_ylabel(f"indicator reading ({unit})")
    trace.set_title("readings, seated windows and seatings", loc="left", fontsize=10)
    trace.legend(loc="upper left", bbox_to_anchor=(1.0, 1.0), fontsize=8, frameon=False)


def _draw_flats(flats, s: dict, seat: _Seatings, tt: np.ndarray, z, unit: str) -> None:
    """The flats close up against the zero line and its standard uncertainty."""
    k, fm, acc = seat.k, seat.is_flat, seat.acc
    flats.plot(seat.mid_min[fm & acc], seat.val[fm & acc], gid="flats-accepted", **ps.FLAT_SEATING)
    flats.plot(seat.mid_min[fm & ~acc], seat.val[fm & ~acc], gid="flats-rejected", **ps.REJECTED_SEATING)
    if z is not None:
        flats.plot(tt / 60, z * k, gid="zero-drift-close", label="fitted zero", **ps.ZERO_LINE)
        zu = _num(s, "zero_u_mm")
        if math.isfinite(zu):
            flats.fill_between(tt / 60, (z - zu) * k, (z + zu) * k, gid="zero-band", label="± u of the zero", **ps.BAND)
        flats.legend(loc="best", fontsize=8)
    flats.set_xlabel("time since start (min)")
    flats.set_ylabel(f"reading on the flat ({unit})")
    flats.set_title("zero on the reference flat", loc="left", fontsize=10)


def _draw_sagittas(sag, s: dict, seat: _Seatings, unit: str) -> None:
    """The accepted sagittas with their mean and its standard uncertainty."""
    k, st, acc, is_flat = seat.k, seat.table, seat.acc, seat.is_flat
    sm_mask = acc & ~is_flat & st["sagitta_mm"].notna().to_numpy()
    sag.plot(seat.mid_min[sm_mask], st["sagitta_mm"].to_numpy(dtype=float)[sm_mask] * k, gid="sagittas",
             label=f"accepted ({int(sm_mask.sum())})", **ps.SURFACE_SEATING)
    mean, u = _num(s, "sagitta_mm"), _num(s, "sagitta_u_mm")
    if s.get("surface") == "pair":  # a mirror against its tool: sagitta_mm is the two pieces' sum, no mean here
        mean = math.nan
    if math.isfinite(mean):
        sag.axhline(mean * k, gid="sagitta-mean", label="mean", **ps.MEAN_LINE)
        if math.isfinite(u):
            sag.axhspan((mean - u) * k, (mean + u) * k, gid="sagitta-band", label="mean ± u (standard)", **ps.BAND)
    n_rej = int((~acc & ~is_flat).sum())
    sag.set_title(f"surface sagittas{f' ({n_rej} rejected not shown)' if n_rej else ''}", loc="left", fontsize=10)
    sag.set_xlabel("time since start (min)")
    sag.set_ylabel(f"sagitta ({unit})")
    if sm_mask.any() or math.isfinite(mean):
        sag.legend(loc="best", fontsize=8)


def _annotate_rejected(ax, rejected: pd.DataFrame, x: np.ndarray, y: np.ndarray) -> None:
    for j, (reason, xi, yi) in enumerate(zip(rejected["reason"], x, y)):
        if j == MAX_REASON_NOTES:
            ax.text(0.99, 0.02, f"+{len(x) - j} more rejected: see {REPORT_TEXT}", transform=ax.transAxes,
                    ha="right", fontsize=7, color=ps.VERMILLION, gid="reason-more")
            break
        ax.annotate(reason or "rejected", (xi, yi), xytext=(6, 8 + 11 * (j % 3)), textcoords="offset points",
                    fontsize=7, color=ps.VERMILLION, gid="reason",
                    arrowprops=dict(arrowstyle="-", color=ps.VERMILLION, linewidth=0.6))


# --- the page --------------------------------------------------------------


def report_markdown(run: Run, unit: str | None = None) -> str:
    """report.md: the header, the rejected seatings and the uncertainty budget, in Markdown."""
    unit = unit or run.unit
    s = run.summary
    lines = header_lines(run, unit)
    out = [f"# Run report: {run.label or run.path.name}", "", f"**{lines[0]}**", ""]
    out += [f"- {line}" for line in lines[1:]]
    rejected = run.seatings[~run.seatings["accepted"]]
    if len(rejected):
        out += ["", "## Rejected seatings", "", "| seating | phase | reading | reason |", "|---|---|---|---|"]
        out += [
            f"| {r.index} | {r.phase} | {fmt_len(r.value_mm, unit)} | {r.reason or 'rejected'} |"
            for r in rejected.itertuples(index=False)
        ]
    budget = s.get("budget") or []
    out += ["", "## Uncertainty budget of the radius of curvature", ""]
    if budget:
        out += [
            "| input | type | standard uncertainty | sensitivity dR/dx | contribution to R | degrees of freedom |",
            "|---|---|---|---|---|---|",
        ]
        for b in budget:
            sens = b.get("sensitivity")
            dof = b.get("dof")
            out.append(
                f"| {b.get('name', '?')} | {b.get('kind') or ''} | {fmt_len(b.get('u_mm'), unit, 3)} | "
                f"{f'{sens:.4g}' if is_number(sens) else 'n/a'} | {fmt_len(b.get('contribution_mm'), unit, 3)} | "
                f"{f'{dof:g}' if is_number(dof) else '∞'} |"
            )
        k = _num(s, "coverage_factor")
        out.append(f"| **combined** | | | | {fmt_len(s.get('radius_u_mm'), unit, 3)} | {fmt_dof(s.get('dof_eff'))} |")
        out.append(
            f"| **expanded** (k = {k:.2f}) | | | | {fmt_len(s.get('radius_U_mm'), unit, 3)} | |"
            if math.isfinite(k) else f"| **expanded** | | | | {fmt_len(s.get('radius_U_mm'), unit, 3)} | |"
        )
    else:
        out.append("No budget: the radius was not estimable in this run.")
    out += ["", f"Lengths in {unit}; the run's files hold millimetres. Figure: {REPORT_PICTURE}.", ""]
    return "\n".join(out)


def fmt_dof(dof) -> str:
    return f"{dof:.1f}" if is_number(dof) else "∞"


def write_report(run_dir, unit: str | None = None) -> tuple[Path, Path]:
    """Write RUN_DIR/report.png and RUN_DIR/report.md; returns their paths."""
    run = load_run(run_dir)
    png = ps.save_figure(make_report_figure(run, unit), run.path / REPORT_PICTURE)
    md = ps.write_text(run.path / REPORT_TEXT, report_markdown(run, unit))
    return png, md
