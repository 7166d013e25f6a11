"""Installing anywhere: the built wheel in a fresh venv, run from a folder outside the source tree.

What a new user does with `pip install saglog-*.whl` (or pipx): nothing of the source tree is on
the path, the shipped profiles and scenarios come from the installed package, and every command
the demo suggests must work as printed, from there.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import tarfile
import zipfile
from pathlib import Path

import pytest

from tests.helpers.paths import ROOT

import logger


def _run(cmd, cwd, env, timeout=300) -> subprocess.CompletedProcess:
    return subprocess.run(cmd, cwd=cwd, env=env, capture_output=True, text=True, timeout=timeout)


def _user_env(venv: Path) -> dict:
    """An activated venv: its bin first on PATH, nothing pointing back into the source tree."""
    env = {k: v for k, v in os.environ.items() if k not in ("PYTHONPATH", "VIRTUAL_ENV")}
    env["PATH"] = f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}"
    env["VIRTUAL_ENV"] = str(venv)
    return env


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    """Build the wheel and sdist from the tree, install the wheel into a new venv in a temporary folder."""
    base = tmp_path_factory.mktemp("fresh-install")
    dist = base / "dist"
    # no --sdist/--wheel: build makes the sdist, then the wheel from it, so the sdist is proved complete
    built = _run([sys.executable, "-m", "build", "--outdir", str(dist), str(ROOT)],
                 cwd=base, env=dict(os.environ), timeout=600)
    assert built.returncode == 0, built.stdout[-3000:] + built.stderr[-3000:]
    wheel, = dist.glob("saglog-*.whl")
    sdist, = dist.glob("saglog-*.tar.gz")
    venv = base / "venv"
    subprocess.run([sys.executable, "-m", "venv", str(venv)], check=True, timeout=300)
    env = _user_env(venv)
    pip = _run([str(venv / "bin" / "python"), "-m", "pip", "install", "-q", str(wheel)], cwd=base, env=env,
               timeout=900)
    assert pip.returncode == 0, pip.stderr[-3000:]
    work = base / "somewhere"  # an ordinary folder: no source tree, no profiles beside it
    work.mkdir()
    return {"build": built, "wheel": wheel, "sdist": sdist, "venv": venv, "env": env, "cwd": work}


def test_the_build_prints_no_deprecation_warning(installed):
    out = installed["build"].stdout + installed["build"].stderr
    assert "deprecat" not in out.lower(), [ln for ln in out.splitlines() if "deprecat" in ln.lower()]


def test_wheel_and_sdist_carry_the_licence_and_the_shipped_data(installed):
    with zipfile.ZipFile(installed["wheel"]) as whl:
        names = whl.namelist()
        meta = whl.read(next(n for n in names if n.endswith(".dist-info/METADATA"))).decode()
    assert "License-Expression: MIT" in meta
    assert any(n.endswith(".dist-info/licenses/LICENSE") for n in names)
    assert "logger/config/profiles/example-three-ball.toml" in names
    assert "logger/simulator/scenarios/demo-150-f8-fine.toml" in names
    with tarfile.open(installed["sdist"]) as tar:
        members = {Path(m).name for m in tar.getnames()}
    assert {"LICENSE", "pyproject.toml", "README.md"} <= members


def test_installed_saglog_is_the_wheel_not_the_tree(installed):
    env, cwd = installed["env"], installed["cwd"]
    r = _run(["saglog", "--version"], cwd, env)
    assert r.returncode == 0 and logger.__version__ in r.stdout, (r.stdout, r.stderr)
    where = _run(["python", "-c", "import logger; print(logger.__file__)"], cwd, env)
    assert Path(where.stdout.strip()).is_relative_to(installed["venv"]), where.stdout
    assert not Path(where.stdout.strip()).is_relative_to(ROOT)


def test_plan_with_a_profile_by_name(installed):
    r = _run(["saglog", "plan", "--profile", "example-three-ball", "--diameter", "150", "--focal-ratio", "8",
              "--json"], installed["cwd"], installed["env"])
    assert r.returncode == 0, r.stderr
    # R = 2 f = 2 N D (textbook mirror relation): 2 * 8 * 150 mm
    assert '"target_radius": 2400' in r.stdout


def _suggested(stdout: str) -> list[str]:
    """The commands under the demo's "next, try:" (each on a line indented by two spaces)."""
    tail = stdout.split("next, try:", 1)[1].splitlines()
    return [ln.strip() for ln in tail if ln.startswith("  ") and not ln.startswith("   ")]


def test_demo_and_every_hint_it_prints_work_there(installed):
    env, cwd = installed["env"], installed["cwd"]
    demo = _run(["saglog", "demo"], cwd, env, timeout=180)
    assert demo.returncode == 0, demo.stderr[-3000:]
    assert "Traceback" not in demo.stderr
    hints = _suggested(demo.stdout)
    assert hints and all(h.startswith("saglog ") for h in hints), hints
    assert "site-packages" not in demo.stdout  # profiles by name, never a path into the install
    for hint in hints:
        argv = hint.split()
        if argv[1] == "simulate":  # streams until stopped: its first line is the device to open
            _first_line_then_stop(argv, cwd, env)
            continue
        r = _run(argv, cwd, env)
        assert r.returncode == 0, (hint, r.stderr[-2000:])
        assert "Traceback" not in r.stderr


def _first_line_then_stop(argv, cwd, env) -> None:
    proc = subprocess.Popen(argv, cwd=cwd, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    try:
        first = proc.stdout.readline().strip()
        assert first.startswith(("/dev/", "socket://")), first
        proc.send_signal(signal.SIGTERM)
        assert proc.wait(timeout=30) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
