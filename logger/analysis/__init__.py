"""Analysis: readings -> seatings -> phases, zero and drift, rejection, the result and its uncertainty.

Pure functions and small incremental objects, millimetres throughout.
"""
