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
