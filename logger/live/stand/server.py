"""The stand page's web server: aiohttp on its own thread and event loop, read-only.

Why aiohttp: one well-kept library that is both the server and the
streaming response (Server-Sent Events need nothing more than a
`StreamResponse` that is written to), runs inside an event loop we own on
our own thread with no signal handlers of its own, and takes a socket we
bound ourselves -- so a port in use or a foreign host is a UserError raised
in the capture's thread before anything is captured.

Capture comes first: the capture thread only ever calls `publish`, which
hands the state to the loop (`call_soon_threadsafe`) and returns.  Each
client has a bounded queue; a client whose queue is full (it stopped
reading, or reads too slowly) is dropped -- its connection aborted -- and
never waited for.

Security: every request needs the key when there is one (403), a loopback
page answers only to loopback Host names (403, against DNS rebinding),
only GET on the page's own paths (405, 404), nothing from disk (the
packaged files are read once at start), and every answer carries a
Content-Security-Policy of 'self', nosniff, no-referrer and no-store.
"""

from __future__ import annotations

import asyncio
import errno
import json
import logging
import secrets
import socket
import threading
from importlib import resources
from urllib.parse import quote

from aiohttp import web

from logger.errors import UserError
from logger.live.stand.address import WebAddress, allowed_hosts
from logger.run.writer import without_nan

QUEUE_EVENTS = 32  # per client: about five seconds of updates before a stalled client is dropped
MAX_CLIENTS = 64  # beyond this, new event streams are refused (503)
PING_S = 5.0  # a keep-alive event, so the page notices a silent loss of the connection
HEADERS = {
    "Content-Security-Policy": ("default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self'; "
                                "connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'"),
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-store",
}
ASSETS = {"/stand.css": ("stand.css", "text/css"), "/stand.js": ("stand.js", "text/javascript")}
PING = b"event: ping\ndata: {}\n\n"

logging.getLogger("aiohttp").addHandler(logging.NullHandler())  # no aiohttp messages on the capture's terminal


def bind(address: WebAddress) -> socket.socket:
    """A listening socket on the address, or one UserError line saying why not."""
    where = f"--web {address.host}:{address.port}"
    try:
        family, _, _, _, sockaddr = socket.getaddrinfo(address.host, address.port, type=socket.SOCK_STREAM,
                                                       flags=socket.AI_PASSIVE)[0]
        return socket.create_server(sockaddr[:2], family=family)
    except socket.gaierror as exc:
        raise UserError(f"{where}: {address.host} is not a name or address this machine knows ({exc.strerror})") \
            from None
    except OSError as exc:
        if exc.errno == errno.EADDRINUSE:
            why = f"port {address.port} is in use on {address.host}: choose another port"
        elif exc.errno == errno.EADDRNOTAVAIL:
            why = f"{address.host} is not an address of this machine"
        elif exc.errno == errno.EACCES:
            why = f"port {address.port} needs privileges: choose one above 1023"
        else:
            why = exc.strerror or str(exc)
        raise UserError(f"{where}: {why}") from None


class _Client:
    """One event stream: its bounded queue and its connection (to abort it when it falls behind)."""

    def __init__(self, transport):
        self.queue: asyncio.Queue[bytes | None] = asyncio.Queue(QUEUE_EVENTS)
        self.transport = transport
        self.task = asyncio.current_task()  # the request handler that writes this stream

    def abort(self) -> None:
        if self.transport is not None:
            self.transport.abort()


class _Hub:
    """The latest state and the clients that hear each new one (lives in the server's loop)."""

    def __init__(self):
        self.latest = "{}"
        self.clients: set[_Client] = set()
        self.dropped = 0

    def publish(self, state: dict) -> None:
        self.latest = json.dumps(without_nan(state), separators=(",", ":"), allow_nan=False)
        frame = f"data: {self.latest}\n\n".encode()
        for client in list(self.clients):
            try:
                client.queue.put_nowait(frame)
            except asyncio.QueueFull:  # it stopped reading: drop it, never wait for it
                self.leave(client)
                client.abort()
                self.dropped += 1

    def join(self, transport) -> _Client:
        client = _Client(transport)
        client.queue.put_nowait(f"data: {self.latest}\n\n".encode())  # a new or returning page catches up at once
        self.clients.add(client)
        return client

    def leave(self, client: _Client) -> None:
        self.clients.discard(client)

    def close_all(self) -> list[asyncio.Task]:
        """End every stream after what it has queued (the run's final state); returns their handlers."""
        tasks = []
        for client in list(self.clients):
            self.leave(client)
            try:
                client.queue.put_nowait(None)  # the end of the stream, after the frames before it
            except asyncio.QueueFull:
                client.abort()
            tasks.append(client.task)
        return tasks


