"""Reports after the run: the one-run report, the history of many runs, and their plot style."""
