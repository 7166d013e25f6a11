"""Measured figures for saglog: `python -m benchmarks` (or `make bench`).

Benchmarks, not tests: they time things, print a table of figures next to
their goals, and write benchmarks/results.json and benchmarks/results.md.
The invented streams and the pseudo-terminal feeder in `feeder` are shared
with the fault suite (tests/live/test_faults.py).
"""
