"""Shared test helpers: paths, the example profile, and a CLI runner that keeps stderr apart."""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PROFILES = ROOT / "logger" / "profiles"
EXAMPLE_PROFILE = PROFILES / "example-three-ball.toml"


def run_saglog(*args, timeout=120, **kw) -> subprocess.CompletedProcess:
    """Run the real command in a subprocess (`python -m logger`), as a user would."""
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run([sys.executable, "-m", "logger", *map(str, args)], capture_output=True, text=True,
                          timeout=timeout, env=env, **kw)


@pytest.fixture
def profile():
    from logger.profile import load_profile

    return load_profile(EXAMPLE_PROFILE)
