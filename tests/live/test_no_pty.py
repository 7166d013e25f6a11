"""Where there is no pseudo-terminal (Windows): demo and simulate fall back to a loopback TCP port.

The real commands run in subprocesses whose Python has the pty functions taken away before saglog
is imported: no `os.openpty`, no `select.poll`, and the modules pty, tty, termios and fcntl refuse
to import (pyserial is imported first, as it picks its platform back end by itself: serialwin32 on
Windows).  What remains is what a Windows machine offers saglog, so these runs are the fallback's
end-to-end test on this Linux machine.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys

from tests.helpers.paths import EXAMPLE_PROFILE, ROOT
from logger.simulator import load_scenario, simulate

POSIX_ONLY = ("pty", "tty", "termios", "fcntl")

NO_PTY = f"""
import os, select, sys
import serial, serial.urlhandler.protocol_socket  # pyserial's own platform choice, then its socket:// handler
del os.openpty
del select.poll
for name in {POSIX_ONLY!r}:
    sys.modules[name] = None  # import now raises ImportError
sys.argv[0] = "saglog"
from logger.cli.main import main
main()
"""


def run_without_pty(*args, timeout=150, **kw):
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.run([sys.executable, "-c", NO_PTY, *map(str, args)], capture_output=True, text=True,
                          timeout=timeout, env=env, **kw)


def test_demo_runs_end_to_end_through_the_loopback_fallback(tmp_path):
    out = tmp_path / "demo"
    r = run_without_pty("demo", "--out", out)
    assert r.returncode == 0, r.stderr[-3000:]
    assert "Traceback" not in r.stderr
    assert "a loopback TCP port (socket://127.0.0.1:" in r.stdout.splitlines()[0]
    summary = json.loads((out / "summary.json").read_text())
    c = simulate(load_scenario("demo-150-f8-fine")).truth["counts"]  # the invented session it played
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])
    assert summary["seatings_rejected"] == c["grit"]
    settings = json.loads((out / "settings.json").read_text())
    assert "socket://127.0.0.1:" in json.dumps(settings)  # captured through socket://, like a network bridge


SHORT_SESSION = """# Invented: two flats, three seatings on a concave surface, one flat.
name = "short-no-pty"
profile = "example-three-ball"
unit = "mm"
seed = 16
[surface]
kind = "concave"
radius = 2400.0
[plan]
flat_before = 2
surface = 3
flat_after = 1
seated = 2.0
lifted = 0.7
lead_in = 0.8
tail = 0.8
[stream]
rate = 40
suffix = " mm"
"""


def test_simulate_pty_serves_a_socket_url_that_capture_reads(tmp_path):
    truth_path, scenario = tmp_path / "truth.json", tmp_path / "short.toml"
    scenario.write_text(SHORT_SESSION)
    sim = subprocess.Popen([sys.executable, "-c", NO_PTY, "simulate", "--pty", "--scenario", str(scenario),
                            "--truth", str(truth_path)], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                           env=dict(os.environ, PYTHONPATH=str(ROOT)))
    try:
        url = sim.stdout.readline().strip()
        assert url.startswith("socket://127.0.0.1:"), (url, sim.stderr.read() if sim.poll() is not None else "")
        truth = json.loads(truth_path.read_text())
        surface = truth["counts"]["expected_accepted_surface"]
        out = tmp_path / "run"
        cap = run_without_pty("capture", "--port", url, "--profile", EXAMPLE_PROFILE, "--out", out,
                              "--seatings", surface)
        assert cap.returncode == 0, cap.stderr[-3000:]
        summary = json.loads((out / "summary.json").read_text())
        assert summary["seatings_surface"] == surface and summary["seatings_flat"] >= 1
    finally:
        sim.terminate()
        sim.wait(timeout=30)
    assert "no pseudo-terminal on this system: serving on socket://" in sim.stderr.read()


def test_simulate_pty_with_a_link_says_there_is_no_pty(tmp_path):
    r = run_without_pty("simulate", "--pty", "--link", tmp_path / "ttyVIRT", timeout=60)
    assert r.returncode == 2 and "no pseudo-terminal" in r.stderr and "Traceback" not in r.stderr, r.stderr


def test_no_posix_only_module_is_imported_outside_the_pty_code():
    """Every module of the package imports with pty, tty, termios and fcntl refused."""
    script = f"""
import pkgutil, sys, importlib
import serial
for name in {POSIX_ONLY!r}:
    sys.modules[name] = None
import logger
for m in pkgutil.walk_packages(logger.__path__, "logger."):
    if not m.name.endswith("__main__"):  # that one runs the command line
        importlib.import_module(m.name)
print("ok")
"""
    r = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, timeout=120,
                       env=dict(os.environ, PYTHONPATH=str(ROOT)))
    assert r.returncode == 0 and r.stdout.strip() == "ok", r.stderr[-3000:]
