"""Where the stand page listens, who may read it, and how the user is told to open it.

Loopback (127.0.0.1, the default) is this computer only; anything else puts
the page on the workshop's network, where a key is required: the phone
gets it from the printed URL or the QR code drawn in the terminal.
"""

from __future__ import annotations

import ipaddress
import itertools
import secrets
import socket
from collections.abc import Iterator
from dataclasses import dataclass
from urllib.parse import quote

from logger.errors import UserError

DEFAULT_HOST = "127.0.0.1"
KEY_BYTES = 16  # 128 bits from the system's secure source
# never routed (TEST-NET-1, RFC 5737; the documentation prefix, RFC 3849): only the route to them is looked up
ROUTE_PROBES = {socket.AF_INET: ("192.0.2.1", 9), socket.AF_INET6: ("2001:db8::1", 9)}


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
    """This machine's address on the network, the one a phone can reach; the host name only when there is none.

    The name alone is not enough: Debian and Raspberry Pi OS map it to 127.0.1.1, so the first
    candidate is the address the system would send from towards the outside, then (looked up only
    if needed) what the name resolves to. Loopback, unspecified and link-local addresses are passed
    over: a phone cannot open them.
    """
    for addr in itertools.chain(_routed_address(family), _named_addresses(family)):
        ip = ipaddress.ip_address(addr.split("%", 1)[0])  # an IPv6 address may carry its zone (fe80::1%eth0)
        if not (ip.is_loopback or ip.is_unspecified or ip.is_link_local):
            return addr
    return socket.gethostname()


def _routed_address(family: int) -> Iterator[str]:
    """The source address of the route to a documentation address: connecting a UDP socket sends nothing."""
    try:
        with socket.socket(family, socket.SOCK_DGRAM) as probe:
            probe.connect(ROUTE_PROBES[family])
            address = probe.getsockname()[0]
    except OSError:  # no route (no network), or no such family
        return
    yield address


def _named_addresses(family: int) -> Iterator[str]:
    """What this machine's name resolves to."""
    try:
        infos = socket.getaddrinfo(socket.gethostname(), None, family, socket.SOCK_STREAM)
    except (OSError, UnicodeError):
        return
    for info in infos:
        yield info[4][0]
