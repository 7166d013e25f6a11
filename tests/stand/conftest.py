"""A real headless Chromium (Debian's chromium and chromium-driver, installed when missing), through selenium."""

from __future__ import annotations

import pytest

from tests.helpers.stand import chromium


@pytest.fixture(scope="session")
def browser():
    driver = chromium()
    yield driver
    driver.quit()