class StandServer:
    """The server on its own thread; `start` binds (or raises UserError), `publish` never blocks."""

    def __init__(self, address: WebAddress, key: str | None):
        self.address = address
        self.key = key
        self.hosts = allowed_hosts(address) if address.loopback else None
        self.port: int | None = None
        self._hub = _Hub()
        self._loop: asyncio.AbstractEventLoop | None = None
        self._thread: threading.Thread | None = None
        folder = resources.files("logger.live.stand") / "assets"
        page = (folder / "index.html").read_text("utf-8").replace("__KEY__", quote(key or "", safe=""))
        self._files = {path: ((folder / name).read_bytes(), kind) for path, (name, kind) in ASSETS.items()}
        self._files["/"] = (page.encode(), "text/html")

    @property
    def clients(self) -> int:
        """Event streams open now."""
        return len(self._hub.clients)

    @property
    def dropped(self) -> int:
        """Event streams dropped so far for falling behind."""
        return self._hub.dropped

    # -- the capture's side ------------------------------------------------
    def start(self) -> int:
        """Bind, start the loop's thread, return the port (a UserError when the address cannot be had)."""
        sock = bind(self.address)
        self.port = sock.getsockname()[1]
        ready = threading.Event()
        self._thread = threading.Thread(target=self._main, args=(sock, ready), name="stand-page", daemon=True)
        self._thread.start()
        ready.wait(10.0)
        return self.port

    def publish(self, state: dict) -> None:
        """Hand a new state to the page (from any thread): returns at once."""
        loop = self._loop
        if loop is None:
            return
        try:
            loop.call_soon_threadsafe(self._hub.publish, state)
        except RuntimeError:
            pass  # the loop has just closed: the page ends with the run

    def stop(self) -> None:
        """End the event streams and the server; waits a few seconds at most."""
        loop = self._loop
        if loop is not None and self._thread is not None:
            try:
                loop.call_soon_threadsafe(loop.stop)
            except RuntimeError:
                pass
            self._thread.join(5.0)

    # -- the server's thread ----------------------------------------------
    def _main(self, sock: socket.socket, ready: threading.Event) -> None:
        loop = asyncio.new_event_loop()
        asyncio.set_event_loop(loop)
        runner = web.AppRunner(self._app(), access_log=None, shutdown_timeout=1.0)
        try:
            loop.run_until_complete(runner.setup())
            loop.run_until_complete(web.SockSite(runner, sock).start())
            self._loop = loop
        finally:
            ready.set()
        loop.run_forever()
        self._loop = None
        loop.run_until_complete(self._shutdown(runner))
        loop.close()

    async def _shutdown(self, runner: web.AppRunner) -> None:
        """Open event streams first (they would keep the server waiting), then the server itself."""
        streams = self._hub.close_all()
        if streams:
            _, late = await asyncio.wait(streams, timeout=1.0)
            for task in late:  # a page that does not take its last frames in a second is cut off
                task.cancel()
            if late:
                await asyncio.wait(late, timeout=1.0)
        await runner.cleanup()

    def _app(self) -> web.Application:
        app = web.Application(middlewares=[self._guard])
        app.on_response_prepare.append(_headers)
        app.router.add_get("/", self._file, allow_head=False)
        for path in ASSETS:
            app.router.add_get(path, self._file, allow_head=False)
        app.router.add_get("/state.json", self._state, allow_head=False)
        app.router.add_get("/events", self._events, allow_head=False)
        return app

    @web.middleware
    async def _guard(self, request: web.Request, handler):
        """Host (on loopback) and key before anything else: a stranger learns nothing, not even a 404."""
        if self.hosts is not None and _host_name(request.headers.get("Host", "")) not in self.hosts:
            raise web.HTTPForbidden(text="403: this page answers only to localhost, 127.0.0.1 or [::1]\n")
        if self.key is not None and not secrets.compare_digest(request.query.get("key", "").encode(),
                                                               self.key.encode()):
            raise web.HTTPForbidden(text="403: the page's key is missing or wrong: open the URL saglog printed\n")
        return await handler(request)

    async def _file(self, request: web.Request) -> web.Response:
        body, kind = self._files[request.path]
        return web.Response(body=body, content_type=kind, charset="utf-8")

    async def _state(self, request: web.Request) -> web.Response:
        return web.Response(text=self._hub.latest, content_type="application/json")

    async def _events(self, request: web.Request) -> web.StreamResponse:
        if len(self._hub.clients) >= MAX_CLIENTS:
            raise web.HTTPServiceUnavailable(text="503: too many pages open\n")
        resp = web.StreamResponse(headers={"Content-Type": "text/event-stream"})
        await resp.prepare(request)
        client = self._hub.join(request.transport)
        try:
            await resp.write(b"retry: 1000\n\n")  # the browser reconnects after a second
            while True:
                try:
                    frame = await asyncio.wait_for(client.queue.get(), PING_S)
                except asyncio.TimeoutError:
                    frame = PING
                if frame is None:
                    break  # the server is stopping
                await resp.write(frame)
        except (ConnectionError, RuntimeError, asyncio.CancelledError):
            pass  # the page went away, was dropped for falling behind, or the server is stopping
        finally:
            self._hub.leave(client)
        return resp


async def _headers(request: web.Request, response: web.StreamResponse) -> None:
    response.headers.update(HEADERS)


def _host_name(host: str) -> str:
    """The name part of a Host header (`[::1]:8080` -> `[::1]`, `localhost:80` -> `localhost`), lower case."""
    host = host.strip().lower()
    if host.startswith("["):
        return host[:host.find("]") + 1]
    return host.rpartition(":")[0] if ":" in host else host
