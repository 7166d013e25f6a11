"""Reading run folders back: typed tables, errors naming the path, ordering, the docs.

The folders come from an independent writer (tests/helpers/runfolder.py) that
uses the standard csv and json modules, not pandas.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest
from hypothesis import example, given, settings
from hypothesis import strategies as st

from logger.errors import UserError
from logger.run.columns import SAMPLES_COLUMNS
from logger.run.load import columns_markdown, load_run, load_runs, runs_table
from tests.helpers.paths import ROOT as REPO
from tests.helpers.runfolder import SAMPLE_FIELDS, SEAT_FIELDS, write_csv, write_run


# ---------------------------------------------------------------------------


def test_round_trip_types_and_values(tmp_path):
    summ, seats, samples = write_run(tmp_path / "run")
    run = load_run(tmp_path / "run")
    assert run.summary == summ
    assert run.settings["cut"] == 3.5
    sd = run.seatings
    assert list(sd.columns) == SEAT_FIELDS
    assert str(sd["start"].dtype) == "datetime64[ns, UTC]" or str(sd["start"].dt.tz) == "UTC"
    assert sd["accepted"].dtype == bool and sd["index"].dtype == np.int64 and sd["n"].dtype == np.int64
    assert sd["value_mm"].tolist() == [s["value_mm"] for s in seats]  # repr-written floats come back exactly
    assert sd["accepted"].tolist() == [s["accepted"] for s in seats]
    assert sd["reason"].tolist() == [s["reason"] for s in seats]
    # sagitta is empty for flats in the file and NaN in the frame
    flat = sd["phase"] == "flat"
    assert sd.loc[flat, "sagitta_mm"].isna().all() and sd.loc[~flat, "sagitta_mm"].notna().all()
    # times: the ISO text parsed as UTC equals the start time plus t_s
    t0 = pd.Timestamp("2024-03-02T09:00:00Z")
    expect = t0 + pd.to_timedelta(sd["t_start_s"], unit="s")
    assert (abs(sd["start"] - expect) < pd.Timedelta(microseconds=2)).all()

    sm = run.samples
    assert len(sm) == len(samples)
    assert sm["raw"].tolist() == [s["raw"] for s in samples]  # commas, quotes and \xHH kept as text
    bad = sm["state"] == "bad"
    assert bad.sum() == 2 and sm.loc[bad, "value_mm"].isna().all()
    assert sm["seating"].isna().tolist() == [s["seating"] is None for s in samples]
    assert sm["time"].dt.tz is not None


@settings(max_examples=40, deadline=None)
@given(
    # raw text as the writer escapes it: printable ASCII; a text that itself starts with an
    # apostrophe cannot be told from a guarded one, so it is left out
    raws=st.lists(
        st.text(alphabet=st.characters(min_codepoint=0x20, max_codepoint=0x7E), max_size=20).filter(
            lambda t: not t.startswith("'")
        ),
        min_size=1,
        max_size=8,
    ),
    values=st.lists(st.floats(allow_nan=False, allow_infinity=False, width=64), min_size=8, max_size=8),
)
@example(raws=["01", "1", "1.50", "-0"], values=[0.0] * 8)  # numbers as text: read_csv's categories would merge them
def test_samples_round_trip_property(tmp_path_factory, raws, values):
    """Any printable raw text (including 'NaN', '', ',', '"', '=1+1') stays text; any finite float comes back exactly."""
    d = tmp_path_factory.mktemp("prop")
    write_run(d, n_surface=2, outlier=False, seated_s=0.5)
    rows = [
        {"time": "2024-03-02T09:00:00Z", "t_s": float(i), "raw": raw, "value_mm": values[i], "state": "seated", "seating": 0}
        for i, raw in enumerate(raws)
    ]
    write_csv(d / "samples.csv", SAMPLE_FIELDS, rows)
    sm = load_run(d).samples
    assert sm["raw"].tolist() == raws
    assert sm["value_mm"].tolist() == values[: len(raws)]


def test_missing_folder_and_files_name_the_path(tmp_path):
    with pytest.raises(UserError, match="no such run folder"):
        load_run(tmp_path / "nowhere")
    for name in ("summary.json", "settings.json", "seatings.csv", "samples.csv"):
        d = tmp_path / name.replace(".", "_")
        write_run(d, n_surface=3, seated_s=0.5)
        (d / name).unlink()
        with pytest.raises(UserError) as exc:
            run = load_run(d)
            run.seatings, run.samples
        assert str(d / name) in str(exc.value) and "\n" not in str(exc.value)


def test_broken_contents_are_user_errors(tmp_path):
    d = tmp_path / "r"
    write_run(d, n_surface=3, seated_s=0.5)
    (d / "summary.json").write_text("{not json")
    with pytest.raises(UserError, match="summary.json: not valid JSON"):
        load_run(d)
    write_run(d, n_surface=3, seated_s=0.5)
    text = (d / "seatings.csv").read_text().replace(",true,", ",yes,", 1)
    (d / "seatings.csv").write_text(text)
    with pytest.raises(UserError, match="seatings.csv: column accepted: expected true or false"):
        load_run(d).seatings
    (d / "samples.csv").write_text("time,t_s,raw\n")
    with pytest.raises(UserError, match="samples.csv: missing columns value_mm, "):
        load_run(d).samples
    (d / "samples.csv").write_text(",".join(c.name for c in SAMPLES_COLUMNS[:-1]) + "\n")
    with pytest.raises(UserError, match=f"samples.csv: missing column {SAMPLES_COLUMNS[-1].name}$"):
        load_run(d).samples
    write_run(d, n_surface=3, seated_s=0.5, summary={"unit": "furlong"})
    with pytest.raises(UserError, match="unit"):
        load_run(d)


def test_load_runs_sorted_by_start_and_table(tmp_path):
    starts = ["2024-03-05T18:00:00Z", "2024-03-01T08:30:00+00:00", "2024-03-03T12:00:00Z"]
    dirs = []
    for i, s in enumerate(starts):
        dirs.append(tmp_path / f"run{i}")
        write_run(dirs[-1], started=s, n_surface=3, seated_s=0.5, label="mirror" if i else "tool",
                  summary={"radius_mm": None} if i == 2 else None)
    runs = load_runs(dirs)
    assert [r.path.name for r in runs] == ["run1", "run2", "run0"]
    table = runs_table(runs)
    assert list(table["started"]) == sorted(pd.Timestamp(s) for s in starts)
    assert table["label"].tolist() == ["mirror", "mirror", "tool"]
    assert math.isnan(table.loc[1, "radius_mm"]) and table.loc[0, "radius_mm"] > 0
    assert table["radius_U_mm"].dtype == np.float64


def test_top_level_import_resolves():
    import logger

    assert logger.load_run is load_run


def test_docs_hold_the_column_table_verbatim():
    # The one place the columns are documented is logger.run.load; the notes must carry it unchanged.
    notes = (REPO / "docs" / "reports.md").read_text(encoding="utf-8")
    assert columns_markdown() in notes


_ROW_TIMES = st.one_of(
    st.integers(0, 86_400_000_000).map(
        lambda us: (pd.Timestamp("2026-05-28T00:00:00Z") + pd.Timedelta(microseconds=us)).strftime(
            "%Y-%m-%dT%H:%M:%S.%fZ")),  # the writer's own form
    st.sampled_from(["2026-05-28T10:00:00Z", "2026-05-28 10:00:00.5+00:00", "2026-05-28T10:00:00.123+02:00"]),
)


@settings(max_examples=60, deadline=None)
@given(times=st.lists(_ROW_TIMES, min_size=1, max_size=30), blank=st.booleans(), final_lf=st.booleans(),
       block=st.sampled_from([40, 97, 1 << 22]))
def test_sample_times_are_what_pandas_reads(tmp_path_factory, times, blank, final_lf, block):
    # reference: pandas.read_csv and pandas.to_datetime(utc=True) of the time column; the loader
    # takes the writer's own form from the file's bytes and must give the same times, in any block
    # size, and fall back to pandas for any other form, a blank line or a last line without its LF
    import logger.run.load as load

    folder = tmp_path_factory.mktemp("times")
    write_run(folder)
    lines = [f"{t},{k * 0.01:.6f},\"+0.100 mm\",0.100000,lifted," for k, t in enumerate(times)]
    if blank:
        lines.insert(len(lines) // 2, "")
    body = "\n".join([",".join(SAMPLE_FIELDS), *lines]) + ("\n" if final_lf else "")
    (folder / "samples.csv").write_text(body)
    real = load._leading_times
    load._leading_times = lambda p, n: real(p, n, block)
    try:
        got = load_run(folder).samples["time"]
    finally:
        load._leading_times = real
    ref = pd.to_datetime(pd.read_csv(folder / "samples.csv")["time"], utc=True, format="ISO8601")
    assert got.tolist() == ref.tolist()
