"""Serial sources on real transports: pseudo-terminals, loopback sockets, loop://."""

from __future__ import annotations

import errno
import json
import os
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
import serial

from logger.errors import DeviceGone, DeviceNotFound, UserError
from logger.transport.serial_source import SerialSource, _ends_with_parent, list_ports, open_error_message

REPO = Path(__file__).resolve().parents[2]


def run_cli(*args, **kw):
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return subprocess.run([sys.executable, "-m", "logger", *args], capture_output=True, text=True, env=env,
                          timeout=60, **kw)


def test_missing_device_is_one_clear_line(tmp_path):
    with pytest.raises(DeviceNotFound, match="no such port") as exc:
        SerialSource(str(tmp_path / "ttyUSB9")).open()
    assert isinstance(exc.value, UserError) and "\n" not in str(exc.value)


@pytest.mark.parametrize("url,words", [("foo://x", "not a valid port or URL"),
                                       ("socket://nohostport", "needs a host and a port")])
def test_bad_urls(url, words):
    with pytest.raises(DeviceNotFound, match=words):
        SerialSource(url).open()


def test_not_a_serial_port(tmp_path):
    f = tmp_path / "plain-file"
    f.write_text("x")
    with pytest.raises(DeviceNotFound, match="not a serial port"):
        SerialSource(str(f)).open()


def test_connection_refused():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()  # bound then closed: nothing listens there
    with pytest.raises(DeviceNotFound, match="connection refused"):
        SerialSource(f"socket://127.0.0.1:{port}").open()


def test_busy_pty_is_reported():
    master, slave = os.openpty()
    path = os.ttyname(slave)
    try:
        with SerialSource(path):
            with pytest.raises(DeviceNotFound, match="busy"):
                SerialSource(path).open()  # the first holds an exclusive lock
    finally:
        os.close(slave)
        os.close(master)


def test_permission_message_names_dialout():
    # The exception pyserial's POSIX backend raises for EACCES (its message format, pyserial 3.5).
    exc = serial.SerialException(errno.EACCES, "could not open port /dev/ttyUSB0: [Errno 13] Permission denied")
    msg = open_error_message("/dev/ttyUSB0", exc)
    assert "permission denied" in msg and "dialout" in msg


def test_bad_settings_are_user_errors():
    for kw in ({"parity": "X"}, {"bytesize": 9}, {"stopbits": 3}, {"baudrate": 0}, {"baudrate": "fast"}):
        with pytest.raises(UserError):
            SerialSource("loop://", **kw)


def test_settings_for_the_header():
    s = SerialSource("loop://", baudrate=115200, bytesize=7, parity="e", stopbits=2, poll_command=b"?\r")
    assert s.settings() == {"url": "loop://", "baudrate": 115200, "bytesize": 7, "parity": "E", "stopbits": 2,
                            "poll": "b'?\\r' every 0.5 s"}


def test_loop_url_block_reads():
    with SerialSource("loop://", read_timeout_s=0.02) as src:
        assert src.read_block() == b""  # timeout: nothing there
        src._ser.write(b"1.000\r\n2.000\r\n")
        got = b""
        while len(got) < 14:
            got += src.read_block()
        assert got == b"1.000\r\n2.000\r\n"


def test_poll_command_is_sent_over_a_socket():
    lst = socket.socket()
    lst.bind(("127.0.0.1", 0))
    lst.listen(1)
    received = bytearray()

    def bridge():
        conn, _ = lst.accept()
        conn.settimeout(2.0)
        while received.count(b"?\r") < 3:
            data = conn.recv(100)
            if not data:
                break
            received.extend(data)
            conn.sendall(b"+0.125\r\n")  # answers each request like a polled indicator
        conn.close()

    th = threading.Thread(target=bridge, daemon=True)
    th.start()
    src = SerialSource(f"socket://127.0.0.1:{lst.getsockname()[1]}", poll_command=b"?\r", poll_interval_s=0.05)
    src.open()
    got = b""
    with pytest.raises(DeviceGone):
        while True:  # until the bridge hangs up after three requests
            got += src.read_block()
    src.close()
    th.join(2)
    lst.close()
    assert bytes(received).startswith(b"?\r?\r?\r") and got.startswith(b"+0.125\r\n" * 3)


