"""Debian packages the real-part tests need (chromium, espeak-ng, sox, ser2net): installed when missing.

`make test` runs as root in CI, on a fresh machine: apt-get installs what is
missing, once, under a lock so that two pytest-xdist workers never run apt
at the same time.
"""

from __future__ import annotations

import fcntl
import os
import shutil
import subprocess

LOCK = "/tmp/saglog-tests-apt.lock"


def ensure(packages: dict[str, str]) -> None:
    """`packages` maps an executable to the Debian package that brings it; missing ones are installed."""
    with open(LOCK, "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        missing = sorted({pkg for exe, pkg in packages.items() if shutil.which(exe) is None})
        if not missing:
            return
        if os.geteuid() != 0:
            raise RuntimeError(f"these tests need the Debian packages {', '.join(missing)}: apt-get install them")
        env = dict(os.environ, DEBIAN_FRONTEND="noninteractive")
        subprocess.run(["apt-get", "update", "-q"], check=True, env=env, capture_output=True, timeout=600)
        subprocess.run(["apt-get", "install", "-y", "-q", "--no-install-recommends", *missing], check=True, env=env,
                       capture_output=True, timeout=900)
