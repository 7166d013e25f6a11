"""Where the stand page listens, who may read it, and how the user is told to open it.

Loopback (127.0.0.1, the default) is this computer only; anything else puts
the page on the workshop's network, where a key is required: the phone
gets it from the printed URL or the QR code drawn in the terminal.
"""

from __future__ import annotations

import ipaddress
import secrets
import socket
from dataclasses import dataclass
from urllib.parse import quote

from logger.errors import UserError

DEFAULT_HOST = "127.0.0.1"
KEY_BYTES = 16  # 128 bits from the system's secure source


@dataclass(frozen=True)
class WebAddress:
    host: str  # as given (a name or an address), without IPv6 brackets
    port: int  # 0: any free port

    @property
    def loopback(self) -> bool:
        return is_loopback(self.host)


def parse_web(text: str) -> WebAddress:
    """`PORT`, `HOST:PORT` or `[V6]:PORT`, as --web takes it; a bad value is one UserError line."""
    where = f"--web {text!r}"
    host, sep, port = text.rpartition(":")
    if not sep:
        host = DEFAULT_HOST
    elif host.startswith("[") and host.endswith("]"):
        host = host[1:-1]
    elif ":" in host:
        raise UserError(f"{where}: write an IPv6 address in brackets, e.g. [::1]:8080")
    if not host:
        raise UserError(f"{where}: the host before ':' is empty")
    if not port.isdigit() or int(port) > 65535:
        raise UserError(f"{where}: the port must be a number from 0 to 65535")
    return WebAddress(host, int(port))


def is_loopback(host: str) -> bool:
    """This computer only: `localhost` or an address in 127.0.0.0/8 or ::1."""
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def new_key() -> str:
    """A fresh key for one run: 128 random bits, URL-safe text."""
    return secrets.token_urlsafe(KEY_BYTES)


def allowed_hosts(address: WebAddress) -> frozenset[str]:
    """Host header names a loopback page answers to (against DNS rebinding): the loopback names and the bound one."""
    return frozenset({"localhost", "127.0.0.1", "[::1]", _url_host(address.host).lower()})


def page_url(address: WebAddress, port: int, key: str | None) -> str:
    """The URL to open: a wildcard bind is shown with this machine's own address, which a phone can reach."""
    host = address.host
    if host in ("0.0.0.0", "::"):
        host = _own_address(socket.AF_INET6 if host == "::" else socket.AF_INET)
    query = f"?key={quote(key, safe='')}" if key else ""
    return f"http://{_url_host(host)}:{port}/{query}"


def _url_host(host: str) -> str:
    return f"[{host}]" if ":" in host else host


def _own_address(family: int) -> str:
    """The first non-loopback address this machine's name resolves to locally; the name itself when none."""
    name = socket.gethostname()
    try:
        infos = socket.getaddrinfo(name, None, family, socket.SOCK_STREAM)
    except OSError:
        return name
    for info in infos:
        addr = info[4][0]
        if not is_loopback(addr):
            return addr
    return name
