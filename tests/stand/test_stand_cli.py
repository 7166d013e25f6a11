"""`saglog capture --web / --web-key / --speak` as a user runs them: real subprocesses, real sockets, a real pty.

Exit status and the one-line error follow the contract (CONTRACT.md, "Exit
status" and "The stand page"); the QR code is checked by decoding it back
from the terminal's half-block characters and comparing with the printed URL
(zbarimg from Debian's zbar-tools is the outside decoder).
"""

from __future__ import annotations

import json
import os
import pty
import re
import select
import socket
import subprocess
import sys
import time

from tests.helpers import debian
from tests.helpers.paths import EXAMPLE_PROFILE, ROOT, run_saglog
from tests.helpers.stand import request, saglog_env, start_capture, start_simulator, url_port, wait_for

GONE = "/dev/saglog-no-such-device"


def one_line_error(r, words: str) -> None:
    assert r.returncode == 2, (r.returncode, r.stderr)
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and words in lines[0] and "Traceback" not in r.stderr, r.stderr


def test_a_port_in_use_is_one_line_exit_2_and_nothing_is_started(tmp_path):
    taken = socket.create_server(("127.0.0.1", 0))
    try:
        r = run_saglog("capture", "--port", GONE, "--out", tmp_path / "run", "--profile", EXAMPLE_PROFILE,
                       "--web", f"127.0.0.1:{taken.getsockname()[1]}", "--wait", "0")
    finally:
        taken.close()
    one_line_error(r, "is in use")
    assert not (tmp_path / "run").exists()  # failed before the capture began: no run folder


def test_a_foreign_host_and_bad_values_are_one_line_exit_2(tmp_path):
    for web, words in (("192.0.2.1:8080", "not an address of this machine"), ("70000", "0 to 65535"),
                       ("no-such-host.invalid:80", "not a name or address")):
        one_line_error(run_saglog("capture", "--port", GONE, "--out", tmp_path / "run", "--profile", EXAMPLE_PROFILE,
                                  "--web", web), words)
    one_line_error(run_saglog("capture", "--port", GONE, "--out", tmp_path / "run", "--profile", EXAMPLE_PROFILE,
                              "--web", "0", "--web-key", "short"), "--web-key")


def test_loopback_page_needs_no_key_and_shows_the_wait_for_the_device(tmp_path):
    proc, url = start_capture(GONE, tmp_path / "run", "--profile", EXAMPLE_PROFILE, "--web", "127.0.0.1:0",
                              "--wait", "20")
    try:
        assert re.fullmatch(r"http://127\.0\.0\.1:\d+/", url)
        state = wait_for(lambda: json.loads(request(url_port(url), "/state.json")[2]), 10, "the state")
        assert state["state"] == "waiting for device"
    finally:
        proc.terminate()
        proc.wait(30)


def read_pty(fd: int, timeout_s: float = 30) -> str:
    """What the capture wrote to its terminal up to a second's quiet after the page line (the URL and its QR code)."""
    out, deadline = b"", time.monotonic() + timeout_s
    while time.monotonic() < deadline:
        ready, _, _ = select.select([fd], [], [], 1.0)
        if not ready:
            if b"page: " in out:
                break
            continue
        try:
            out += os.read(fd, 65536)
        except OSError:
            break
    return out.decode(errors="replace")


def qr_from_half_blocks(text: str):
    """Modules (True = light) from segno's compact terminal drawing: each character is two rows."""
    rows = [line for line in text.splitlines() if set(line) & set("█▀▄")]
    width = max(len(line) for line in rows)
    grid = []
    for line in rows:
        line = line.ljust(width)
        # segno draws the light modules (the quiet zone is solid blocks): a block's half is a light module
        grid.append([ch in "█▀" for ch in line])
        grid.append([ch in "█▄" for ch in line])
    return grid


def test_beyond_loopback_the_key_the_qr_code_and_403(tmp_path):
    debian.ensure({"zbarimg": "zbar-tools"})
    master, slave = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", GONE, "--out", tmp_path / "run",
                             "--profile", EXAMPLE_PROFILE, "--view", "plain", "--web", "0.0.0.0:0", "--wait", "20"],
                            env=saglog_env(), cwd=ROOT, stdout=slave, stderr=subprocess.PIPE, text=True)
    os.close(slave)
    try:
        text = read_pty(master)
        url = re.search(r"page: (\S+)", text).group(1)
        key = re.search(r"\?key=([A-Za-z0-9_\-]+)$", url).group(1)
        assert len(key) >= 22  # 16 bytes of base64url: 128 bits
        port = url_port(url)
        assert request(port, "/state.json")[0] == 403 and request(port, "/")[0] == 403
        assert request(port, f"/state.json?key={key}")[0] == 200
        png = tmp_path / "qr.png"
        write_png(qr_from_half_blocks(text.split("page: ", 1)[1]), png)
        decoded = subprocess.run(["zbarimg", "--raw", "-q", str(png)], capture_output=True, text=True)
        assert decoded.stdout.strip() == url
    finally:
        proc.terminate()
        proc.wait(30)
        os.close(master)


def write_png(grid, path, scale: int = 8) -> None:
    """The module grid (True = light) as a black-on-white PNG with a wider quiet zone (matplotlib writes it)."""
    import numpy as np
    from matplotlib import image

    img = np.pad(np.where(np.array(grid, dtype=bool), 1.0, 0.0), 4, constant_values=1.0)
    image.imsave(path, np.kron(img, np.ones((scale, scale))), cmap="gray", vmin=0, vmax=1)


def test_speak_prints_every_phrase_in_the_plain_log_and_goes_on_without_an_engine(tmp_path):
    sim, device = start_simulator("--scenario", "demo-150-f8-fine", "--speed", 3)
    env = dict(saglog_env(), PATH="/nonexistent")  # no espeak-ng to be found, and pyttsx3 is not installed
    try:
        r = subprocess.run([sys.executable, "-m", "logger", "capture", "--port", device, "--out", tmp_path / "run",
                            "--profile", EXAMPLE_PROFILE, "--view", "plain", "--no-bells", "--speak", "--seatings", "2"],
                           env=env, cwd=ROOT, capture_output=True, text=True, timeout=120)
    finally:
        sim.kill()
        sim.wait(10)
    assert r.returncode == 0, r.stderr
    assert r.stderr.count("speech:") == 1 and "no speech engine" in r.stderr
    said = [line.split(" say: ", 1)[1] for line in r.stdout.splitlines() if " say: " in line]
    summary = json.loads((tmp_path / "run" / "summary.json").read_text())
    assert len(said) == summary["seatings_total"] and said[0] == "zero set"
    assert said[-1].startswith("radius ") and "millimetres" in said[-1]
