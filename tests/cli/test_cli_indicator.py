"""`saglog indicator-check` against scipy's straight-line fit, and its errors."""

import json
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy import stats

from logger.cli.main import main
from tests.helpers.paths import user_error

EXAMPLE = str(Path(__file__).resolve().parents[2] / "logger" / "config" / "profiles" / "example-three-ball.toml")


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def test_scale_error_and_bound_against_scipy_linregress():
    # Invented readings: an indicator reading 0.3 % long with a little non-linearity; the fit is
    # checked against scipy.stats.linregress (slope and its standard error), the bound against
    # its definition in docs/measurement.md: (|g| + 2 u(g)) T + max |residual|.
    rng = np.random.default_rng(3)
    lengths = np.array([0.0, 0.1, 0.2, 0.3, 0.5, 0.7, 1.0])
    reads = np.round(lengths * 1.003 + rng.normal(0, 0.0003, len(lengths)), 4)
    args = [a for x, y in zip(lengths, reads) for a in ("--block", f"{x}:{y}")]
    res = run("indicator-check", "--profile", EXAMPLE, *args, "--travel", "0.4", "--json")
    assert res.exit_code == 0, res.stderr
    out = json.loads(res.stdout)
    ref = stats.linregress(lengths, reads)
    assert out["scale_error"] == pytest.approx(ref.slope - 1, abs=1e-12)
    assert out["scale_error_u"] == pytest.approx(ref.stderr, rel=1e-9)
    resid = reads - (ref.intercept + ref.slope * lengths)
    want = (abs(ref.slope - 1) + 2 * ref.stderr) * 0.4 + np.max(np.abs(resid))
    assert out["indicator_error"] == pytest.approx(want, rel=1e-9)
    assert 0.002 < out["scale_error"] < 0.004


@pytest.mark.parametrize("blocks,words", [(["0:x", "1:1", "2:2"], ["--block", "0:x"]),
                                           (["0:0", "1:1"], ["three different lengths"]),
                                           (["-1:0", "1:1", "2:2"], [">= 0"])])
def test_bad_blocks_are_one_line_errors(blocks, words):
    args = [a for b in blocks for a in ("--block", b)]
    user_error(run("indicator-check", "--profile", EXAMPLE, *args), *words)
