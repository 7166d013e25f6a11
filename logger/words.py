"""How counts and numbers read in what a person sees: plurals in good English, decimals without e-notation."""

from __future__ import annotations

import numpy as np


def plural(n, noun: str) -> str:
    """`noun` as said of n things: 'run' for 1, 'runs' for 0, 2 or 'n/a' (nouns whose plural adds an s)."""
    return noun if n == 1 else f"{noun}s"


def plain_number(x: float, digits: int = 6) -> str:
    """x to `digits` significant figures in plain decimals, never e-notation: an inch count reads 0.00005, not 5e-05.

    Trailing zeros go, as with format's 'g' (2400, 0.5), which it matches wherever 'g' writes no exponent.
    """
    return np.format_float_positional(float(x), precision=digits, unique=False, fractional=False, trim="-")
