"""`saglog capture`: live from the indicator into a run folder."""

from __future__ import annotations

import click

from logger.cli.options import NON_NEGATIVE, POSITIVE, analysis_options, terminal_watchers, view_option
from logger.cli.stand import stand_options, stand_watchers
from logger.live.capture import capture
from logger.live.present import result_lines
from logger.live.stop import Stop


@click.command("capture")
@click.option("--port", required=True, metavar="DEVICE|URL", help="Device path, COM name or URL (socket://host:port, rfc2217://, loop://).")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), metavar="DIR",
              help="The run folder to write (a folder, made if missing).")
@click.option("--baud", "baudrate", type=click.IntRange(50), default=9600, show_default=True, metavar="N")
@click.option("--bytesize", type=click.Choice(["5", "6", "7", "8"]), default="8", show_default=True)
@click.option("--parity", type=click.Choice(["N", "E", "O", "M", "S"]), default="N", show_default=True)
@click.option("--stopbits", type=click.Choice(["1", "1.5", "2"]), default="1", show_default=True)
@click.option("--poll", "poll", default=None, help="Request text to send for indicators that answer only when asked "
              "(backslash escapes allowed, e.g. '?\\r').")
@click.option("--poll-every", type=POSITIVE, default=0.1, show_default=True, help="Seconds between requests.")
@click.option("--duration", "duration_s", type=POSITIVE, default=None, help="Stop after this many seconds.")
@click.option("--seatings", "surface_seatings", type=click.IntRange(1), default=None, metavar="N",
              help="Stop after N accepted surface seatings.")
@click.option("--wait", "wait_s", type=NON_NEGATIVE, default=10.0, show_default=True,
              help="Seconds to wait for a device that is not there yet (then exit status 3).")
@click.option("--gather", "gather_s", type=click.FloatRange(0, 1), default=0.0, show_default=True, metavar="SECONDS",
              help="Let lines gather this long between reads (e.g. 0.1 on a small computer): far fewer wake-ups, "
                   "each result shown up to that much later, the gathered lines' times spread evenly.  A device "
                   "path (read meanwhile by a 'cat' child, so an unplug loses nothing) or socket:// only.")
@view_option
@click.option("--no-bells", is_flag=True, help="No bell cues (one ring accepted, two rejected, three zero set).")
@click.option("--quiet", "old_quiet", is_flag=True, hidden=True)  # the earlier name of --no-bells
@click.option("--force", is_flag=True,
              help="Write into a run folder that already holds a run (its old report files are removed).")
@stand_options
@analysis_options
def capture_cmd(port, out_dir, baudrate, bytesize, parity, stopbits, poll, poll_every, duration_s,
                surface_seatings, wait_s, gather_s, view, no_bells, old_quiet, force, web, web_key, speak, profile,
                run_settings):
    """Log the indicator live, notice every seating, and keep the run folder up to date.

    Seat on the flat first (the zero), then on the surface, and on the flat
    again at the end if you can (the drift check).  Ends at --duration,
    --seatings, Ctrl-C or SIGTERM.  Exit status 0, 2 for a user error, 3 when
    the device never appeared.
    """
    poll_bytes = poll.encode("latin-1").decode("unicode_escape").encode("latin-1") if poll else None
    stop = Stop.on_signals()
    watchers, shown = terminal_watchers(view, profile.unit, port, bells=not (no_bells or old_quiet))
    watchers += stand_watchers(web, web_key, speak, profile.unit, watchers[0])
    with shown:
        summary = capture(port, profile, run_settings, out_dir, baudrate=baudrate, bytesize=int(bytesize),
                          parity=parity, stopbits=float(stopbits), poll_command=poll_bytes,
                          poll_interval_s=poll_every, duration_s=duration_s, surface_seatings=surface_seatings,
                          wait_s=wait_s, listeners=watchers, force=force, stop=stop,
                          gather_s=gather_s)
    for line in result_lines(summary):
        click.echo(line)
    click.echo(f"run folder: {out_dir}")
