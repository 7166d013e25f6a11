"""Where the bytes come from: a serial port or any pyserial URL.

pyserial's `serial_for_url` picks the transport from the URL (a device path
or COM name, socket://host:port for a network bridge, rfc2217://, loop://),
so nothing above this module knows or cares which one it is.  Reads are
block reads with a short timeout, never byte-by-byte.  Failing to open is a
`DeviceNotFound` (a UserError with one clear line); a link that dies while
open is `DeviceGone`, which the capture layer catches to reconnect.
"""

from __future__ import annotations

import errno
import functools
import os
import select
import shutil
import subprocess
import time
from pathlib import Path
from urllib.parse import parse_qs, urlsplit

import serial
import serial.tools.list_ports

from logger.checks import is_positive
from logger.errors import DeviceGone, DeviceNotFound, UserError

PARITIES = {"N": serial.PARITY_NONE, "E": serial.PARITY_EVEN, "O": serial.PARITY_ODD,
            "M": serial.PARITY_MARK, "S": serial.PARITY_SPACE}
BYTESIZES = (5, 6, 7, 8)
STOPBITS = (1, 1.5, 2)

READ_BYTES = 1 << 16  # at most this much per read


class SerialSource:
    """One open port; `read_block()` returns whatever bytes arrived (b"" on timeout)."""

    def __init__(self, url: str, baudrate=9600, bytesize=8, parity="N", stopbits=1,
                 poll_command: bytes | None = None, poll_interval_s: float = 0.5,
                 read_timeout_s: float = 0.05, relay: bool = False):
        self.url = str(url)
        self.baudrate = _check_int(baudrate, "baud rate", 1)
        self.bytesize = _check_choice(_as_number(bytesize, "byte size"), BYTESIZES, "byte size")
        self.parity = _check_choice(str(parity).upper()[:1], tuple(PARITIES), "parity")
        self.stopbits = _check_choice(_as_number(stopbits, "stop bits"), STOPBITS, "stop bits")
        self.poll_command = bytes(poll_command) if poll_command else None
        if not is_positive(poll_interval_s):
            raise UserError(f"poll interval must be positive, got {poll_interval_s!r}")
        self.poll_interval_s = float(poll_interval_s)
        self.read_timeout_s = float(read_timeout_s)
        self.relay = relay  # a device path is read through a relay child (see _start_relay)
        self._ser = None
        self._socket = False
        self._relay = None
        self._next_poll = 0.0

    def open(self) -> None:
        if self._ser is not None:
            return
        # pyserial's rfc2217 handler refuses a write timeout (it raises at open); the others take one
        extra = {} if self.url.lower().startswith("rfc2217://") else {"write_timeout": 1.0}
        self._socket = _is_socket(self.url)
        try:
            ser = serial.serial_for_url(
                pyserial_url(self.url), baudrate=self.baudrate, bytesize=self.bytesize, parity=PARITIES[self.parity],
                stopbits=self.stopbits, timeout=self.read_timeout_s, exclusive=True, do_not_open=True, **extra,
            )
            if self._socket:
                # pyserial's socket:// open ends by throwing away what the bridge has already sent (its
                # reset_input_buffer); a bridge that sends on connect, a backlog say, would lose it
                ser.reset_input_buffer = _keep_input
            ser.open()
            if self._socket:
                del ser.reset_input_buffer  # only the open's: pyserial's own again from here on
        except (serial.SerialException, OSError, ValueError) as exc:
            err = DeviceNotFound(open_error_message(self.url, exc))
            err.absent = _absent(exc)
            raise err from None
        self._ser = ser
        if self._socket:  # read without pyserial's timeout: select first, then all that is there
            self._ser.timeout = 0
        if self.relay and isinstance(getattr(self._ser, "fd", None), int):
            self._start_relay(self._ser.fd)
        self._next_poll = time.monotonic()

    def _start_relay(self, fd: int) -> None:
        """`cat` reads the port the moment bytes arrive and holds them in a pipe, where an unplug cannot take them.

        A capture that lets lines gather (--gather) does not read for a
        while; bytes left in a tty's own queue meanwhile are lost when the
        device hangs up (a pty's other end closed, a USB adapter pulled),
        bytes in a pipe are not.  The pipe ends when the relay's read fails:
        the device is gone.  A compiled reader costs a fraction of a Python
        wake-up per arrival, so the interpreter wakes once per gather.
        """
        cat = shutil.which("cat")
        if cat is None:
            self.close()
            raise UserError("--gather needs the 'cat' program on this computer (it reads the port in the meantime)")
        command = [*_ends_with_parent(), cat]
        import termios  # POSIX only, as are ports with a file descriptor

        # pyserial opens the port non-blocking with VMIN 0 (its reads wait in select); the relay's read
        # must wait for the first byte and return with what is there: blocking, VMIN 1, VTIME 0
        try:
            attrs = termios.tcgetattr(fd)
            attrs[6][termios.VMIN], attrs[6][termios.VTIME] = 1, 0
            termios.tcsetattr(fd, termios.TCSANOW, attrs)
            os.set_blocking(fd, True)
            # its own session: a Ctrl-C at the terminal (SIGINT to the whole foreground group) ends the
            # capture, which then ends the relay; the relay dying first would look like an unplug
            self._relay = subprocess.Popen(command, stdin=fd, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL,
                                           bufsize=0, start_new_session=True)
            if command[0] != cat:
                _until_exec(self._relay.pid, Path(cat).name)
        except (termios.error, OSError, subprocess.SubprocessError) as exc:  # termios.error is no OSError
            self.close()  # the port's exclusive hold released: the next try can open it
            err = DeviceNotFound(f"{self.url}: the port opened, but its relay did not start ({exc})")
            err.absent = True  # a device still settling after a replug: the capture tries again
            raise err from None

    def read_block(self, wait_s: float | None = None, wake=None) -> bytes:
        """What arrived within `wait_s` (default: the read timeout), all of it in one read; 0: only what is there.

        A port with a file descriptor (a device path, a pty) and a socket://
        bridge are read with one select and one read: the fewest system calls
        and the least Python per wake-up at an indicator's 100 lines/s.
        There the wait may be long (an idle capture sleeps), and `wake` (a
        capture's Stop: `fileno()` and `drain()`) ends it at once.  Other
        pyserial ports (COM ports, rfc2217://, loop://) are read through
        pyserial's read, with the read timeout the port was opened with.
        Reads never wait for more once bytes are there: a device that is
        unplugged right after a line would take the unread bytes with it.
        """
        ser = self._ser
        if ser is None:
            raise DeviceGone(f"{self.url}: not open")
        wait_s = self.read_timeout_s if wait_s is None else wait_s
        try:
            if self.poll_command is not None:
                self._poll(ser)
            if self._socket:
                return ser.read(READ_BYTES) if _ready(ser.fileno(), wait_s, wake) else b""
            fd = getattr(ser, "fd", None) if self._relay is None else self._relay.stdout.fileno()
            if not isinstance(fd, int):
                return self._read_pyserial(ser, wait_s)
            if not _ready(fd, wait_s, wake):
                return b""
            data = os.read(fd, READ_BYTES)
            if not data:  # readable but empty: the device went away (as pyserial reports it), or the relay ended
                raise serial.SerialException("device reports readiness to read but returned no data")
            return data
        except (serial.SerialException, OSError) as exc:
            raise DeviceGone(f"{self.url}: device or link gone ({exc})") from None

    def _poll(self, ser) -> None:
        """Send the request when it is due.  Through a relay, a failed write (the device hung up) is
        not the end yet: the pipe still holds what came before, and its end reports the device gone."""
        now = time.monotonic()
        if now < self._next_poll:
            return
        self._next_poll = max(self._next_poll + self.poll_interval_s, now)
        try:
            ser.write(self.poll_command)
        except (serial.SerialException, OSError):
            if self._relay is None:
                raise

    @staticmethod
    def _read_pyserial(ser, wait_s: float) -> bytes:
        waiting = ser.in_waiting
        if not waiting and wait_s == 0:
            return b""
        data = ser.read(waiting or 1)
        if len(data) == 1:  # woke on the first byte: the rest of the burst too
            try:
                more = ser.in_waiting
                if more:
                    data += ser.read(more)
            except (serial.SerialException, OSError):
                pass  # gone right after: these bytes are kept, the next read reports it
        return data

    def next_poll_in_s(self) -> float | None:
        """Seconds until the next request is due (a polled indicator); None when nothing is polled."""
        if self.poll_command is None or self._ser is None:
            return None
        return max(0.0, self._next_poll - time.monotonic())

    def close(self) -> None:
        relay, self._relay = self._relay, None
        if relay is not None:
            relay.terminate()
            relay.stdout.close()
            relay.wait()
        ser, self._ser = self._ser, None
        if ser is not None:
            try:
                ser.close()
            except (serial.SerialException, OSError):
                pass  # already gone; nothing left to release

    @property
    def is_open(self) -> bool:
        return self._ser is not None

    def settings(self) -> dict:
        """The port settings, for a recording's header."""
        poll = "none"
        if self.poll_command is not None:
            poll = f"{self.poll_command!r} every {self.poll_interval_s:g} s"
        return {"url": self.url, "baudrate": self.baudrate, "bytesize": self.bytesize,
                "parity": self.parity, "stopbits": self.stopbits, "poll": poll}

    def __enter__(self):
        self.open()
        return self

    def __exit__(self, *exc):
        self.close()


