"""Byte sources: serial devices and bridges through pyserial's URL handlers.

`serial_for_url` picks the transport by the URL's scheme (a device path or
COM name, socket://host:port, rfc2217://host:port, loop://), so nothing
above this module knows where the bytes come from.  Reads are block reads:
whatever is waiting, or one byte with a short timeout, never a Python loop
per byte.  A device that vanishes raises DeviceGone; one that cannot be
opened raises DeviceNotFound with the usual fix in the message.
"""

from __future__ import annotations

import errno
import time

import serial
import serial.tools.list_ports

from .errors import DeviceGone, DeviceNotFound

PARITIES = {"N": serial.PARITY_NONE, "E": serial.PARITY_EVEN, "O": serial.PARITY_ODD,
            "M": serial.PARITY_MARK, "S": serial.PARITY_SPACE}


class SerialSource:
    def __init__(self, url: str, baudrate: int = 9600, bytesize: int = 8, parity: str = "N", stopbits: float = 1,
                 poll_command: bytes | None = None, poll_interval_s: float = 0.5, read_timeout_s: float = 0.05):
        self.url = url
        self.baudrate, self.bytesize, self.parity, self.stopbits = baudrate, bytesize, parity, stopbits
        self.poll_command = poll_command
        self.poll_interval_s = poll_interval_s
        self.read_timeout_s = read_timeout_s
        self._ser = None
        self._next_poll = 0.0

    def settings(self) -> dict:
        return {"port": self.url, "baudrate": self.baudrate, "bytesize": self.bytesize, "parity": self.parity,
                "stopbits": self.stopbits,
                "poll": None if self.poll_command is None else self.poll_command.decode("latin-1"),
                "poll_interval_s": self.poll_interval_s if self.poll_command else None}

    def open(self) -> None:
        try:
            self._ser = serial.serial_for_url(
                self.url, baudrate=self.baudrate, bytesize=self.bytesize, parity=PARITIES[self.parity],
                stopbits=self.stopbits, timeout=self.read_timeout_s, exclusive=True, do_not_open=False)
        except (serial.SerialException, OSError, ValueError) as exc:
            raise DeviceNotFound(_why_not(self.url, exc)) from None
        self._next_poll = time.monotonic()

    def read_block(self) -> bytes:
        """Whatever has arrived, or b'' after the read timeout; DeviceGone when the link is lost."""
        ser = self._ser
        if ser is None:
            raise DeviceGone(f"{self.url}: not open")
        try:
            if self.poll_command is not None and time.monotonic() >= self._next_poll:
                ser.write(self.poll_command)
                self._next_poll = time.monotonic() + self.poll_interval_s
            waiting = ser.in_waiting
            data = ser.read(waiting or 1)
        except (serial.SerialException, OSError) as exc:
            raise DeviceGone(f"{self.url}: {exc}") from None
        if not data and self.url.startswith("socket://") and _socket_closed(ser):
            raise DeviceGone(f"{self.url}: the bridge closed the connection")
        return data

    def close(self) -> None:
        if self._ser is not None:
            try:
                self._ser.close()
            except (serial.SerialException, OSError):
                pass
            self._ser = None

    def __enter__(self):
        self.open()
        return self

    def __exit__(self, *exc):
        self.close()


def _socket_closed(ser) -> bool:
    """pyserial's socket handler returns b'' both on timeout and on EOF; peek to tell them apart."""
    import socket

    sock = getattr(ser, "_socket", None)
    if sock is None:
        return True
    try:
        sock.setblocking(False)
        try:
            return sock.recv(1, socket.MSG_PEEK) == b""
        finally:
            sock.setblocking(True)
            sock.settimeout(ser.timeout)
    except BlockingIOError:
        return False
    except OSError:
        return True


def _why_not(url: str, exc: Exception) -> str:
    err = getattr(exc, "errno", None)
    text = str(exc)
    if err in (errno.EACCES, errno.EPERM) or "Permission denied" in text:
        return (f"{url}: permission denied; add yourself to the group that owns the port "
                "(on most Linux systems: sudo usermod -aG dialout $USER, then log in again)")
    if err == errno.EBUSY or "busy" in text.lower() or "exclusively lock" in text:
        return f"{url}: port busy; another program has it open"
    if err == errno.ENOENT or "No such file" in text or "could not open port" in text:
        return f"{url}: no such device; is the indicator plugged in? ('saglog ports' lists the ports)"
    if "refused" in text.lower():
        return f"{url}: connection refused; is the bridge running and listening?"
    return f"{url}: cannot open ({text})"


def list_ports() -> list[dict]:
    return [{"device": p.device, "description": p.description, "hwid": p.hwid}
            for p in sorted(serial.tools.list_ports.comports(), key=lambda p: p.device)]
