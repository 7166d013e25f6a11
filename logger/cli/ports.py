"""`saglog ports`: list the serial ports so a user can find the indicator's adapter."""

from __future__ import annotations

import json

import click

from logger.transport.serial_source import list_ports


@click.command("ports")
@click.option("--json", "as_json", is_flag=True, help="Print the list as JSON.")
def ports(as_json: bool) -> None:
    """List the serial ports of this machine with their descriptions.

    The names differ by system: /dev/ttyUSB0 or /dev/ttyACM0 on Linux,
    /dev/cu.usbserial-XXXX or /dev/cu.usbmodemXXXX on macOS (the cu.
    name, not tty.), COM3 and the like on Windows.
    """
    found = list_ports()
    if as_json:
        click.echo(json.dumps(found, indent=2))
        return
    if not found:
        click.echo("No serial ports found. Plug in the indicator's adapter and run this again (it shows as "
                   "/dev/ttyUSB0 or /dev/ttyACM0 on Linux, /dev/cu.usbserial-... on macOS, COM3 or the like on "
                   "Windows); 'saglog simulate --pty' gives a virtual indicator.")
        return
    width = max(len(p["device"]) for p in found)
    for p in found:
        extra = f"  [{p['hwid']}]" if p["hwid"] and p["hwid"] != "n/a" else ""
        click.echo(f"{p['device']:<{width}}  {p['description']}{extra}")
    click.echo("Give one of these to --port; a network bridge is socket://HOST:PORT.")
