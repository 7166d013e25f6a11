"""The stand page's server on real loopback sockets: who may read it, what it serves, and a client that stalls.

Status codes and headers are checked against HTTP semantics (RFC 9110: 403
Forbidden, 404 Not Found, 405 Method Not Allowed with an Allow header), the
event stream against the Server-Sent Events format (WHATWG HTML, "Server-sent
events": `data:` lines, a blank line ends an event), the key's size against
the brief (>= 128 bits, Python's `secrets`).
"""

from __future__ import annotations

import base64
import ipaddress
import json
import re
import socket
import subprocess
import sys
import time
from importlib import resources

import pytest

from logger.errors import UserError
from logger.live.stand.address import WebAddress, new_key, page_url, parse_web
from logger.live.stand.server import StandServer, bind
from tests.helpers.paths import ROOT
from tests.helpers.stand import EventReader, request, saglog_env, wait_for

KEY = "a-test-key-0123456789"
PATHS = ("/", "/state.json", "/events", "/stand.js", "/stand.css")


@pytest.fixture
def loopback():
    server = StandServer(WebAddress("127.0.0.1", 0), None)
    port = server.start()
    server.publish({"state": "lifted", "radius_mm": 2436.0})
    wait_for(lambda: json.loads(request(port, "/state.json")[2]).get("state") == "lifted", 5, "the first state")
    yield port
    server.stop()


@pytest.fixture
def keyed():
    server = StandServer(WebAddress("0.0.0.0", 0), KEY)  # on every interface; the tests talk to 127.0.0.1 only
    yield server.start()
    server.stop()


def packaged_files() -> set[bytes]:
    folder = resources.files("logger.live.stand") / "assets"
    return {f.read_bytes() for f in folder.iterdir() if f.is_file()}


def test_the_page_state_and_events_on_loopback_with_their_headers(loopback):
    status, headers, body = request(loopback, "/")
    assert status == 200 and headers["content-type"].startswith("text/html") and b"stand.js" in body
    assert "default-src 'self'" in headers["content-security-policy"]
    assert headers["x-content-type-options"] == "nosniff" and headers["referrer-policy"] == "no-referrer"
    status, headers, body = request(loopback, "/state.json")
    assert status == 200 and headers["cache-control"] == "no-store"
    assert json.loads(body) == {"state": "lifted", "radius_mm": 2436.0}
    status, headers, _ = request(loopback, "/events")
    assert status == 200 and headers["content-type"].startswith("text/event-stream")
    assert headers["cache-control"] == "no-store"


@pytest.mark.parametrize("host", ["localhost", "localhost:{port}", "127.0.0.1:{port}", "[::1]:{port}", "LOCALHOST"])
def test_loopback_answers_its_own_names(loopback, host):
    assert request(loopback, "/state.json", host=host.format(port=loopback))[0] == 200


@pytest.mark.parametrize("host", ["evil.example", "evil.example:{port}", "127.0.0.1.evil.example", "localhost.evil",
                                  "192.168.1.20:{port}", "", "[::2]:{port}"])
def test_loopback_refuses_other_host_names_against_dns_rebinding(loopback, host):
    for path in PATHS:
        assert request(loopback, path, host=host.format(port=loopback))[0] == 403


def test_beyond_loopback_every_path_needs_the_key(keyed):
    for path in PATHS:
        assert request(keyed, path)[0] == 403
        assert request(keyed, path + "?key=wrong")[0] == 403
        assert request(keyed, path + "?key=" + KEY[:-1])[0] == 403
        assert request(keyed, path + "?key=" + KEY, host="any.name.example")[0] == 200  # the key decides here
    assert request(keyed, "/nothing-here")[0] == 403  # a stranger learns nothing, not even what exists
    assert request(keyed, "/", method="POST")[0] == 403


def test_the_page_carries_the_key_to_its_own_files(keyed):
    body = request(keyed, "/?key=" + KEY)[2].decode()
    assert f"stand.js?key={KEY}" in body and f"stand.css?key={KEY}" in body


@pytest.mark.parametrize("method", ["POST", "PUT", "DELETE", "PATCH", "HEAD", "OPTIONS"])
def test_read_only_other_methods_are_405(keyed, method):
    for path in PATHS:
        status, headers, _ = request(keyed, path + "?key=" + KEY, method=method)
        assert status == 405 and headers["allow"] == "GET"


@pytest.mark.parametrize("target", [
    "/../../../../etc/passwd", "/%2e%2e/%2e%2e/etc/passwd", "/..%2f..%2f..%2fetc%2fpasswd", "/%2fetc%2fpasswd",
    "//etc/passwd", "/stand.js/../../../pyproject.toml", "/assets/stand.js", "/index.html", "/logger/__init__.py",
    "/%252e%252e/%252e%252e/pyproject.toml", "/.%2e/.%2e/pyproject.toml", "/state.json/..%5c..%5cpyproject.toml",
    "/stand.js%00.html", "/./stand.js/..", "/assets/../../../etc/hostname",
])
def test_traversal_never_reaches_the_disk(loopback, target):
    status, _, body = request(loopback, target)
    # only 404, or (where the URL's dot segments resolve to one of its paths) a packaged file itself
    assert status == 404 or (status == 200 and body in packaged_files()), (status, body[:80])
    assert b"root:" not in body and b"[build-system]" not in body and b"__version__" not in body


