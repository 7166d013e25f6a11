"""Through a real ser2net 4 (Debian's package), as users run a serial port on the network.

The virtual indicator serves its pseudo-terminal; ser2net opens it as its serial side (`serialdev`)
and offers it on loopback twice: raw TCP (read with socket://) and telnet with RFC 2217 (read with
rfc2217://, no options in the URL).  ser2net is installed with apt-get when missing (CI runs as
root on a fresh machine); the tests are skipped, saying why, only when that cannot be done.
"""

from __future__ import annotations

import json
import shutil
import socket
import subprocess
import time

import psutil
import pytest

from logger.formats.recording import read_recording
from logger.simulator import PtyServer
from logger.transport.serial_source import pyserial_url
from tests.helpers import debian
from tests.helpers.paths import EXAMPLE_PROFILE, run_saglog
from tests.helpers.simrun import short_bridge_run

CONFIG = """%YAML 1.1
---
connection: &saglog-raw
  accepter: tcp,127.0.0.1,{raw}
  connector: serialdev,{device},9600n81,local
connection: &saglog-rfc2217
  accepter: telnet(rfc2217),tcp,127.0.0.1,{rfc}
  connector: serialdev,{device},9600n81,local
"""


def _which_ser2net() -> str | None:
    return shutil.which("ser2net") or shutil.which("ser2net", path="/usr/sbin:/sbin")  # PATH may lack sbin


@pytest.fixture(scope="module")
def ser2net_exe():
    if _which_ser2net() is None:
        try:
            debian.ensure({"ser2net": "ser2net"})
        except (RuntimeError, subprocess.SubprocessError, OSError) as exc:
            pytest.skip(f"ser2net (Debian package ser2net) is missing and cannot be installed here: {exc}")
    exe = _which_ser2net()
    assert exe, "apt-get installed ser2net but it is not in /usr/sbin"
    version = subprocess.run([exe, "-v"], capture_output=True, text=True, timeout=30).stdout
    assert "version 4." in version, version  # the configuration below is ser2net 4's YAML
    return exe


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _listening(pid: int, ports: set[int]) -> bool:
    conns = psutil.Process(pid).net_connections(kind="tcp")
    return ports <= {c.laddr.port for c in conns if c.status == psutil.CONN_LISTEN}


@pytest.fixture
def bridge(ser2net_exe, tmp_path):
    """A fresh session on a pty behind ser2net; yields (run, raw port, RFC 2217 port)."""
    run = short_bridge_run()
    with PtyServer(run) as server:
        ports = {"raw": _free_port(), "rfc": _free_port()}
        config = tmp_path / "ser2net.yaml"
        config.write_text(CONFIG.format(device=server.path, **ports))
        proc = subprocess.Popen([ser2net_exe, "-n", "-u", "-c", str(config), "-P", str(tmp_path / "ser2net.pid")],
                                stdout=subprocess.PIPE, stderr=subprocess.STDOUT, text=True)
        try:
            # ready when both ports listen (asking psutil: a probe connection would open the pty and start the run)
            while not _listening(proc.pid, set(ports.values())):
                assert proc.poll() is None, proc.stdout.read()
                time.sleep(0.05)
            yield run, ports["raw"], ports["rfc"]
        finally:
            proc.terminate()
            proc.wait(timeout=30)


def _capture_and_check(run, url, out):
    surface = run.truth["counts"]["expected_accepted_surface"]
    r = run_saglog("capture", "--port", url, "--profile", EXAMPLE_PROFILE, "--out", out, "--seatings", surface,
                   "--wait", 5, timeout=120)
    assert r.returncode == 0, r.stderr
    summary = json.loads((out / "summary.json").read_text())
    assert summary["seatings_surface"] == surface
    assert summary["seatings_flat"] == run.scenario.flat_before  # stopped before the closing flats
    assert summary["bad_lines"] == 0  # no telnet negotiation leaks into the stream
    # The lines arrived unchanged and in order, none lost between the first and where the capture stopped;
    # a few at the very start may go: opening an RFC 2217 port purges the bridge's buffers (RFC 2217, PURGE-DATA).
    _, records = read_recording(out / "stream.rec")
    got = [raw.rstrip(b"\r\n") for _, raw, _ in records]
    sent = [data.rstrip(b"\r\n") for _, data in run.lines()]
    lead_in_lines = int(run.scenario.lead_in_s * run.scenario.rate_hz)
    assert got and any(sent[k:k + len(got)] == got for k in range(lead_in_lines)), got[:5]


def test_capture_through_ser2net_raw_tcp(bridge, tmp_path):
    run, raw, _ = bridge
    _capture_and_check(run, f"socket://127.0.0.1:{raw}", tmp_path / "raw")


def test_capture_through_ser2net_rfc2217_out_of_the_box(bridge, tmp_path):
    run, _, rfc = bridge
    _capture_and_check(run, f"rfc2217://127.0.0.1:{rfc}", tmp_path / "rfc2217")


def test_rfc2217_url_on_a_raw_port_says_what_to_try(bridge, tmp_path):
    _, raw, _ = bridge
    r = run_saglog("capture", "--port", f"rfc2217://127.0.0.1:{raw}", "--profile", EXAMPLE_PROFILE,
                   "--out", tmp_path / "refused", timeout=120)
    lines = r.stderr.strip().splitlines()
    assert r.returncode == 2 and len(lines) == 1 and "Traceback" not in r.stderr, r.stderr
    assert "telnet(rfc2217)" in lines[0] and "socket://" in lines[0], lines[0]


@pytest.mark.parametrize("url, opened", [
    ("rfc2217://bridge:2217", "rfc2217://bridge:2217?ign_set_control"),
    ("rfc2217://bridge:2217?timeout=5", "rfc2217://bridge:2217?timeout=5&ign_set_control"),
    ("rfc2217://bridge:2217?ign_set_control", "rfc2217://bridge:2217?ign_set_control"),
    ("socket://bridge:23", "socket://bridge:23"),
    ("/dev/ttyUSB0", "/dev/ttyUSB0"),
])
def test_only_rfc2217_urls_get_ign_set_control_once(url, opened):
    assert pyserial_url(url) == opened
