"""`--web`, `--web-key` and `--speak`: the stand page and spoken results, for capture and demo alike."""

from __future__ import annotations

import sys

import click

from logger.errors import UserError
from logger.live.plainlog import PlainLog
from logger.live.speech import Speaker, find_engine
from logger.live.stand.address import new_key, page_url, parse_web
from logger.live.stand.listener import StandPage
from logger.live.stand.server import StandServer

MIN_KEY_CHARS = 8


def stand_options(f):
    opts = [
        click.option("--web", metavar="[HOST:]PORT", default=None,
                     help="Serve a live page for a phone or tablet (HOST 127.0.0.1 unless given; 0.0.0.0 for the "
                          "workshop network, which needs a key; PORT 0 picks a free one). The URL is printed as "
                          "'page: ...'."),
        click.option("--web-key", default=None, metavar="KEY",
                     help="The page's key instead of a fresh random one (it is a password; other users of this "
                          "computer can see it in the process list)."),
        click.option("--speak", is_flag=True, help="Speak each seating's result; phrases also go to the log as "
                                                  "'say: ...'."),
    ]
    for opt in reversed(opts):
        f = opt(f)
    return f


def stand_watchers(web: str | None, web_key: str | None, speak: bool, unit: str, shown) -> list:
    """The page (bound now, so a port in use fails before anything is captured) and the speaker, as listeners."""
    watchers = []
    if web is not None:
        address = parse_web(web)
        if web_key is not None and len(web_key) < MIN_KEY_CHARS:
            raise UserError(f"--web-key: at least {MIN_KEY_CHARS} characters, please (it is the page's password)")
        key = web_key or (None if address.loopback else new_key())
        server = StandServer(address, key)
        url = page_url(address, server.start(), key)
        click.echo(f"page: {url}")
        if not address.loopback and sys.stdout.isatty():
            _draw_qr(url)
        watchers.append(StandPage(server))
    if speak:
        watchers.append(Speaker(unit, _log_line(shown), find_engine()))
    return watchers


def _log_line(shown):
    """Where `say:` lines go: the plain log's timestamped lines, or above the live panel."""
    if isinstance(shown, PlainLog):
        return shown.say
    return lambda text: shown.console.print(text, markup=False, highlight=False)


def _draw_qr(url: str) -> None:
    """The page's URL as a QR code in the terminal, for the phone's camera (segno, half-block characters)."""
    import segno

    click.echo("scan this with the phone (the key in it is a password):")
    segno.make(url, error="m").terminal(out=sys.stdout, compact=True)
    sys.stdout.flush()
