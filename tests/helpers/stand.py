"""Talking to the stand page as a client would: plain HTTP requests and an event-stream reader, on loopback."""

from __future__ import annotations

import http.client
import json
import os
import subprocess
import sys
import threading
import time
from urllib.parse import urlsplit

from tests.helpers.paths import ROOT


def request(port: int, target: str, method: str = "GET", host: str | None = None, timeout: float = 10.0):
    """One request with the path sent exactly as given (no normalising) and the Host header chosen; -> (status, headers, body)."""
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=timeout)
    try:
        conn.putrequest(method, target, skip_host=True, skip_accept_encoding=True)
        conn.putheader("Host", host if host is not None else f"127.0.0.1:{port}")
        conn.endheaders()
        resp = conn.getresponse()
        body = b"" if target.startswith("/events") and resp.status == 200 else resp.read()
        return resp.status, {k.lower(): v for k, v in resp.getheaders()}, body
    finally:
        conn.close()


class EventReader(threading.Thread):
    """Reads /events to the end, keeping every state it receives (the `data:` of each message event)."""

    def __init__(self, port: int, query: str = ""):
        super().__init__(daemon=True)
        self.port, self.query = port, query
        self.states: list[dict] = []
        self.error: BaseException | None = None

    def run(self) -> None:
        conn = http.client.HTTPConnection("127.0.0.1", self.port, timeout=60)
        try:
            conn.request("GET", "/events" + self.query)
            resp = conn.getresponse()
            event = "message"
            for line in resp:
                line = line.decode().rstrip("\n")
                if line.startswith("event:"):
                    event = line[6:].strip()
                elif line.startswith("data:") and event == "message":
                    self.states.append(json.loads(line[5:]))
                elif not line:
                    event = "message"
        except (OSError, http.client.HTTPException) as exc:
            self.error = exc
        finally:
            conn.close()


def saglog_env() -> dict:
    return dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))


def start_capture(port: str, out, *extra) -> tuple[subprocess.Popen, str]:
    """`saglog capture --web ...` in a subprocess; returns it and the URL from its `page:` line."""
    proc = subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", str(port), "--out", str(out),
                             "--view", "plain", "--no-bells", *map(str, extra)], env=saglog_env(), cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    line = proc.stdout.readline()
    if not line.startswith("page: "):
        proc.kill()
        raise RuntimeError(f"no page line: {line!r} {proc.stderr.read()}")
    threading.Thread(target=proc.stdout.read, daemon=True).start()  # keep the log flowing
    return proc, line.split(" ", 1)[1].strip()


def url_port(url: str) -> int:
    return urlsplit(url).port


def start_simulator(*args) -> tuple[subprocess.Popen, str]:
    """`saglog simulate --pty ...`; returns it and the pty path it prints first."""
    proc = subprocess.Popen([sys.executable, "-m", "logger", "simulate", "--pty", *map(str, args)], env=saglog_env(),
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    return proc, proc.stdout.readline().strip()


def wait_for(cond, timeout_s: float, what: str, every_s: float = 0.02):
    deadline = time.monotonic() + timeout_s
    while True:
        value = cond()
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(every_s)


def phone(driver, width: int, height: int, scheme: str = "dark") -> None:
    """Chromium shows a phone's viewport (CSS pixels, two device pixels each) in the given colour scheme."""
    driver.execute_cdp_cmd("Emulation.setDeviceMetricsOverride",
                           {"width": width, "height": height, "deviceScaleFactor": 2, "mobile": True})
    driver.execute_cdp_cmd("Emulation.setEmulatedMedia",
                           {"features": [{"name": "prefers-color-scheme", "value": scheme}]})


# What a person sees on the page, read in one go.
READ_PAGE = """
const t = (id) => document.getElementById(id).textContent;
return {radius: t("radius"), unit: t("radius-unit"), flat: t("n-flat"), surface: t("n-surface"),
        rejected: t("n-rejected"), verdict: t("verdict-text"), state: t("state"),
        link: document.getElementById("stand").dataset.link,
        lost_shown: getComputedStyle(document.getElementById("link")).display !== "none",
        over_shown: getComputedStyle(document.getElementById("over")).display !== "none"};
"""


def chromium():
    """Debian's headless Chromium through selenium (chromium and chromium-driver installed when missing)."""
    from tests.helpers import debian

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
    return driver
