"""The hypothesis "ci" profile (tests/conftest.py): a failure in CI recurs on the next run."""

from __future__ import annotations

import os
import subprocess
import sys

from hypothesis import given, settings
from hypothesis import strategies as st

from tests.helpers.paths import ROOT


def _examples_of_one_run() -> list:
    seen = []

    @settings(settings.get_profile("ci"), max_examples=30)
    @given(st.floats(-1e6, 1e6), st.binary(max_size=20))
    def probe(x, b):
        seen.append((x, b))

    probe()
    return seen


def test_ci_profile_is_derandomized_fixed_and_prints_the_blob():
    ci = settings.get_profile("ci")
    assert ci.derandomize and ci.print_blob and ci.database is None and ci.max_examples == 100
    assert _examples_of_one_run() == _examples_of_one_run()  # the same examples, run after run


def test_ci_variable_selects_the_profile():
    # a fresh interpreter, as CI starts one: with CI set the active settings are the ci profile's
    code = ("import tests.conftest; from hypothesis import settings; "
            "print(settings.default.derandomize and settings.default.print_blob)")
    bare = {"PATH": os.environ.get("PATH", ""), "PYTHONPATH": str(ROOT)}  # no other CI markers either
    for env, expected in (({**bare, "CI": "true"}, "True"), (bare, "False")):
        out = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, cwd=ROOT,
                             timeout=60)
        assert out.stdout.strip() == expected, out.stderr
