"""End to end over real transports: simulator -> pty / loopback TCP -> pyserial -> splitter -> decoder.

The reference is the simulator's own list of sent lines decoded directly:
what arrives through the kernel's pty or a TCP socket must be the same
lines, the same values, in the same order, with nothing lost.  That holds
whatever the scheduling: the server's writes block until the kernel takes
the bytes, so a slow reader only slows the writer, and the reader stops only
after a read that began once the server had finished came back empty.  How
fast a reader keeps up is a figure for `make bench` (benchmarks/pty_rate.py,
benchmarks/capture_bench.py), not a test.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from logger.formats.decode import Decoder, LineSplitter
from logger.errors import DeviceGone, DeviceNotFound
from logger.simulator import PtyServer, TcpServer, load_scenario, simulate
from logger.transport.serial_source import SerialSource

REPO = Path(__file__).resolve().parents[2]


def receive_all(server, url):
    src = SerialSource(url)
    src.open()
    sp, lines = LineSplitter(), []
    try:
        while True:
            served = server.wait(0)  # asked BEFORE the read: all bytes sent by now are in the kernel
            block = src.read_block()
            lines += sp.feed(block)
            if not block and served:
                break
    except DeviceGone:
        pass  # the server closed the link after the last line
    src.close()
    return lines + sp.flush()


def expected(run):
    return [x[:-1] if x.endswith(b"\n") else x for _, x in run.lines()]


def check_values(run, got):
    d1, d2 = Decoder(), Decoder()
    sent = expected(run)[-len(got):]
    assert [d1.decode(x, 0, 0).value_mm for x in got] == [d2.decode(x, 0, 0).value_mm for x in sent]
    assert d1.bad == 0 and d1.good == len(got) > 4000


def test_pty_1khz_lossless_in_order():
    run = simulate(load_scenario("fast-1khz"))  # 5 s at 1000 lines/s
    server = PtyServer(run)
    server.start()
    got = receive_all(server, server.path)
    server.stop()
    assert got == expected(run) and server.lines_dropped == 0
    check_values(run, got)


def test_socket_1khz_lossless_in_order():
    run = simulate(load_scenario("fast-1khz"), seed=4)
    server = TcpServer(run)
    server.start()
    got = receive_all(server, server.url)
    server.stop()
    # The server starts at the connection: what it sends before the open is over is kept too
    # (pyserial's own open would throw it away; tests/transport/test_source.py shows that).
    assert got == expected(run) and server.lines_dropped == 0
    check_values(run, got)


@pytest.mark.parametrize("gather_s", [0.0, 0.1])
def test_unplug_and_replug_through_a_link(tmp_path, gather_s):
    # gather_s > 0: the reader looks only every gather_s, as `capture --gather` does, and reads
    # through the relay; the lines just before the unplug must still all arrive
    run = simulate(load_scenario("unplugged"))  # gone from 9 s to 12 s of a 33 s session
    link = str(tmp_path / "ttyIndicator")
    server = PtyServer(run, speed=8.0, link_path=link)
    server.start()
    sp, before = LineSplitter(), []
    src = SerialSource(link, relay=gather_s > 0)
    src.open()
    try:
        while True:
            before += sp.feed(src.read_block())
            time.sleep(gather_s)
    except DeviceGone:
        src.close()
    while True:  # the capture's job, done by hand here: retry until the device is back
        try:
            src = SerialSource(link)
            src.open()
            break
        except DeviceNotFound:
            server.wait(0.02)
    after = []
    sp2 = LineSplitter()
    try:
        while True:
            served = server.wait(0)  # before the read, as in receive_all
            block = src.read_block()
            after += sp2.feed(block)
            if not block and served:
                break
    except DeviceGone:
        pass
    src.close()
    server.stop()
    gap = run.truth["disconnects"][0]
    lines = list(run.lines())
    pre = [x[:-1] for t, x in lines if t < gap["t_start_s"]]
    post = [x[:-1] for t, x in lines if t >= gap["t_end_s"]]
    assert before == pre  # everything up to the unplug arrived
    assert after and after == post[len(post) - len(after):]  # a gap-free tail after reconnecting
    assert not os.path.lexists(link)  # stop() removes the link, like unplugging for good


def test_cli_simulate_pty_prints_path_first_and_stops_on_sigterm():
    env = dict(os.environ, PYTHONPATH=str(REPO))
    proc = subprocess.Popen([sys.executable, "-m", "logger", "simulate", "--pty", "--scenario", "mirror-150-f8-rough",
                             "--rate", "200"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    try:
        path = proc.stdout.readline().decode().strip()
        assert path.startswith("/dev/")
        src = SerialSource(path)
        src.open()
        sp, d, lines = LineSplitter(), Decoder(), []
        while len(lines) < 100:
            lines += sp.feed(src.read_block())
        assert all(d.decode(x, 0, 0).bad == "" for x in lines[1:])
        src.close()
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=10) == 0
        assert b"Traceback" not in proc.stderr.read()
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
