"""Option types as every help shows them: one unit choice, one profile metavar, each --out saying what it is."""

from __future__ import annotations

import click
import pytest

from logger.cli.main import COMMANDS, main


def _options(name):
    ctx = click.Context(main)
    return {p.name: p for p in main.get_command(ctx, name).params if isinstance(p, click.Option)}


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_unit_profile_and_out_mean_one_thing_everywhere(name):
    opts = _options(name)
    units = [p for p in opts.values() if p.opts[0] in ("--unit", "--indicator-unit")]
    for p in units:
        assert isinstance(p.type, click.Choice) and tuple(p.type.choices) == ("mm", "in"), (name, p.opts)
    if "profile_path" in opts:
        assert opts["profile_path"].metavar == "FILE|NAME", name
    outs = [p for p in opts.values() if p.opts[0] == "--out"]
    for p in outs:  # a folder is DIR, a file names its kind
        assert p.metavar in ("DIR", "FILE.png", "FILE.toml"), (name, p.metavar)
        kind = {"DIR": "folder", "FILE.png": "PNG", "FILE.toml": "TOML"}[p.metavar]
        assert kind in p.help, (name, p.help)

