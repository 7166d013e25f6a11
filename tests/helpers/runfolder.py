"""An independent run-folder writer for the tests of the readers, reports and history.

`write_run` writes a run folder in exactly the format that docs/reports.md
documents (the columns of logger/run/columns.py, summary.json's keys) from INVENTED
data: an invented 2400 mm concave mirror on an invented three-ball
spherometer, a made-up zero drift, noise and one grit outlier.  It uses the
standard csv and json modules, not pandas, so the round trip through
`load_run` is checked against an independent writer.  The tests of load_run, report
and history use it.
"""

from __future__ import annotations

import csv
import json
import math
from pathlib import Path

import numpy as np
import pandas as pd

from logger.analysis import geometry
from logger.run.columns import SAMPLES_COLUMNS, SEATINGS_COLUMNS

SEAT_FIELDS = [c.name for c in SEATINGS_COLUMNS]
SAMPLE_FIELDS = [c.name for c in SAMPLES_COLUMNS]


def iso(t0: pd.Timestamp, t_s: float) -> str:
    return (t0 + pd.Timedelta(seconds=t_s)).strftime("%Y-%m-%dT%H:%M:%S.%fZ")


def _cell(v):
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str) and v[:1] in ("=", "+", "-", "@"):
        return "'" + v  # the writer's guard against spreadsheet formulas (see logger.run.load)
    return repr(v) if isinstance(v, float) else str(v)


def write_csv(path: Path, fields, rows) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(fields)
        for r in rows:
            w.writerow([_cell(r.get(f)) for f in fields])