def _is_socket(url: str) -> bool:
    return url.lower().startswith("socket://")


def can_gather(url: str) -> bool:
    """Whether lines may wait between reads without an unplug taking them: a device path read through
    the relay (POSIX), or a socket:// bridge (the bytes wait in TCP's buffers)."""
    return _is_socket(url) or (os.name == "posix" and "://" not in url)


def _ready(fd: int, wait_s: float, wake) -> bool:
    """Whether `fd` has bytes within `wait_s`; `wake` readable ends the wait early (and is drained)."""
    ready = select.select([fd] if wake is None else [fd, wake], [], [], wait_s)[0]
    if wake is not None and wake in ready:
        wake.drain()
    return fd in ready


def pyserial_url(url: str) -> str:
    """The URL handed to pyserial: an rfc2217:// one gets `ign_set_control` unless it says so already.

    At open, pyserial waits for the bridge to confirm the flow-control setting (the RFC 2217
    SET_CONTROL option); common bridges (ser2net 4) never answer it and the open times out.
    saglog uses no hardware flow control, so nothing is lost by not waiting for that answer.
    """
    parts = urlsplit(url)
    if parts.scheme.lower() != "rfc2217" or "ign_set_control" in parse_qs(parts.query, keep_blank_values=True):
        return url
    return url + ("&" if parts.query else "?") + "ign_set_control"


