"""Fixtures shared by every test folder; helpers live in the importable package tests/helpers."""

from __future__ import annotations

import pytest

from tests.helpers.paths import EXAMPLE_PROFILE


@pytest.fixture
def profile():
    from logger.config.profile import load_profile

    return load_profile(EXAMPLE_PROFILE)
