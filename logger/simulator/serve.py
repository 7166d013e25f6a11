"""Serve a simulated run like hardware: a real pseudo-terminal or a loopback TCP port.

The stream is paced in real time (times a speed factor) from the moment a
client first connects, so a capture sees the scenario from its start.  While
no client is connected, lines are dropped, as a real indicator's would be.
`unplug()` / `replug()` make the device vanish and come back (a new pty,
with the optional udev-style symlink re-pointed), so reconnecting can be
tested; a scenario's disconnect fault does the same at its own time.
`virtual_device()` picks the pty where the system has one and the loopback
TCP port where it has none (Windows); the POSIX-only modules are imported
only when a pty is opened, so everything else imports anywhere.
"""

from __future__ import annotations

import abc
import errno
import os
import select
import socket
import threading
import time

from logger.checks import is_positive
from logger.simulator.model import SimRun

_SLICE_S = 0.05  # longest sleep between checks of the stop flag and the client


class _Server(abc.ABC):
    """Pacing loop shared by the transports; a subclass moves the bytes."""

    def __init__(self, run: SimRun, speed: float = 1.0, wait_for_client: bool = True):
        if not is_positive(speed):
            raise ValueError("speed must be positive")
        self.run = run
        self.speed = float(speed)
        self.wait_for_client = wait_for_client
        self.lines_sent = 0
        self.lines_dropped = 0
        self._stop = threading.Event()
        self._thread: threading.Thread | None = None
        self._lock = threading.RLock()
        self._plugged = True
        self.error: BaseException | None = None
        self._request = run.scenario.poll_request
        self._latest: bytes | None = None

    # -- transport hooks
    @abc.abstractmethod
    def _client_ready(self) -> bool:
        """Is somebody connected to receive lines?"""

    @abc.abstractmethod
    def _send(self, data: bytes) -> bool:
        """Write the bytes; False when the client went away."""

    def _service(self, timeout: float) -> None:
        """Wait up to `timeout`, meanwhile accepting clients and draining what they send."""
        time.sleep(timeout)

    # -- public
    def start(self) -> None:
        """Start serving (once: a second call, e.g. after `with`, does nothing)."""
        if self._thread is not None:
            return
        self._thread = threading.Thread(target=self._main, name=type(self).__name__, daemon=True)
        self._thread.start()

    def wait(self, timeout: float | None = None) -> bool:
        """True once the scenario has been served to its end (or the server stopped)."""
        if self._thread is None:
            return True
        self._thread.join(timeout)
        return not self._thread.is_alive()

    def stop(self) -> None:
        self._stop.set()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(5.0)
        self._close_all()

    def __enter__(self):
        self.start()
        return self

    def __exit__(self, *exc):
        self.stop()

    def _close_all(self) -> None:
        pass

    # -- pacing
    def _sleep_until(self, t_mono: float) -> bool:
        while not self._stop.is_set():
            left = t_mono - time.monotonic()
            if left <= 0:
                return True
            self._service(min(left, _SLICE_S))
        return False

    def _flush(self, batch: list[bytes]) -> None:
        if not batch:
            return
        with self._lock:
            ok = self._plugged and self._client_ready() and self._send(b"".join(batch))
        if ok:
            self.lines_sent += len(batch)
        else:
            self.lines_dropped += len(batch)
        batch.clear()

    def _main(self) -> None:
        try:
            self._serve()
        except BaseException as exc:  # kept for the owner to inspect; the thread must not die silently
            self.error = exc
            raise

    def _serve(self) -> None:
        if self.wait_for_client:
            while not self._stop.is_set() and not self._client_ready():
                self._service(_SLICE_S)
        gaps = [(g["t_start_s"], g["t_end_s"]) for g in self.run.truth["disconnects"]]
        t0 = time.monotonic()
        batch: list[bytes] = []
        for t, data in self.run.lines():
            while gaps and t >= gaps[0][0]:  # the scenario's own disconnect fault
                a, b = gaps.pop(0)
                self._flush(batch)
                if not self._sleep_until(t0 + a / self.speed):
                    return
                self.unplug()
                if b >= self.run.duration_s:
                    return
                if not self._sleep_until(t0 + b / self.speed):
                    return
                self.replug()
            due = t0 + t / self.speed
            if due > time.monotonic():
                self._flush(batch)
                if not self._sleep_until(due):
                    return
            if self._request:
                self._latest = data  # a polled indicator only shows it; it is sent when asked
                continue
            batch.append(data)
            if len(batch) >= 512:
                self._flush(batch)
        self._flush(batch)
        self._drain_out()

    def _received(self, data: bytes) -> None:
        """What the client sent: a polled indicator answers each request with its latest reading."""
        if not self._request or self._latest is None:
            return
        for _ in range(data.count(self._request)):
            with self._lock:
                ok = self._plugged and self._client_ready() and self._send(self._latest)
            self.lines_sent += bool(ok)

    def _drain_out(self) -> None:
        """Give the client a moment to read the tail before the link closes."""

    @abc.abstractmethod
    def unplug(self) -> None:
        """Make the device vanish (the client's next read fails)."""

    @abc.abstractmethod
    def replug(self) -> None:
        """Bring the device back so a client can open it again."""