def test_unknown_paths_are_404(loopback):
    for target in ("/favicon.ico", "/state", "/events/", "/state.json.bak", "/STAND.JS"):
        assert request(loopback, target)[0] == 404


def test_a_port_in_use_is_one_clear_error():
    taken = socket.create_server(("127.0.0.1", 0))
    try:
        with pytest.raises(UserError, match="is in use"):
            bind(WebAddress("127.0.0.1", taken.getsockname()[1]))
    finally:
        taken.close()


@pytest.mark.parametrize("host, words", [("192.0.2.1", "not an address of this machine"),  # TEST-NET-1, RFC 5737
                                         ("no-such-host.invalid", "not a name or address")])  # RFC 6761
def test_a_host_that_is_not_this_machine_is_one_clear_error(host, words):
    with pytest.raises(UserError, match=words):
        bind(WebAddress(host, 0))


@pytest.mark.parametrize("text, host, port", [("8080", "127.0.0.1", 8080), ("0.0.0.0:80", "0.0.0.0", 80),
                                              ("[::1]:9", "::1", 9), ("localhost:0", "localhost", 0)])
def test_web_option_values(text, host, port):
    assert parse_web(text) == WebAddress(host, port)


@pytest.mark.parametrize("text", ["::1:80", "x", "70000", ":80", "host:", "1.2.3.4:-1", "[::1]"])
def test_bad_web_option_values_are_user_errors(text):
    with pytest.raises(UserError, match="--web"):
        parse_web(text)


def test_keys_are_fresh_and_at_least_128_bits():
    keys = {new_key() for _ in range(50)}
    assert len(keys) == 50
    for k in keys:
        assert len(base64.urlsafe_b64decode(k + "=" * (-len(k) % 4))) * 8 >= 128
    assert page_url(WebAddress("0.0.0.0", 0), 8080, "a b&c").endswith(":8080/?key=a%20b%26c")


def test_a_wildcard_page_url_shows_an_address_of_this_machine_beyond_loopback_not_its_name():
    """Also where the name resolves to loopback only (Debian and Raspberry Pi OS, and the test machine)."""
    host = re.fullmatch(r"http://([^:/]+):8080/\?key=k", page_url(WebAddress("0.0.0.0", 0), 8080, "k")).group(1)
    assert host != socket.gethostname()
    ip = ipaddress.ip_address(host)  # a literal, not a name
    assert ip.version == 4 and not ip.is_loopback and not ip.is_unspecified
    with socket.socket() as own:
        own.bind((host, 0))  # only this machine's own addresses can be bound


def test_without_a_network_the_page_url_falls_back_to_the_name():
    """In a network namespace of its own (loopback only) there is no address to show but the name."""
    probe = [sys.executable, "-c", "from logger.live.stand.address import WebAddress, page_url; "
             "print(page_url(WebAddress('0.0.0.0', 0), 8080, None), page_url(WebAddress('::', 0), 8080, None))"]
    out = subprocess.run(["unshare", "-rn", *probe], capture_output=True, text=True, env=saglog_env(), cwd=ROOT)
    assert out.returncode == 0, f"needs a network namespace of its own (unshare -rn; CI runs as root): {out.stderr}"
    name = socket.gethostname()
    assert out.stdout.split() == [f"http://{name}:8080/", f"http://{name}:8080/"]


def test_a_stalled_client_is_dropped_and_a_reading_one_hears_everything():
    server = StandServer(WebAddress("127.0.0.1", 0), None)
    port = server.start()
    try:
        reader = EventReader(port)
        reader.start()
        stalled = socket.socket()
        stalled.setsockopt(socket.SOL_SOCKET, socket.SO_RCVBUF, 4096)  # a tiny window, never read
        stalled.connect(("127.0.0.1", port))
        stalled.sendall(f"GET /events HTTP/1.1\r\nHost: 127.0.0.1:{port}\r\n\r\n".encode())
        wait_for(lambda: server.clients == 2, 10, "both clients to connect")
        padding = "x" * 100_000  # large events fill the stalled client's buffers quickly
        for n in range(1, 301):
            server.publish({"n": n, "padding": padding})
            time.sleep(0.005)  # the capture publishes a few times a second; here two hundred times
            if server.dropped:
                break
        last = n
        wait_for(lambda: server.dropped == 1, 20, "the stalled client to be dropped")
        server.publish({"n": last + 1})
        wait_for(lambda: reader.states and reader.states[-1]["n"] == last + 1, 10, "the reader to hear the last")
        assert [s["n"] for s in reader.states[1:]] == list(range(1, last + 2))  # every one, in order
        assert server.clients == 1
        stalled.close()
    finally:
        server.stop()
    reader.join(10)
    assert not reader.is_alive()


def test_stop_ends_open_event_streams():
    server = StandServer(WebAddress("127.0.0.1", 0), None)
    port = server.start()
    readers = [EventReader(port) for _ in range(3)]
    for r in readers:
        r.start()
    wait_for(lambda: all(r.states for r in readers), 10, "every reader's first state")
    server.stop()
    for r in readers:
        r.join(10)
        assert not r.is_alive()
    with pytest.raises(OSError):
        request(port, "/")  # nobody listens any more
