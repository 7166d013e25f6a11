"""Helpers the tests import: exact constructions, simulated runs, an independent run-folder writer, paths."""
