"""How counts and numbers read in what a person sees: plurals in good English, decimals without e-notation."""

from __future__ import annotations


def plural(n, noun: str) -> str:
    """`noun` as said of n things: 'run' for 1, 'runs' for 0, 2 or 'n/a' (nouns whose plural adds an s)."""
    return noun if n == 1 else f"{noun}s"
