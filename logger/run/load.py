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
from logger.words import plural


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


def _read_table(path: Path, columns: tuple[Column, ...], categories: tuple[str, ...] = (),
                lead_time: bool = False) -> pd.DataFrame:
    """Read one CSV of the run folder into a typed DataFrame (all listed columns required).

    `categories`: text columns that repeat a few values over many rows
    (samples.csv's `raw` and `state`), kept as pandas categoricals of the
    text, parsed straight into categories: a fraction of the memory and
    time of a column of strings (read again as text in the rare file where
    every value of such a column looks like a number).  `lead_time`: the first column is a time
    (samples.csv), taken from the file's bytes in one numpy conversion
    when every row has it as the writer writes it (`_leading_times`), at a
    fraction of the cost of a CSV column.
    """
    dtype = {c.name: ("float64" if c.kind in ("float", "int") else "category" if c.name in categories else str)
             for c in columns}
    try:
        header = pd.read_csv(path, nrows=0, engine="c").columns
        missing = [c.name for c in columns if c.name not in header]
        if missing:
            raise UserError(f"{path}: missing {plural(len(missing), 'column')} {', '.join(missing)}")
        rest = [c.name for c in columns[1:]] if lead_time else None
        df = pd.read_csv(path, dtype=dtype, usecols=rest, keep_default_na=False, na_values=[""], engine="c")
        for name in categories:  # read_csv infers the categories' type: "01" and "1" would both be 1
            if not pd.api.types.is_string_dtype(df[name].cat.categories):
                df[name] = pd.read_csv(path, usecols=[name], dtype=str, keep_default_na=False, na_values=[""],
                                       engine="c")[name].astype("category")
        if lead_time:
            times = _leading_times(path, len(df))
            if times is None:  # written some other way: the column read as any other
                times = pd.read_csv(path, dtype=dtype, usecols=[columns[0].name], keep_default_na=False,
                                    na_values=[""], engine="c")[columns[0].name]
            df.insert(0, columns[0].name, times)
    except FileNotFoundError:
        raise UserError(f"{path}: missing (not a complete run folder)") from None
    except pd.errors.EmptyDataError:
        raise UserError(f"{path}: empty file (no header line)") from None
    except (OSError, UnicodeDecodeError, ValueError, pd.errors.ParserError) as exc:
        raise UserError(f"{path}: cannot read: {' '.join(str(exc).split())}") from None
    for c in columns:
        try:
            df[c.name] = _typed(df[c.name], c)
        except (ValueError, TypeError) as exc:
            raise UserError(f"{path}: column {c.name}: {' '.join(str(exc).split())}") from None
    return df


def _leading_times(path: Path, n_rows: int, block_bytes: int = 1 << 22) -> pd.Series | None:
    """The first cell of every data row as UTC times, straight from the file's bytes, a block at a time.

    Only when every row starts with `YYYY-MM-DDTHH:MM:SS.ffffffZ,` (as the
    writer writes it) and there are exactly `n_rows` of them (no blank or
    broken lines that pandas would read otherwise); None else.
    """
    out = np.empty(n_rows, "datetime64[us]")
    k = 0
    with open(path, "rb") as f:
        f.readline()  # the header
        carry = b""
        while True:
            block = f.read(block_bytes)
            data = carry + block
            cut = len(data) if not block else data.rfind(b"\n") + 1
            data, carry = data[:cut], data[cut:]
            if data:
                arr = np.frombuffer(data, np.uint8)
                ends = np.flatnonzero(arr == 10)
                starts = np.concatenate(([0], ends + 1))
                starts = starts[starts < len(arr)]
                if k + len(starts) > n_rows:
                    return None
                cells = np.lib.stride_tricks.sliding_window_view(np.concatenate((arr, np.zeros(28, np.uint8))), 28)[starts]
                if not ((cells[:, 10] == ord("T")) & (cells[:, 26] == ord("Z")) & (cells[:, 27] == ord(","))).all():
                    return None
                try:
                    out[k:k + len(starts)] = cells[:, :26].copy().view("S26").ravel().astype("datetime64[us]")
                except ValueError:
                    return None
                k += len(starts)
            if not block:
                break
    return pd.Series(out, copy=False).dt.tz_localize("UTC") if k == n_rows else None


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
    """ISO 8601 times as UTC datetimes (samples.csv's own column arrives parsed already, `_leading_times`)."""
    if isinstance(col.dtype, pd.DatetimeTZDtype):
        return col
    return pd.to_datetime(col, utc=True, format="ISO8601")


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
            self._samples = _read_table(self.path / SAMPLES_FILE, SAMPLES_COLUMNS, categories=("raw", "state"),
                                        lead_time=True)
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
