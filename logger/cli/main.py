"""The `saglog` group: gathers the commands and handles every exit in one place.

Every user error becomes one line on stderr with its exit status (2; 3 for a
device that never appeared), never a traceback.
"""

from __future__ import annotations

import difflib
import importlib
import sys

import click

from logger import __version__
from logger.errors import Stopped, UserError

EXIT_USER_ERROR = 2


# Commands are imported only when used, so `saglog --help` and the quick
# commands start fast (the plotting and statistics libraries are heavy).
COMMANDS = {
    "radius": "logger.cli.calc:radius",
    "plan": "logger.cli.calc:plan",
    "new-profile": "logger.cli.calc:new_profile",
    "calibrate": "logger.cli.calibrate:calibrate_cmd",
    "indicator-check": "logger.cli.indicator:indicator_check",
    "replay": "logger.cli.replay:replay_cmd",
    "capture": "logger.cli.capture:capture_cmd",
    "report": "logger.cli.reports:report_command",
    "history": "logger.cli.reports:history_command",
    "ports": "logger.cli.ports:ports",
    "simulate": "logger.cli.simulate:simulate_cmd",
    "demo": "logger.cli.demo:demo_cmd",
}


class SaglogGroup(click.Group):
    """A click group that never shows a traceback for something the user can fix."""

    def list_commands(self, ctx):
        return sorted(set(COMMANDS) | set(self.commands))

    def get_command(self, ctx, name):
        if name in COMMANDS and name not in self.commands:
            module, attr = COMMANDS[name].split(":")
            self.add_command(getattr(importlib.import_module(module), attr), name)
        return self.commands.get(name)

    def parse_args(self, ctx, args):
        """Bare `saglog` is a request for help, not an error: print it and end normally."""
        if not args:
            click.echo(ctx.get_help())
            ctx.exit(0)
        return super().parse_args(ctx, args)

    def resolve_command(self, ctx, args):
        """A mistyped command gets the nearest names ("did you mean ...?")."""
        name = args[0] if args else ""
        if name and not name.startswith("-") and self.get_command(ctx, name) is None:
            near = difflib.get_close_matches(name, self.list_commands(ctx), n=2, cutoff=0.6)
            hint = f"; did you mean {' or '.join(near)}?" if near else ""
            raise click.UsageError(f"no command '{name}'{hint}", ctx)
        return super().resolve_command(ctx, args)

    def format_commands(self, ctx, formatter):
        """The command list with each summary whole (its first sentence), wrapped rather than cut."""
        rows = [(name, self.get_command(ctx, name).get_short_help_str(limit=1000)) for name in self.list_commands(ctx)]
        with formatter.section("Commands"):
            formatter.write_dl(rows)

    def main(self, *args, **kwargs):
        kwargs["standalone_mode"] = False
        try:
            rv = super().main(*args, **kwargs)
        except click.exceptions.Exit as exc:
            sys.exit(exc.exit_code)
        except click.exceptions.Abort:
            click.echo("saglog: aborted", err=True)
            sys.exit(1)
        except click.UsageError as exc:
            cmd = exc.ctx.command_path if exc.ctx else "saglog"
            click.echo(f"saglog: error: {exc.format_message()} (see '{cmd} --help')", err=True)
            sys.exit(EXIT_USER_ERROR)
        except click.ClickException as exc:
            click.echo(f"saglog: error: {exc.format_message()}", err=True)
            sys.exit(EXIT_USER_ERROR)
        except Stopped as exc:  # Ctrl-C or SIGTERM before the job was done, its files complete
            click.echo(f"saglog: {exc}", err=True)
            sys.exit(exc.exit_status)
        except UserError as exc:  # its own exit status: 2, or 3 for a device that never appeared
            click.echo(f"saglog: error: {exc}", err=True)
            sys.exit(exc.exit_status)
        except ArithmeticError as exc:  # an input so extreme that the arithmetic overflows
            click.echo(f"saglog: error: a number on the command line or in the profile is out of range ({exc})",
                       err=True)
            sys.exit(EXIT_USER_ERROR)
        sys.exit(rv if isinstance(rv, int) else 0)


@click.group(cls=SaglogGroup, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="saglog")
def main():
    """Log a digital indicator on a spherometer and turn seatings into a radius of curvature.

    Lengths on the command line are in the profile's unit; every file a run
    writes holds millimetres.
    """
