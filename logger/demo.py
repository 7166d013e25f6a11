"""`saglog demo`: the whole job end to end with no hardware.

A virtual indicator plays an invented session on a real pseudo-terminal; the
ordinary capture opens it like a USB serial adapter and analyses it live,
exactly as at the stand.  At the end it prints the result, the run folder,
and the commands to try next.
"""

from __future__ import annotations

import contextlib
import shutil
import sys
import time
from pathlib import Path

import click

from .capture import capture
from .liveview import LiveView, PlainLog
from .pipeline import RunSettings
from .present import result_lines
from .seating import DetectorSettings
from .session import AnalysisSettings
from .simulator import PtyServer, load_scenario, simulate

DEMO_SCENARIO = "demo-150-f8-fine"
TARGET_RADIUS_MM = 2400.0  # f/8 at 150 mm: R = 2 * 8 * 150
DIAMETER_MM = 150.0


def run_demo(out_dir: Path, live: bool = False, cues: bool = False) -> dict:
    scenario = load_scenario(DEMO_SCENARIO)
    profile = scenario.profile
    run = simulate(scenario)
    settings = RunSettings(DetectorSettings.for_step(profile.indicator.resolution_mm),
                           AnalysisSettings(target_radius_mm=TARGET_RADIUS_MM, diameter_mm=DIAMETER_MM,
                                            label="150 mm f/8 mirror (invented demo)"))
    server = PtyServer(run)
    view = LiveView(profile.unit) if live else PlainLog(profile.unit)
    duration_s = run.duration_s + 1.0  # real time: the seatings last as long as at the stand
    with server:  # starts serving; the scenario clock starts when the capture opens the device
        with view if live else contextlib.nullcontext():
            summary = capture(server.path, profile, settings, out_dir, view=view, cues=cues,
                              duration_s=duration_s, wait_s=5.0)
    return summary


@click.command("demo")
@click.option("--out", "out_dir", type=click.Path(file_okay=False), default=None,
              help="Run folder (default: runs/demo-<time>).")
@click.option("--view", type=click.Choice(["auto", "live", "plain"]), default="auto", show_default=True)
def demo_cmd(out_dir, view):
    """Capture an invented session from a virtual indicator on a real pseudo-terminal.

    A 150 mm f/8 mirror in fine grinding (invented numbers): four seatings on
    the flat, ten on the mirror (one with grit under a foot), three on the
    flat again.  Takes about a minute.
    """
    out = Path(out_dir) if out_dir else Path("runs") / time.strftime("demo-%Y%m%d-%H%M%S")
    live = view == "live" or (view == "auto" and sys.stdout.isatty())
    click.echo("saglog demo: an invented 150 mm f/8 mirror, played by a virtual indicator on a pseudo-terminal")
    summary = run_demo(out, live=live)
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
    profile = Path(__file__).resolve().parent / "profiles" / "example-three-ball.toml"
    try:
        profile = profile.relative_to(Path.cwd())
    except ValueError:
        pass
    return [
        (f"{prog} report {out}", "draws report.png and writes report.md in the run folder"),
        (f"{prog} replay {out}/stream.rec --profile {profile} --out {out}-grubbs --rejection grubbs",
         "the same recording analysed again with Grubbs' test"),
        (f"{prog} plan --profile {profile} --diameter 150 --focal-ratio 8", "what to grind for f/8"),
        (f"{prog} simulate --pty", "a virtual indicator to capture from in another terminal"),
    ]
