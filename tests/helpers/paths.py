"""Where things are, and the real command run as a user would."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
PROFILES = ROOT / "logger" / "config" / "profiles"
EXAMPLE_PROFILE = PROFILES / "example-three-ball.toml"
SAMPLE_STREAMS = ROOT / "sample_streams"


def run_saglog(*args, timeout=120, **kw) -> subprocess.CompletedProcess:
    """Run the real command in a subprocess (`python -m logger`), as a user would."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "logger", *map(str, args)], capture_output=True, text=True,
                          timeout=timeout, env=env, **kw)


def user_error(res, *words):
    """A click CliRunner result that is a user error: exit 2, one line on stderr naming the problem, no traceback."""
    assert res.exit_code == 2, (res.stdout, res.stderr)
    lines = res.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("saglog: error:"), res.stderr
    assert "Traceback" not in res.stderr + res.stdout
    for w in words:
        assert w in lines[0], lines[0]
