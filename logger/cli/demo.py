"""`saglog demo`: the whole job end to end with no hardware."""

from __future__ import annotations

import shutil
import sys
import time
from pathlib import Path

import click

from logger.cli.options import terminal_watchers, view_option
from logger.cli.stand import stand_options, stand_watchers
from logger.live.demo import demo_device, device_words, run_demo
from logger.live.present import result_lines
from logger.live.stop import Stop
from logger.run.columns import RECORDING_FILE, REPORT_PICTURE, REPORT_TEXT


@click.command("demo")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None, metavar="DIR",
              help="The run folder to write (a folder; default runs/demo-<time>).")
@view_option
@stand_options
def demo_cmd(out_dir, view, web, web_key, speak):
    """Capture an invented session from a virtual indicator on a real pseudo-terminal (or a loopback port).

    A 150 mm f/8 mirror in fine grinding (invented numbers): four seatings on
    the flat, ten on the mirror (one with grit under a foot), three on the
    flat again.  Takes about a minute; Ctrl-C ends it early like a capture,
    with the result so far and a complete run folder.
    """
    out = Path(out_dir) if out_dir else Path("runs") / time.strftime("demo-%Y%m%d-%H%M%S")
    server = demo_device()
    click.echo(f"saglog demo: an invented 150 mm f/8 mirror, played by a virtual indicator on {device_words(server)}")
    watchers, shown = terminal_watchers(view, "mm", "virtual indicator", bells=False)
    watchers += stand_watchers(web, web_key, speak, "mm", watchers[0])
    stop = Stop.on_signals()
    with shown:
        summary = run_demo(out, watchers, server, stop)
    click.echo("")
    for line in result_lines(summary):
        click.echo(line)
    click.echo(f"run folder: {out}")
    click.echo("\nnext, try:")
    for cmd, why in next_commands(out):
        click.echo(f"  {cmd}" + (f"\n      ({why})" if why else ""))


def next_commands(out: Path) -> list[tuple[str, str]]:
    """What to try after the demo, spelt as this user can run it (`.venv/bin/saglog` after `make demo`)."""
    argv0 = Path(sys.argv[0])
    prog = str(argv0) if argv0.name == "saglog" and not shutil.which("saglog") else "saglog"
    profile = "example-three-ball"  # by name: works wherever saglog is installed
    return [
        (f"{prog} report {out}", f"draws {REPORT_PICTURE} and writes {REPORT_TEXT} in the run folder"),
        (f"{prog} replay {out}/{RECORDING_FILE} --profile {profile} --out {out}-grubbs --rejection grubbs",
         "the same recording analysed again with Grubbs' test"),
        (f"{prog} plan --profile {profile} --diameter 150 --focal-ratio 8", "what to grind for f/8"),
        (f"{prog} simulate --pty", "a virtual indicator to capture from in another terminal"),
    ]

