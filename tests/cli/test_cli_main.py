"""The `saglog` group as a newcomer meets it: bare `saglog`, a typo, the command list."""

from __future__ import annotations

import re

from tests.helpers.paths import run_saglog
from logger.cli.main import COMMANDS


def test_bare_saglog_prints_the_help_and_ends_normally():
    r = run_saglog()
    assert r.returncode == 0 and r.stderr == ""
    assert r.stdout.startswith("Usage: saglog") and "Commands:" in r.stdout


def test_every_summary_in_the_command_list_is_whole():
    listing = run_saglog("--help").stdout.split("Commands:", 1)[1]
    assert "..." not in listing
    # each entry, its wrapped lines joined, ends a sentence
    entries = re.split(r"\n  (?=\S)", "\n" + listing.strip("\n"))
    names = [e.split()[0] for e in entries if e.strip()]
    assert names == sorted(COMMANDS)
    for e in entries:
        if e.strip():
            text = " ".join(e.split()[1:])
            assert text.endswith("."), e


def test_a_mistyped_command_gets_the_nearest_name():
    r = run_saglog("repaly", "x.rec")
    assert r.returncode == 2 and r.stderr.strip() == "saglog: error: no command 'repaly'; did you mean replay? (see 'saglog --help')"
    far = run_saglog("xyzzy")
    assert far.returncode == 2 and "did you mean" not in far.stderr and "xyzzy" in far.stderr
