"""`saglog report` and `saglog history`: pictures and tables after the run."""

from __future__ import annotations

from pathlib import Path

import click

from logger.cli.options import POSITIVE
from logger.reports.history import write_history
from logger.reports.report import write_report
from logger.units import UNITS


@click.command("report")
@click.argument("run_dir", type=click.Path(file_okay=False, path_type=Path))
@click.option("--unit", type=click.Choice(UNITS), default=None, help="Show lengths in this unit (default: the run's).")
def report_command(run_dir: Path, unit: str | None):
    """Draw RUN_DIR/report.png and write RUN_DIR/report.md for one run folder."""
    png, md = write_report(run_dir, unit)
    click.echo(f"wrote {png}")
    click.echo(f"wrote {md}")



@click.command("history")
@click.argument("run_dirs", nargs=-1, required=True, type=click.Path(file_okay=False, path_type=Path))
@click.option("--out", "out", required=True, type=click.Path(dir_okay=False, path_type=Path),
              metavar="FILE.png", help="The picture to write (PNG); the table goes to FILE.csv beside it.")
@click.option("--target-radius", type=POSITIVE, default=None,
              help="Radius of curvature wanted (default: from the runs' summaries).")
@click.option("--tolerance", type=POSITIVE, default=None,
              help="Half-width of the band around the target (default: the runs' typical U).")
@click.option("--unit", type=click.Choice(UNITS), default=None,
              help="Unit of --target-radius, --tolerance and the picture (default: the latest run's).")
def history_command(run_dirs, out, target_radius, tolerance, unit):
    """Plot radius ± U of several runs against time, with the target, and say how the trend looks."""
    png, csv_path, trends = write_history(run_dirs, out, target_radius, tolerance, unit)
    for t in trends:
        click.echo(t.sentence)
    click.echo(f"wrote {png}")
    click.echo(f"wrote {csv_path}")

