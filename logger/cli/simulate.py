"""`saglog simulate`: the virtual indicator on a pty, a TCP port, or into a recording."""

from __future__ import annotations

import signal
import sys
from pathlib import Path

import click

from logger.cli.options import POSITIVE
from logger.errors import UserError, already_exists, cannot_write
from logger.simulator.model import simulate, write_recording
from logger.simulator.scenario import DEFAULT_SCENARIO, load_scenario
from logger.simulator.serve import PtyServer, TcpServer, virtual_device


@click.command("simulate")
@click.option("--pty", "use_pty", is_flag=True,
              help="Serve on a pseudo-terminal (a socket:// URL where there is none); prints its path first.")
@click.option("--tcp", "tcp_port", type=click.IntRange(0, 65535), default=None, metavar="PORT", help="Serve on 127.0.0.1:PORT (0: any free port).")
@click.option("--rec", "rec_path", type=click.Path(dir_okay=False), default=None,
              help="Write the whole run to a .rec recording at once (no real time); an existing FILE needs --force.")
@click.option("--force", is_flag=True, help="Replace the --rec or --truth FILE if it exists.")
@click.option("--scenario", default=None, metavar="NAME|FILE",
              help=f"Scenario name (shipped with saglog) or TOML file (default: {DEFAULT_SCENARIO}).")
@click.option("--seed", type=int, default=None, metavar="N", help="Random seed (default: the scenario's).")
@click.option("--rate", type=POSITIVE, default=None, help="Lines per second (overrides the scenario).")
@click.option("--truth", "truth_path", type=click.Path(dir_okay=False), default=None,
              help="Write the run's truth (radius, seatings) as JSON; an existing FILE needs --force.")
@click.option("--speed", type=POSITIVE, default=1.0, show_default=True, help="Time factor (2: twice as fast).")
@click.option("--link", "link_path", default=None, metavar="PATH", help="Also make a symlink to the pty at this path.")
def simulate_cmd(use_pty, tcp_port, rec_path, force, scenario, seed, rate, truth_path, speed, link_path):
    """A virtual dial indicator on a spherometer, streaming an invented session.

    With --pty, open the printed device path with saglog capture or with any
    serial terminal program (any baud rate; the pty ignores it).
    """
    if sum(x is not None and x is not False for x in (use_pty or None, tcp_port, rec_path)) != 1:
        raise UserError("simulate: give exactly one of --pty, --tcp PORT or --rec FILE")
    if force and not (rec_path or truth_path):
        raise UserError("--force is for --rec FILE or --truth FILE: it replaces an existing one")
    for path in (rec_path, truth_path):  # e.g. a capture's stream.rec: never lost unasked
        if path and Path(path).exists() and not force:
            raise already_exists(path)
    sc = load_scenario(scenario)
    if rate is not None:
        sc = sc.with_overrides(rate_hz=rate)
    run = simulate(sc, seed)
    if truth_path:
        try:
            run.write_truth(truth_path)
        except OSError as exc:
            raise cannot_write(truth_path, exc) from None
    if rec_path:
        write_recording(run, rec_path)
        click.echo(f"{rec_path}: {run.truth['duration_s']:g} s of scenario {sc.name!r}, seed {run.seed}")
        return
    try:
        server = virtual_device(run, speed, link_path) if use_pty else TcpServer(run, tcp_port, speed)
    except OSError as exc:
        raise UserError(f"simulate: cannot serve ({exc.strerror or exc})") from None
    old = signal.signal(signal.SIGTERM, lambda *_: server._stop.set())  # before the path: a client may stop us at once
    click.echo(server.path)
    sys.stdout.flush()
    if use_pty and not isinstance(server, PtyServer):
        click.echo(f"no pseudo-terminal on this system: serving on {server.path} instead", err=True)
    try:
        server.start()
        while not server.wait(0.2):
            pass
    except KeyboardInterrupt:
        pass
    finally:
        server.stop()
        signal.signal(signal.SIGTERM, old)
    click.echo(f"served {server.lines_sent} lines ({server.lines_dropped} dropped while no client was connected)",
               err=True)
