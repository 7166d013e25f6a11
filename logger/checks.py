"""The one rule for numbers a user gives: finite, real, and (for most settings) positive.

The command line's parameter type (logger.cli.options.POSITIVE), the profile
and scenario readers, the sources and the reports all ask here, so a
setting means the same wherever it is given; each caller keeps its own
message, which names the option, file or key.
"""

from __future__ import annotations

import math


def is_number(value) -> bool:
    """A finite int or float (a bool is not a number here: TOML's `true` is no length)."""
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def is_positive(value, allow_zero: bool = False) -> bool:
    """A finite number above zero, or at least zero with `allow_zero`."""
    return is_number(value) and (value >= 0 if allow_zero else value > 0)