def write_run(
    path,
    *,
    label="mirror",
    started="2024-03-02T09:00:00Z",
    unit="mm",
    radius_true_mm=2400.0,
    n_surface=8,
    outlier=True,
    rate_hz=10.0,
    seated_s=3.0,
    summary=None,
    seed=0,
):
    """Write an INVENTED run folder; returns (summary, seatings rows, sample rows) as written.

    Timeline: 3 flats, `n_surface` surface seatings, 2 flats; each seating is
    2 s lifted, 1 s settling, `seated_s` seated.  Readings grow as the spindle
    is pushed in, so on the concave surface they sit one sagitta below the zero.
    `summary` overrides summary keys after the invented values are computed.
    """
    path = Path(path)
    path.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(seed)
    t0 = pd.Timestamp(started)
    q = 0.001
    a, b, c, ball_d = 50.0, 50.0, 50.0, 6.0  # invented spherometer
    r, rho = geometry.circumradius_mm(a, b, c), ball_d / 2
    s_true = geometry.probe_sagitta_mm(radius_true_mm, r, rho, "concave")
    zero0, drift_per_min = 0.012, 0.0006  # invented
    phases = ["flat"] * 3 + ["surface"] * n_surface + ["flat"] * 2
    grit = 4 + n_surface // 2 if outlier else -1  # seating numbers from 1
    samples, seatings = [], []
    t = 0.0
    dt = 1.0 / rate_hz
    for i, phase in enumerate(phases, start=1):
        for state, dur in (("lifted", 2.0), ("settling", 1.0), ("seated", seated_s)):
            seated = []
            for _ in range(int(round(dur * rate_hz))):
                zero = zero0 + drift_per_min * t / 60
                level = zero - (s_true if phase == "surface" else 0.0) + (0.05 if i == grit else 0.0)
                v = -6.0 if state == "lifted" else level + rng.normal(0, 0.0008)
                v = round(round(v / q) * q, 6)
                if state == "seated":
                    seated.append((t, v))
                samples.append(
                    {"time": iso(t0, t), "t_s": round(t, 6), "raw": f"{v:+.3f}\\x0d", "value_mm": v,
                     "state": state, "seating": i if state == "seated" else None}
                )
                t += dt
        ts, vs = np.array(seated).T
        seatings.append(
            {"index": i, "t_start_s": float(ts[0]), "t_end_s": float(ts[-1]), "phase": phase,
             "value_mm": float(vs.mean()), "spread_mm": round(float(vs.max() - vs.min()), 6), "n": len(vs),
             "start": iso(t0, ts[0]), "end": iso(t0, ts[-1])}
        )
    # two bad lines, as the decoder would keep them (raw text escaped)
    for k in (5, 40):
        samples[k].update(raw="\\x00\\xffE-01, \"x\"", value_mm=None, state="bad", seating=None)
    flats = [s for s in seatings if s["phase"] == "flat"]
    tf = np.array([(s["t_start_s"] + s["t_end_s"]) / 2 for s in flats])
    vf = np.array([s["value_mm"] for s in flats])
    slope, icpt = np.polyfit(tf, vf, 1)
    t_ref = float(tf.mean())
    zero_ref = float(icpt + slope * t_ref)
    surf_ok = []
    for s in seatings:
        tm = (s["t_start_s"] + s["t_end_s"]) / 2
        s["zero_mm"] = float(icpt + slope * tm)
        s["accepted"] = s["index"] != grit
        s["reason"] = "" if s["accepted"] else "outlier: modified z = 9.1 > 3.5"  # invented score
        s["score"] = 9.1 if s["index"] == grit else 0.4
        if s["phase"] == "surface":
            s["sagitta_mm"] = s["zero_mm"] - s["value_mm"]
            if s["accepted"]:
                surf_ok.append(s["sagitta_mm"])
    sag = float(np.mean(surf_ok))
    sag_u = float(np.std(surf_ok, ddof=1) / math.sqrt(len(surf_ok)))
    radius = geometry.radius_from_sagitta_mm(sag, r, rho, "concave")
    sens = geometry.dradius_dsagitta(sag, r)
    r_u = abs(sens) * math.hypot(sag_u, q / math.sqrt(12))
    summ = {
        "saglog_version": "0.1.0", "label": label, "status": "ok", "message": "Invented test run.",
        "surface": "concave", "unit": unit, "zero_mm": zero_ref, "zero_u_mm": 0.0003, "zero_t_ref_s": t_ref,
        "drift_mm_per_min": float(slope * 60), "drift_model": "linear", "sagitta_mm": sag, "sagitta_u_mm": sag_u,
        "radius_mm": radius, "radius_u_mm": r_u, "radius_U_mm": 2.1 * r_u, "coverage_factor": 2.1,
        "dof_eff": 12.0, "focal_length_mm": radius / 2, "focal_length_U_mm": 1.05 * r_u,
        "diameter_mm": 150.0, "focal_ratio": radius / 2 / 150.0, "target_radius_mm": 2438.4,
        "radius_to_go_mm": 2438.4 - radius, "sagitta_to_go_mm": None,
        "seatings_flat": len(flats), "seatings_surface": len(surf_ok),
        "seatings_rejected": sum(not s["accepted"] for s in seatings), "seatings_total": len(seatings),
        "bad_lines": 2, "lines": len(samples), "started_utc": iso(t0, 0.0), "ended_utc": iso(t0, t),
        "t_end_s": t, "same_count": False, "rejection": "modified-z",
        "spherometer": {"kind": "three-ball", "params_mm": {"a": a, "b": b, "c": c, "ball_diameter": ball_d}},
        "ring_radius_mm": r, "foot_radius_mm": rho, "resolution_mm": q,
        "budget": [
            {"name": "repeatability", "kind": "A", "u_mm": sag_u, "sensitivity": sens,
             "contribution_mm": abs(sens) * sag_u, "dof": len(surf_ok) - 1},
            {"name": "resolution", "kind": "B", "u_mm": q / math.sqrt(12), "sensitivity": sens,
             "contribution_mm": abs(sens) * q / math.sqrt(12), "dof": None},
        ],
        "gaps": [],
    }
    summ.update(summary or {})
    (path / "summary.json").write_text(json.dumps(summ, indent=1), encoding="utf-8")
    (path / "settings.json").write_text(json.dumps({"rejection": "modified-z", "cut": 3.5, "rate_hz": rate_hz}))
    write_csv(path / "seatings.csv", SEAT_FIELDS, seatings)
    write_csv(path / "samples.csv", SAMPLE_FIELDS, samples)
    (path / "stream.rec").write_text("# invented recording\n", encoding="utf-8")
    return summ, seatings, samples