@functools.cache
def _ends_with_parent() -> tuple[str, ...]:
    """The prefix that ends the relay when the capture dies, even by kill -9 (Linux: setpriv --pdeathsig).

    Without it a relay outlives a killed capture and holds the port until
    its next byte (writing into the closed pipe ends it).  util-linux's
    setpriv (2.33 on) asks the kernel for a signal at the death of the
    thread that started it, and execs the relay in its place: the capture's
    thread, which opens and closes the port.  Tried once, with the relay
    itself; without setpriv, or with one that lacks the option (macOS, an
    older or a BusyBox one): no prefix.
    """
    setpriv, cat = shutil.which("setpriv"), shutil.which("cat")
    if setpriv is None or cat is None:
        return ()
    prefix = (setpriv, "--pdeathsig", "TERM", "--")
    try:
        works = subprocess.run([*prefix, cat, os.devnull], stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                               stderr=subprocess.DEVNULL, timeout=10).returncode == 0
    except (OSError, subprocess.SubprocessError):
        works = False
    return prefix if works else ()


def _until_exec(pid: int, name: str, wait_s: float = 2.0) -> None:
    """Until the prefix has become the relay (Linux: /proc/PID/comm), or `wait_s`.

    setpriv asks for the death signal and then execs the relay; a capture
    killed between the two would leave the relay holding the port (under
    load, 9 of 30 holders killed at once after the open did).  Once the
    relay runs, the signal is armed, so the open returns only then.
    """
    comm = Path(f"/proc/{pid}/comm")
    deadline = time.monotonic() + wait_s
    while time.monotonic() < deadline:
        try:
            if comm.read_text().strip() == name:
                return
        except OSError:
            return  # no /proc, or the relay already ended (its end reports the device gone)
        time.sleep(0.001)


