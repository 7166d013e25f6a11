"""`saglog replay`: the whole analysis again on a recording."""

from __future__ import annotations

import click

from logger.cli.options import POSITIVE, analysis_options
from logger.errors import Stopped
from logger.live.present import result_lines
from logger.live.replay import replay_file
from logger.live.stop import Stop


@click.command("replay")
@click.argument("recording", type=click.Path(dir_okay=False), metavar="REC")
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False), metavar="DIR",
              help="The run folder to write (a folder, made if missing).")
@click.option("--rate", "rate_hz", type=POSITIVE, default=None,
              help="Lines per second of a plain capture (no timestamps); a .rec has its own times.")
@click.option("--force", is_flag=True,
              help="Overwrite a run folder that already holds a run (its old report files are removed).")
@analysis_options
def replay_cmd(recording, out_dir, rate_hz, force, profile, run_settings):
    """Run the whole analysis on a recording (REC) and write the run folder.

    Use it to re-analyse an old run with other thresholds or another
    rejection method: the recording is never changed.  Ctrl-C or SIGTERM
    stops it early with the run of the lines read so far, whole, in the run
    folder (exit status 1).
    """
    try:
        summary = replay_file(recording, profile, run_settings, out_dir, rate_hz, force, stop=Stop.on_signals())
    except Stopped as stopped:  # the result of the lines read so far, then the one line that says it stopped
        _show(stopped.summary, out_dir)
        raise
    _show(summary, out_dir)


def _show(summary: dict, out_dir) -> None:
    for line in result_lines(summary):
        click.echo(line)
    click.echo(f"run folder: {out_dir}")