def test_socket_bridge_burst_comes_in_one_read_and_a_stop_wakes_the_wait():
    # a socket:// bridge is read like a device path: one select, then all that is there (pyserial's
    # own read of an in_waiting of 1 took two bytes a call); a readable stop ends a long wait
    lst = socket.socket()
    lst.bind(("127.0.0.1", 0))
    lst.listen(1)
    burst = b"".join(b"+%d.%03d\r\n" % (k // 1000, k % 1000) for k in range(500))  # 5000 bytes
    src = SerialSource(f"socket://127.0.0.1:{lst.getsockname()[1]}")
    src.open()
    conn, _ = lst.accept()
    try:
        conn.sendall(burst)
        got, reads = b"", 0
        while len(got) < len(burst) and reads < 50:
            got += src.read_block(5.0)
            reads += 1
        assert got == burst and reads <= 3, reads  # loopback may cut a burst into a few segments
        assert src.read_block(0.0) == b""  # 0: only what is there, no wait

        class Woken:  # what a capture's Stop gives the read: readable at once
            def __init__(self):
                self.a, self.b = socket.socketpair()
                self.b.send(b"!")
                self.drained = False

            def fileno(self):
                return self.a.fileno()

            def drain(self):
                self.a.recv(16)
                self.drained = True

        wake = Woken()
        assert src.read_block(3600.0, wake) == b"" and wake.drained
    finally:
        src.close()
        conn.close()
        lst.close()


def test_what_a_bridge_sends_on_connect_is_kept():
    # A bridge may send the moment a client connects (a backlog it kept, a first reading).  pyserial's
    # socket:// open ends by throwing away whatever has arrived by then (its reset_input_buffer, see
    # serial/urlhandler/protocol_socket.py).  How much arrives first is a race; on a busy computer the
    # bridge wins it.  Here it always does: the bridge is another process, and while the client
    # connects a second thread holds the interpreter, so that the client goes on only after the
    # switch interval (50 ms).  Each burst must then be read whole, in order.
    burst = b"".join(b"+%d.%03d mm\r\n" % (k // 1000, k % 1000) for k in range(300))
    rounds = 5
    lst = socket.create_server(("127.0.0.1", 0))
    bridge = subprocess.Popen([sys.executable, "-c", f"""
import socket, sys
lst = socket.socket(fileno={lst.fileno()})
for _ in range({rounds}):
    conn, _ = lst.accept()
    conn.sendall({burst!r})
    conn.close()
"""], pass_fds=[lst.fileno()])
    url = f"socket://127.0.0.1:{lst.getsockname()[1]}"
    interval = sys.getswitchinterval()
    busy = threading.Event()

    def hold_the_interpreter():
        busy.set()
        t_end = time.monotonic() + 0.3
        while time.monotonic() < t_end:
            pass

    got_all, closing = [], []
    try:
        sys.setswitchinterval(0.05)
        for _ in range(rounds):
            hog = threading.Thread(target=hold_the_interpreter)
            hog.start()
            busy.wait()
            src = SerialSource(url)
            src.open()
            hog.join()
            got = b""
            try:
                while len(got) < len(burst):
                    got += src.read_block(5.0)
            except DeviceGone:
                pass  # the bridge hung up after its burst
            closing.append(threading.Thread(target=src.close))  # pyserial's socket close sleeps 0.3 s
            closing[-1].start()
            got_all.append(got == burst)
    finally:
        sys.setswitchinterval(interval)
        for t in closing:
            t.join()
        bridge.wait(timeout=30)
        lst.close()
    assert got_all == [True] * rounds


@pytest.mark.skipif(not _ends_with_parent(), reason="no setpriv --pdeathsig here: the relay ends at its next byte")
def test_a_capture_killed_outright_does_not_leave_its_relay_holding_the_port():
    # kill -9 of a gathering capture: its relay must end with it, so the port is free again at once,
    # not only after the device's next byte (a polled indicator sends none unasked).  Killed the moment
    # its open returns, too: before the open waited for the relay's exec, setpriv could still be about
    # to ask for the death signal then (9 of 30 such relays stayed, on a loaded machine).
    for round_ in range(5):
        master, slave = os.openpty()
        path = os.ttyname(slave)
        holder = subprocess.Popen(
            [sys.executable, "-c", "import sys, time\n"
             "from logger.transport.serial_source import SerialSource\n"
             f"src = SerialSource({path!r}, relay=True); src.open(); print(src._relay.pid, flush=True); time.sleep(60)"],
            stdout=subprocess.PIPE, text=True, env=dict(os.environ, PYTHONPATH=str(REPO)))
        relay = None
        try:
            relay = int(holder.stdout.readline())
            if round_ == 0:
                with pytest.raises(DeviceNotFound, match="busy"):
                    SerialSource(path).open()  # held: the capture has it
            holder.kill()
            holder.wait(timeout=30)
            deadline = time.monotonic() + 5
            while _running(relay) and time.monotonic() < deadline:
                time.sleep(0.02)
            assert not _running(relay), f"round {round_}"
            again = SerialSource(path)
            again.open()  # free again, and no byte was sent meanwhile
            again.close()
        finally:
            holder.kill()
            if relay is not None and _running(relay):
                os.kill(relay, signal.SIGKILL)  # a failed round leaves no relay behind
            os.close(master)
            os.close(slave)


def _running(pid: int) -> bool:
    """The process exists and is no zombie (a container's first process may not reap orphans)."""
    try:
        return Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()[0] != "Z"
    except OSError:
        return False


def test_the_relay_keeps_lines_a_gathering_reader_has_not_read_when_the_device_hangs_up():
    # A tty's hang-up empties its own input queue (Linux tty layer: a pty master closed behaves
    # like a USB adapter pulled).  Lines written just before it, while the reader was not looking
    # (a capture letting lines gather), must still be read: the relay has taken them already.
    master, slave = os.openpty()
    path = os.ttyname(slave)
    src = SerialSource(path, relay=True)
    src.open()
    os.close(slave)  # no handle of ours on the slave: the master's close hangs the line up
    assert src.read_block(0.3) == b""  # a quiet line is not a gone device: the relay waits for bytes
    # and a Ctrl-C at the terminal (SIGINT to the foreground process group) does not reach it
    assert os.getpgid(src._relay.pid) != os.getpgid(0)
    sent = b"".join(b"+1.%03d\r\n" % k for k in range(40))
    os.write(master, sent)
    time.sleep(0.2)  # the relay reads at once; this reader does not (a gather)
    os.close(master)
    time.sleep(0.2)
    got = b""
    with pytest.raises(DeviceGone):
        for _ in range(100):
            got += src.read_block(1.0)
    src.close()
    assert got == sent


def test_a_polled_indicator_through_the_relay_keeps_its_last_answers_at_a_hang_up():
    # the request written before each read fails on a hung-up line; the answers already in the
    # relay's pipe must still be read before the device counts as gone
    master, slave = os.openpty()
    src = SerialSource(os.ttyname(slave), relay=True, poll_command=b"?\r", poll_interval_s=0.01)
    src.open()
    os.close(slave)
    sent = b"+0.125\r\n" * 5
    os.write(master, sent)
    time.sleep(0.2)
    os.close(master)
    time.sleep(0.1)
    got = b""
    with pytest.raises(DeviceGone):
        for _ in range(100):
            time.sleep(0.02)  # a request due before every read
            got += src.read_block(1.0)
    src.close()
    assert got == sent


def test_vanished_pty_raises_device_gone():
    master, slave = os.openpty()
    path = os.ttyname(slave)
    os.close(slave)
    src = SerialSource(path)
    src.open()
    os.write(master, b"1.0\n")
    assert src.read_block() == b"1.0\n"
    os.close(master)  # the adapter is pulled out
    with pytest.raises(DeviceGone):
        for _ in range(10):
            src.read_block()
    src.close()


def _pyserial_ports():
    """The reference: pyserial's own enumeration (serial.tools.list_ports.comports), called here."""
    import serial.tools.list_ports

    return sorted(((p.device, p.description or "", p.hwid or "") for p in serial.tools.list_ports.comports()))


def test_ports_json_is_exactly_what_pyserial_sees():
    # Compared as whole lists, so an empty answer on a machine with ports (or an invented port on
    # one without) fails.  This machine lists /dev/ttyS0; on one with no port the empty list is what
    # pyserial must also say.
    r = run_cli("ports", "--json")
    assert r.returncode == 0, r.stderr
    got = json.loads(r.stdout)
    assert all(set(p) == {"device", "description", "hwid"} and all(isinstance(v, str) for v in p.values())
               for p in got)
    assert [(p["device"], p["description"], p["hwid"]) for p in got] == _pyserial_ports()
    assert list_ports() == got


def test_ports_human_output_has_one_line_per_port():
    r = run_cli("ports")
    assert r.returncode == 0, r.stderr
    lines = r.stdout.strip().splitlines()
    ref = _pyserial_ports()
    if not ref:  # nothing plugged in: one line saying so, and how to get a virtual indicator
        assert len(lines) == 1 and lines[0].startswith("No serial ports found") and "simulate --pty" in lines[0]
        return
    assert len(lines) == len(ref) + 1 and lines[-1].startswith("Give one of these to --port")
    for (device, description, hwid), line in zip(ref, lines):
        assert line.split()[0] == device and description in line
        assert (f"[{hwid}]" in line) == (hwid not in ("", "n/a"))  # a hardware id only when there is one
