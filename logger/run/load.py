"""Read run folders back for analysis: `load_run`, `load_runs`, `runs_table`.

A run folder is the program's lasting output (summary.json, seatings.csv,
samples.csv, settings.json, stream.rec).  This module is the one reader of
it, so the report, the history and a user's own notebook all see the same
typed tables: times as UTC datetimes, `accepted` as bool, numbers as floats
with NaN where the file has an empty cell.  The columns are documented
once, in logger.run.columns; docs/reports.md holds `columns_markdown()`
verbatim and a test keeps the two identical.
Text cells may carry a leading apostrophe that keeps spreadsheets from
running them as formulas; the loader removes it.

The CSV tables are parsed on first use, so `load_runs` over many large runs
(the history plot needs only the summaries) stays quick.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pandas as pd

from logger.run.columns import (TABLES, Column, RECORDING_FILE, SAMPLES_COLUMNS, SAMPLES_FILE, SEATINGS_COLUMNS,
                                SEATINGS_FILE, SETTINGS_FILE, SUMMARY_FILE)
from logger.errors import UserError
from logger.units import check_unit


def columns_markdown() -> str:
    """The CSV column documentation as Markdown (copied verbatim into docs/reports.md)."""
    out = []
    for fname, cols in TABLES:
        out += [f"`{fname}` columns, in this order:", "", "| column | loaded as | meaning |", "|---|---|---|"]
        out += [f"| `{c.name}` | {c.kind} | {c.doc} |" for c in cols]
        out.append("")
    out.append(
        "Text cells that a spreadsheet would run as a formula (starting with `=`, `+`, `-`, `@`) are "
        "written with a leading apostrophe; `load_run` removes it."
    )
    return "\n".join(out) + "\n"


def _read_json(path: Path) -> dict:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise UserError(f"{path}: missing (not a complete run folder)") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise UserError(f"{path}: cannot read: {exc}") from None
    except json.JSONDecodeError as exc:
        raise UserError(f"{path}: not valid JSON: {exc}") from None
    if not isinstance(data, dict):
        raise UserError(f"{path}: expected a JSON object")
    return data


def _read_table(path: Path, columns: tuple[Column, ...], categories: tuple[str, ...] = ()) -> pd.DataFrame:
    """Read one CSV of the run folder into a typed DataFrame (all listed columns required).

    `categories`: text columns that repeat a few values over many rows
    (samples.csv's `raw` and `state`), kept as pandas categoricals of the
    text, parsed straight into categories: a fraction of the memory and
    time of a column of strings.  Times are read as bytes
    and parsed once, in one numpy conversion when they are written as the
    writer writes them (logger.timestamps).
    """
    dtype = {c.name: ("float64" if c.kind in ("float", "int") else "S27" if c.kind == "time"
                      else "category" if c.name in categories else str) for c in columns}
    try:
        df = pd.read_csv(path, dtype=dtype, keep_default_na=False, na_values=[""], engine="c")
    except FileNotFoundError:
        raise UserError(f"{path}: missing (not a complete run folder)") from None
    except pd.errors.EmptyDataError:
        raise UserError(f"{path}: empty file (no header line)") from None
    except (OSError, UnicodeDecodeError, ValueError, pd.errors.ParserError) as exc:
        raise UserError(f"{path}: cannot read: {' '.join(str(exc).split())}") from None
    missing = [c.name for c in columns if c.name not in df.columns]
    if missing:
        raise UserError(f"{path}: missing column(s) {', '.join(missing)}")
    for c in columns:
        try:
            col = df[c.name]
            df[c.name] = _typed(col, c)
        except (ValueError, TypeError) as exc:
            raise UserError(f"{path}: column {c.name}: {' '.join(str(exc).split())}") from None
    return df


def _typed(col: pd.Series, c: Column) -> pd.Series:
    """One column as its documented kind."""
    if c.kind == "int":
        if col.isna().any():
            raise ValueError("empty cell")
        return col.astype("int64")
    if c.kind == "time":
        return _times(col)
    if c.kind == "bool":
        return _parse_bool(col)
    if c.kind != "text":
        return col
    if isinstance(col.dtype, pd.CategoricalDtype):  # the same rules, once per distinct value
        if col.isna().any():
            col = col.cat.add_categories([""]).fillna("") if "" not in col.cat.categories else col.fillna("")
        return col.cat.rename_categories(lambda x: _unguard(pd.Series([x]))[0])
    return _unguard(col.fillna(""))


def _unguard(col: pd.Series) -> pd.Series:
    if col.str.startswith("'").any():
        col = col.str.replace(_FORMULA_GUARD, "", n=1, regex=True)
    return col


def _times(col: pd.Series) -> pd.Series:
    """ISO 8601 UTC times read as bytes: `YYYY-MM-DDTHH:MM:SS.ffffffZ` in one conversion, anything else by pandas."""
    raw = col.to_numpy()
    if raw.dtype == np.dtype("S27") and len(raw):
        grid = raw.view(np.uint8).reshape(len(raw), 27)
        if np.all(grid[:, 26] == ord("Z")) and np.all(grid[:, 10] == ord("T")):
            try:
                stamps = grid[:, :26].copy().view("S26").ravel().astype("datetime64[us]")
            except ValueError:
                stamps = None
            if stamps is not None:
                return pd.Series(stamps, index=col.index).dt.tz_localize("UTC")
    text = col.map(lambda b: b.decode("utf-8", "replace") if isinstance(b, bytes) else b)
    return pd.to_datetime(text, utc=True, format="ISO8601")


# The writer puts an apostrophe before text a spreadsheet would run as a formula
# (a cell starting with = + - @, tab or CR); the loaded table holds the text itself.
_FORMULA_GUARD = r"^'(?=[=+\-@\t\r])"


def _parse_bool(col: pd.Series) -> pd.Series:
    mapped = col.fillna("").str.strip().str.lower().map({"true": True, "false": False})
    if mapped.isna().any():
        bad = col[mapped.isna()].iloc[0]
        raise ValueError(f"expected true or false, got {bad!r}")
    return mapped.astype(bool)


def _utc(text) -> pd.Timestamp:
    """An ISO 8601 string from the summary as a UTC Timestamp (NaT when absent or unreadable)."""
    if not isinstance(text, str) or not text:
        return pd.NaT
    try:
        return pd.to_datetime(text, utc=True, format="ISO8601")
    except (ValueError, TypeError):
        return pd.NaT


class Run:
    """One run folder.

    `summary` and `settings` are dicts as stored; `samples` and `seatings`
    are typed DataFrames read on first access (or given directly, which is
    how a figure can be drawn from tables built in memory).
    """

    def __init__(self, path, summary: dict, settings: dict, samples=None, seatings=None):
        self.path = Path(path)
        self.summary = summary
        self.settings = settings
        self._samples = samples
        self._seatings = seatings

    @property
    def samples(self) -> pd.DataFrame:
        if self._samples is None:
            self._samples = _read_table(self.path / SAMPLES_FILE, SAMPLES_COLUMNS, categories=("raw", "state"))
        return self._samples

    @property
    def seatings(self) -> pd.DataFrame:
        if self._seatings is None:
            self._seatings = _read_table(self.path / SEATINGS_FILE, SEATINGS_COLUMNS)
        return self._seatings

    def trace_chunks(self, rows: int = 200_000):
        """(t_s, value_mm) arrays of samples.csv, a chunk at a time: a trace without the whole table in memory."""
        if self._samples is not None:
            yield self._samples["t_s"].to_numpy(float), self._samples["value_mm"].to_numpy(float)
            return
        path = self.path / SAMPLES_FILE
        try:
            for chunk in pd.read_csv(path, usecols=["t_s", "value_mm"], dtype="float64", chunksize=rows,
                                     keep_default_na=False, na_values=[""], engine="c"):
                yield chunk["t_s"].to_numpy(), chunk["value_mm"].to_numpy()
        except FileNotFoundError:
            raise UserError(f"{path}: missing (not a complete run folder)") from None
        except (OSError, UnicodeDecodeError, ValueError, pd.errors.ParserError) as exc:
            raise UserError(f"{path}: cannot read: {' '.join(str(exc).split())}") from None

    @property
    def recording_path(self) -> Path:
        return self.path / RECORDING_FILE

    @property
    def label(self) -> str:
        return str(self.summary.get("label") or "")

    @property
    def unit(self) -> str:
        """The unit the user sees lengths in (the profile's); files always hold mm."""
        unit = self.summary.get("unit") or "mm"
        return check_unit(unit, f"{self.path / SUMMARY_FILE}: unit")

    @property
    def started(self) -> pd.Timestamp:
        return _utc(self.summary.get("started_utc"))

    def value(self, key: str) -> float:
        """A numeric summary value as float, NaN when null or absent (for tables and plots)."""
        v = self.summary.get(key)
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            return math.nan
        return float(v)

    def __repr__(self) -> str:
        return f"Run({str(self.path)!r}, label={self.label!r}, started={self.started})"


def load_run(path) -> Run:
    """Open a run folder: reads summary.json and settings.json now, the CSVs on first use.

    A missing folder or file, or one that cannot be parsed, is a UserError
    naming the path.
    """
    p = Path(path)
    if not p.is_dir():
        raise UserError(f"{p}: no such run folder" if not p.exists() else f"{p}: not a folder")
    for name in (SEATINGS_FILE, SAMPLES_FILE):
        if not (p / name).is_file():
            raise UserError(f"{p / name}: missing (not a complete run folder)")
    run = Run(p, _read_json(p / SUMMARY_FILE), _read_json(p / SETTINGS_FILE))
    run.unit  # noqa: B018 -- validate the unit now, not halfway through a plot
    return run


def load_runs(paths) -> list[Run]:
    """Open several run folders, sorted by start time (runs without one last, in given order)."""
    runs = [load_run(p) for p in paths]

    def key(i: int):
        t = runs[i].started
        return (pd.isna(t), 0 if pd.isna(t) else t.value, i)

    return [runs[i] for i in sorted(range(len(runs)), key=key)]


RUNS_TABLE_KEYS = (
    "radius_mm",
    "radius_U_mm",
    "radius_u_mm",
    "focal_length_mm",
    "focal_length_U_mm",
    "sagitta_mm",
    "sagitta_u_mm",
    "zero_mm",
    "drift_mm_per_min",
    "target_radius_mm",
    "radius_to_go_mm",
    "seatings_flat",
    "seatings_surface",
    "seatings_rejected",
    "bad_lines",
)


def runs_table(runs) -> pd.DataFrame:
    """One row per run: started, ended, label, status, surface, unit, the main results (mm), path."""
    rows = []
    for r in runs:
        row = {
            "started": r.started,
            "ended": _utc(r.summary.get("ended_utc")),
            "label": r.label,
            "status": r.summary.get("status") or "",
            "surface": r.summary.get("surface") or "",
            "unit": r.unit,
        }
        row.update({k: r.value(k) for k in RUNS_TABLE_KEYS})
        row["path"] = str(r.path)
        rows.append(row)
    cols = ["started", "ended", "label", "status", "surface", "unit", *RUNS_TABLE_KEYS, "path"]
    df = pd.DataFrame(rows, columns=cols)
    for c in ("started", "ended"):
        df[c] = pd.to_datetime(df[c], utc=True)
    return df.astype({k: np.float64 for k in RUNS_TABLE_KEYS})
