"""The README's worked examples are what the commands print.

Every console block of README.md (indented lines starting `$ saglog`) is
run as written, in order, in one scratch folder, through the real command
line; every output line the README shows under a command (a `...` line
stands for lines left out) must be among the command's output lines, in
the same order.  The scenarios are seeded, so the invented numbers are
fixed: a change that moves them must move the README with it.
"""

from __future__ import annotations

import shlex

import pytest

from tests.helpers.paths import ROOT, run_saglog

README = (ROOT / "README.md").read_text()


def console_steps() -> list[tuple[int, list[str], list[str]]]:
    """(README line, the command's arguments, the output lines shown) for each `$ saglog` line."""
    steps = []
    lines = README.splitlines()
    for k, line in enumerate(lines):
        if not line.startswith("    $ saglog "):
            continue
        shown = []
        for after in lines[k + 1:]:
            if not after.startswith("    ") or after.startswith("    $ "):
                break
            shown.append(after[4:])
        steps.append((k + 1, shlex.split(line[len("    $ saglog "):]), shown))
    return steps


STEPS = console_steps()


def test_the_readme_has_worked_examples():
    assert len(STEPS) >= 8


def test_every_worked_example_prints_what_the_readme_shows(tmp_path):
    for lineno, args, shown in STEPS:
        r = run_saglog(*args, cwd=tmp_path)
        assert r.returncode == 0, f"README.md:{lineno}: saglog {shlex.join(args)}\n{r.stderr}"
        got = (r.stdout + r.stderr).splitlines()
        at = 0
        for want in (x for x in shown if x.strip() != "..."):
            try:
                at = got.index(want, at) + 1
            except ValueError:
                pytest.fail(f"README.md:{lineno}: saglog {shlex.join(args)} did not print, after what came "
                            f"before it in the README:\n  {want}\nit printed:\n" + "\n".join(got))