class PtyServer(_Server):
    """The run on a pseudo-terminal; `path` is what pyserial (or a terminal program) opens."""

    def __init__(self, run: SimRun, speed: float = 1.0, link_path: str | None = None,
                 wait_for_client: bool = True):
        super().__init__(run, speed, wait_for_client)
        self.link_path = link_path
        self._master: int | None = None
        self._slave_path = ""
        self._open_pty()

    @property
    def path(self) -> str:
        return self.link_path or self._slave_path

    @property
    def device(self) -> str:
        """The current /dev/pts/N behind `path`."""
        return self._slave_path

    def _open_pty(self) -> None:
        import tty  # POSIX only (termios): here, so that importing this module works anywhere

        master, slave = os.openpty()
        tty.setraw(slave)  # no CR/LF translation, no echo: bytes go through as sent
        self._slave_path = os.ttyname(slave)
        os.close(slave)  # with no slave open, the master reports a hang-up: that is how we see clients
        os.set_blocking(master, True)
        self._master = master
        self._poll = select.poll()
        self._poll.register(master, select.POLLIN | select.POLLHUP)
        if self.link_path:
            tmp = f"{self.link_path}.{os.getpid()}.tmp"
            try:
                os.unlink(tmp)
            except FileNotFoundError:
                pass
            os.symlink(self._slave_path, tmp)
            os.replace(tmp, self.link_path)  # atomic re-point, like udev

    def _client_ready(self) -> bool:
        if self._master is None:
            return False
        for _, ev in self._poll.poll(0):
            if ev & select.POLLHUP:
                return False
        return True

    def _service(self, timeout: float) -> None:
        with self._lock:
            ready = self._plugged and self._client_ready()
            master = self._master
        if not ready:
            time.sleep(timeout)
            return
        r, _, _ = select.select([master], [], [], timeout)
        if r:
            try:
                data = os.read(master, 4096)  # poll requests, keystrokes
            except OSError:
                time.sleep(timeout)
                return
            self._received(data)

    def _send(self, data: bytes) -> bool:
        view = memoryview(data)
        try:
            while view:
                n = os.write(self._master, view)
                view = view[n:]
        except OSError as exc:
            if exc.errno in (errno.EIO, errno.EBADF):
                return False
            raise
        return True

    def _drain_out(self) -> None:
        # The client may still be reading the last lines from the tty buffer.
        deadline = time.monotonic() + 0.5
        while time.monotonic() < deadline and not self._stop.is_set() and self._client_ready():
            time.sleep(0.01)

    def unplug(self) -> None:
        with self._lock:
            self._plugged = False
            if self._master is not None:
                os.close(self._master)
                self._master = None
            if self.link_path:
                try:
                    os.unlink(self.link_path)
                except FileNotFoundError:
                    pass

    def replug(self) -> None:
        with self._lock:
            if self._master is None:
                self._open_pty()
            self._plugged = True

    def _close_all(self) -> None:
        self.unplug()


class TcpServer(_Server):
    """The run on 127.0.0.1:port for pyserial's socket:// (a network bridge's stand-in)."""

    def __init__(self, run: SimRun, port: int = 0, speed: float = 1.0, wait_for_client: bool = True,
                 host: str = "127.0.0.1"):
        super().__init__(run, speed, wait_for_client)
        self.host = host
        self._want_port = port
        self._client: socket.socket | None = None
        self._listen()

    def _listen(self) -> None:
        s = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        s.bind((self.host, self._want_port))
        s.listen(1)
        self._want_port = s.getsockname()[1]  # keep the port across unplug/replug
        self._listener = s

    @property
    def port(self) -> int:
        return self._want_port

    @property
    def url(self) -> str:
        return f"socket://{self.host}:{self.port}"

    path = url

    def _client_ready(self) -> bool:
        return self._client is not None

    def _service(self, timeout: float) -> None:
        with self._lock:
            socks = [s for s in (self._listener, self._client) if s is not None] if self._plugged else []
        if not socks:
            time.sleep(timeout)
            return
        r, _, _ = select.select(socks, [], [], timeout)
        with self._lock:
            for s in r:
                if s is self._listener and self._listener is not None:
                    conn, _ = s.accept()
                    conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
                    if self._client is None:
                        self._client = conn
                    else:
                        conn.close()  # one client at a time, like a serial port
                elif s is self._client:
                    try:
                        data = s.recv(4096)
                    except OSError:
                        data = b""
                    if data:
                        self._received(data)
                    else:
                        self._drop_client()

    def _drop_client(self) -> None:
        if self._client is not None:
            self._client.close()
            self._client = None

    def _send(self, data: bytes) -> bool:
        try:
            self._client.sendall(data)
        except OSError:
            self._drop_client()
            return False
        return True

    def _drain_out(self) -> None:
        with self._lock:
            if self._client is not None:
                try:
                    self._client.shutdown(socket.SHUT_WR)  # the client reads the tail, then sees EOF
                except OSError:
                    pass

    def unplug(self) -> None:
        with self._lock:
            self._plugged = False
            self._drop_client()
            if self._listener is not None:
                self._listener.close()
                self._listener = None

    def replug(self) -> None:
        with self._lock:
            if self._listener is None:
                self._listen()
            self._plugged = True

    def _close_all(self) -> None:
        self.unplug()


NO_PTY = (ImportError, AttributeError)  # no pty/tty/termios module, no os.openpty / select.poll


def virtual_device(run: SimRun, speed: float = 1.0, link_path: str | None = None) -> _Server:
    """The run on a pseudo-terminal, or, where the system has none, on a loopback TCP port.

    Either way `.path` is what `capture --port` opens (a device path or a socket:// URL).
    """
    try:
        return PtyServer(run, speed=speed, link_path=link_path)
    except NO_PTY:
        if link_path:
            raise OSError(f"no pseudo-terminal here to link to {link_path}") from None
        return TcpServer(run, speed=speed)