def _keep_input() -> None:
    """In place of pyserial's reset_input_buffer at a socket:// open: the bytes a bridge sent are the run's."""


def open_error_message(url: str, exc: BaseException) -> str:
    """One line a user can act on, for a port that will not open."""
    code = getattr(exc, "errno", None)
    text = str(exc)
    low = text.lower()
    if url.lower().startswith("rfc2217://") and ("waiting for option" in low or "support rfc2217" in low):
        what = text.split(" [", 1)[0].split(" {", 1)[0]  # pyserial appends the whole option table
        return (f"{url}: the bridge does not answer RFC 2217 as expected ({what}); check that its port speaks "
                "it (ser2net: accepter telnet(rfc2217),tcp,PORT), or read the port raw as socket://HOST:PORT")
    if isinstance(exc, ValueError) or "invalid url" in low or "unknown url" in low or "expected" in low:
        return f"{url}: not a valid port or URL ({text}); use a device path, a COM name or socket://host:port"
    if url.lower().startswith(("socket://", "rfc2217://")) and not _has_port(url):
        return f"{url}: a network URL needs a host and a port, e.g. socket://bridge.local:23"
    if code == errno.ENOTTY or "inappropriate ioctl" in low:
        return f"{url}: not a serial port"
    if code == errno.ENOENT or "no such file" in low or "filenotfounderror" in low or "cannot find" in low:
        return f"{url}: no such port (is the adapter plugged in? 'saglog ports' lists the ports)"
    if code == errno.EACCES or "permission denied" in low:
        return (f"{url}: permission denied (on Linux add yourself to the 'dialout' group: "
                "sudo usermod -aG dialout $USER, then log out and in)")
    if code in (errno.EBUSY, errno.EAGAIN) or "busy" in low or "exclusively lock" in low or "access is denied" in low:
        return f"{url}: port is busy (another program has it open)"
    if code == errno.ECONNREFUSED or "refused" in low:
        return f"{url}: connection refused (nothing is listening there)"
    if "timed out" in low or code in (errno.EHOSTUNREACH, errno.ENETUNREACH):
        return f"{url}: network bridge not reachable ({text})"
    return f"{url}: cannot open port ({text})"


def _absent(exc: BaseException) -> bool:
    """Not there (yet): worth waiting for, unlike a bad URL, a busy port or a permission problem."""
    code = getattr(exc, "errno", None)
    low = str(exc).lower()
    return (code in (errno.ENOENT, errno.ECONNREFUSED, errno.EHOSTUNREACH, errno.ENETUNREACH)
            or "no such file" in low or "refused" in low)


def _has_port(url: str) -> bool:
    rest = url.split("://", 1)[1].split("?", 1)[0]
    host, sep, port = rest.rpartition(":")
    return bool(sep and host and port.isdigit())


def list_ports() -> list[dict]:
    """The serial ports this machine has, with what the system says about each."""
    return [{"device": p.device, "description": p.description or "", "hwid": p.hwid or ""}
            for p in sorted(serial.tools.list_ports.comports(), key=lambda p: p.device)]


def _as_number(value, what):
    try:
        f = float(value)
    except (TypeError, ValueError):
        raise UserError(f"{what} must be a number, got {value!r}") from None
    return int(f) if f.is_integer() else f


def _check_int(value, what, minimum):
    v = _as_number(value, what)
    if not isinstance(v, int) or v < minimum:
        raise UserError(f"{what} must be a whole number of at least {minimum}, got {value!r}")
    return v


def _check_choice(value, choices, what):
    if value not in choices:
        raise UserError(f"{what} must be one of {', '.join(map(str, choices))}, got {value!r}")
    return value
