"""The text of one samples.csv row, in two parts: the one definition both writers use.

The incremental writer (logger.run.writer.RunWriter) formats each row as it
comes; the batch replay (logger.live.batch) formats a block of rows at once.
Both call these functions (the batch path once per distinct line, state and
seating rather than once per row), so a change of format here changes both
and their files stay byte-identical.

A row is ``head + tail``: the head is the receipt time (ISO 8601 UTC, then
seconds since the start), the tail everything that follows from the line and
the detector's state.
"""

from __future__ import annotations

import re

# A signed reading as text ("-0.123 mm\x0d") is safe in a spreadsheet as it is.
_PLAIN_NUMBER = re.compile(r'[+-][ \t]*[0-9.,]*[ \t]*(mm|inch|in|")?[ \t]*(\\x0d)?', re.IGNORECASE)


def formula_safe(value: str) -> str:
    """Free text that a spreadsheet will not run as a formula.

    Text that a spreadsheet would run as a formula (starting with = + - @,
    tab or CR) gets a leading apostrophe, the usual guard (the OWASP note on
    CSV injection, from memory); a plain signed number is left alone.
    """
    if value[:1] in ("=", "+", "-", "@", "\t", "\r") and not _PLAIN_NUMBER.fullmatch(value):
        return "'" + value
    return value


def csv_text(value: str) -> str:
    """A free-text CSV field: quoted, and never a spreadsheet formula."""
    return '"' + formula_safe(value).replace('"', '""') + '"'


def seconds_text(t_s: float) -> str:
    """The `t_s` cell: seconds since the start, to the microsecond."""
    return f"{t_s:.6f}"


def sample_head(iso: str, t_s: float) -> str:
    """`time,t_s,` of a row; `iso` is the receipt time already formatted (logger.timestamps)."""
    return f"{iso},{seconds_text(t_s)},"


def sample_tail(text: str, value_mm: float | None, state: str, seating: int | None) -> str:
    """`raw,value_mm,state,seating` and the line end; `text` is the line escaped as in the recording."""
    if value_mm is None:  # a bad line: free text, guarded
        return f"{csv_text(text)},,{state},\n"
    # a reading: a number by construction, only quoted (decimal commas, inch marks)
    s = "" if seating is None else seating
    if '"' in text:
        text = text.replace('"', '""')
    return f'"{text}",{value_mm:.6f},{state},{s}\n'
