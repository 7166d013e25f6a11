"""A real headless Chromium (Debian's chromium and chromium-driver, installed when missing), through selenium."""

from __future__ import annotations

import pytest

from tests.helpers import debian


@pytest.fixture(scope="session")
def browser():
    debian.ensure({"chromium": "chromium", "chromedriver": "chromium-driver"})
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = "/usr/bin/chromium"
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                "--window-size=390,844", "--no-first-run", "--disable-extensions"):
        options.add_argument(arg)
    driver = webdriver.Chrome(service=Service("/usr/bin/chromedriver"), options=options)
    driver.set_page_load_timeout(30)
    yield driver
    driver.quit()

