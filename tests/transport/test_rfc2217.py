"""A bridge that speaks RFC 2217 (serial port over telnet) on loopback, captured through rfc2217://.

The bridge here is built from pyserial's own `serial.rfc2217.PortManager`
(the RFC 2217 server side shipped with pyserial, a reference implementation
of the protocol): it relays a virtual indicator's pseudo-terminal to a TCP
client, as a networked serial server at the stand would.
"""

from __future__ import annotations

import io
import select
import socket
import threading

import serial
import serial.rfc2217

from logger.live.capture import capture
from logger.live.plainlog import PlainLog
from logger.live.pipeline import RunSettings
from logger.analysis.seating import DetectorSettings
from logger.analysis.session import AnalysisSettings
from logger.simulator import PtyServer
from tests.helpers.simrun import short_bridge_run


class _Writer:
    """PortManager writes its telnet answers through `.write`, as on a serial-like object."""

    def __init__(self, sock: socket.socket):
        self.sock = sock

    def write(self, data: bytes) -> None:
        self.sock.sendall(data)


class _PtyPort:
    """A pseudo-terminal has no modem lines (TIOCMGET fails): they read as off, and setting them does nothing."""

    def __init__(self, ser):
        object.__setattr__(self, "_ser", ser)

    cts = dsr = ri = cd = False

    def __getattr__(self, name):
        return getattr(self._ser, name)

    def __setattr__(self, name, value):
        if name not in ("rts", "dtr", "break_condition"):
            setattr(self._ser, name, value)


class Rfc2217Bridge:
    """One client at a time; relays bytes both ways through PortManager (telnet escaping, options)."""

    def __init__(self, device: str):
        self.device = device
        self.listener = socket.create_server(("127.0.0.1", 0))
        self.port = self.listener.getsockname()[1]
        self.stop = threading.Event()
        self.thread = threading.Thread(target=self._run, daemon=True)
        self.thread.start()

    def _run(self):
        self.listener.settimeout(0.2)
        while not self.stop.is_set():
            try:
                conn, _ = self.listener.accept()
            except socket.timeout:
                continue
            ser = serial.serial_for_url(self.device, timeout=0)
            manager = serial.rfc2217.PortManager(_PtyPort(ser), _Writer(conn))  # it negotiates at once
            try:
                while not self.stop.is_set():
                    r, _, _ = select.select([conn, ser.fileno()], [], [], 0.05)
                    if conn in r:
                        data = conn.recv(4096)
                        if not data:
                            break
                        ser.write(b"".join(manager.filter(data)))
                    if ser.fileno() in r:
                        data = ser.read(ser.in_waiting or 1)
                        if data:
                            conn.sendall(b"".join(manager.escape(data)))
            except OSError:
                pass
            finally:
                ser.close()
                conn.close()

    def close(self):
        self.stop.set()
        self.thread.join(2)
        self.listener.close()


def test_capture_through_an_rfc2217_bridge(tmp_path):
    run = short_bridge_run()
    profile = run.scenario.profile
    with PtyServer(run) as server:
        bridge = Rfc2217Bridge(server.path)
        try:
            summary = capture(f"rfc2217://127.0.0.1:{bridge.port}", profile,
                              RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm),
                                          AnalysisSettings()),
                              tmp_path / "r", listeners=[PlainLog(profile.unit, io.StringIO())],
                              duration_s=run.duration_s + 1.5, wait_s=5)
        finally:
            bridge.close()
    c = run.truth["counts"]
    assert (summary["seatings_flat"], summary["seatings_surface"]) == (c["expected_accepted_flat"],
                                                                       c["expected_accepted_surface"])
    assert summary["bad_lines"] == 0  # telnet negotiation never leaks into the stream
