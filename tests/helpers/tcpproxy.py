"""A loopback TCP relay that a test can cut and restore, to take a page's connection away for real."""

from __future__ import annotations

import socket
import threading


class Relay:
    """Listens on 127.0.0.1:`port` and relays each connection to `target`; `cut` closes everything, `restore` reopens."""

    def __init__(self, target: tuple[str, int]):
        self.target = target
        self._lock = threading.Lock()
        self._socks: list[socket.socket] = []
        self._listener: socket.socket | None = None
        self.port = 0
        self.restore()

    def restore(self) -> None:
        listener = socket.socket()
        listener.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        listener.bind(("127.0.0.1", self.port))
        listener.listen(16)
        self.port = listener.getsockname()[1]
        self._listener = listener
        threading.Thread(target=self._accept, args=(listener,), daemon=True).start()

    def cut(self) -> None:
        """Refuse new connections and reset the open ones, as a lost Wi-Fi link does."""
        with self._lock:
            socks, self._socks = self._socks + [self._listener], []
        for s in socks:
            try:
                s.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
            s.close()

    def _accept(self, listener: socket.socket) -> None:
        while True:
            try:
                near, _ = listener.accept()
            except OSError:
                return  # cut
            try:
                far = socket.create_connection(self.target)
            except OSError:  # the server is gone: so is this connection
                near.close()
                continue
            with self._lock:
                self._socks += [near, far]
            for a, b in ((near, far), (far, near)):
                threading.Thread(target=self._pump, args=(a, b), daemon=True).start()

    @staticmethod
    def _pump(src: socket.socket, dst: socket.socket) -> None:
        try:
            while data := src.recv(65536):
                dst.sendall(data)
        except OSError:
            pass
        for s in (src, dst):
            try:
                s.shutdown(socket.SHUT_RDWR)
            except OSError:
                pass
