"""Fixtures shared by every test folder; helpers live in the importable package tests/helpers.

Hypothesis profiles: "ci" is loaded when the CI environment variable is set (to any value, as
hypothesis itself reads it; registered under hypothesis's own name "ci", it is also the one
hypothesis picks by itself on other CI markers);
it is derandomized (the examples follow from each test alone, so a failure in CI recurs on every
run and on a developer's machine with CI=1), uses a fixed number of examples where a test does not
set its own, keeps no example database and prints the reproduction blob of a failure
(@reproduce_failure).  Without CI the default profile draws fresh examples each run.
"""

from __future__ import annotations

import os

import pytest
from hypothesis import HealthCheck, settings

from tests.helpers.paths import EXAMPLE_PROFILE

settings.register_profile("ci", derandomize=True, max_examples=100, print_blob=True, database=None, deadline=None,
                          suppress_health_check=[HealthCheck.too_slow])
if "CI" in os.environ:
    settings.load_profile("ci")


@pytest.fixture
def profile():
    from logger.config.profile import load_profile

    return load_profile(EXAMPLE_PROFILE)
