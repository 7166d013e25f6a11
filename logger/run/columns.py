"""The run folder's file names and CSV columns, documented once.

The writer (logger.run.writer) takes its headers from here and the reader
(logger.run.load) its types, so the two cannot drift apart; docs/reports.md
carries `logger.run.load.columns_markdown()` verbatim.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Column:
    name: str
    kind: str  # "int", "float", "time", "bool", "text"
    doc: str


SEATINGS_COLUMNS = (
    Column("index", "int", "seating number, from 1 in the order seatings end"),
    Column("start", "time", "when the spherometer came to rest (ISO 8601 UTC)"),
    Column("end", "time", "when it was lifted again: the first reading that left it (ISO 8601 UTC)"),
    Column("t_start_s", "float", "`start` as seconds since the start of the stream"),
    Column("t_end_s", "float", "`end` as seconds since the start of the stream"),
    Column("phase", "text", "`flat` (on the reference flat, for the zero) or `surface`; in a mirror-against-tool "
           "run `concave` or `convex` for the two pieces"),
    Column("value_mm", "float", "the seating's reading: robust time-weighted mean of its settled samples"),
    Column("spread_mm", "float", "time-weighted standard deviation of those samples (how steady it was)"),
    Column("n", "int", "number of samples in the value"),
    Column("accepted", "bool", "`true` if the seating counts towards the result"),
    Column("reason", "text", "why it was rejected, e.g. `outlier: modified z = +7.2 beyond 3.5`; empty if accepted"),
    Column("zero_mm", "float", "the fitted zero at this seating's time (drift included)"),
    Column("sagitta_mm", "float", "surface seatings: the sagitta against `zero_mm`; empty for flats (and for a "
           "mirror-against-tool run without a flat)"),
    Column("score", "float", "the outlier statistic of the rejection method (e.g. modified z)"),
)

SAMPLES_COLUMNS = (
    Column("time", "time", "receipt time of the line (ISO 8601 UTC)"),
    Column("t_s", "float", "seconds since the start of the stream"),
    Column("raw", "text", "the line as received; bytes outside 0x20..0x7E and `\\` written `\\xHH`"),
    Column("value_mm", "float", "the decoded reading; empty for a bad line"),
    Column("state", "text", "`lifted`, `settling`, `seated` or `bad`"),
    Column("seating", "float", "`index` of the seating in progress while `state` is `seated`; empty otherwise (NaN when loaded)"),
)

SUMMARY_FILE, SEATINGS_FILE, SAMPLES_FILE, SETTINGS_FILE, RECORDING_FILE = (
    "summary.json",
    "seatings.csv",
    "samples.csv",
    "settings.json",
    "stream.rec",
)
REPORT_PICTURE, REPORT_TEXT = "report.png", "report.md"  # written by `saglog report`

TABLES = ((SEATINGS_FILE, SEATINGS_COLUMNS), (SAMPLES_FILE, SAMPLES_COLUMNS))  # the CSV files, as documented
