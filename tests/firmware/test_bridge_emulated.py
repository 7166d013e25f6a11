"""The bridge's AVR image run in simavr on emulated pins, in the suite.

The image is built with avr-gcc exactly as it would be flashed (the Makefile
in firmware_notes/ installs gcc-avr, avr-libc and simavr with apt-get when
they are missing and this is root; elsewhere it stops with a message naming
them).  Checked here:

* the simavr harness (firmware_notes/sim/harness.c) against the shared
  vectors, whose expected reading and raw-frame lines were worked by hand
  from the documented layouts (firmware_notes/README.md; the layouts are
  from memory);
* images built for the wrong clock edge or the wrong data polarity fail it;
* the image on a pseudo-terminal (firmware_notes/sim/pty_bridge.c) carries
  its lines to the host and the host's commands to the image;
* end to end: an invented spherometer session clocked into the pins in real
  time, an ordinary `saglog capture` subprocess on the pseudo-terminal, and
  the radius in summary.json against the session's true radius from an
  exact geometric construction written below.
"""

from __future__ import annotations

import fcntl
import json
import math
import os
import random
import re
import select
import shutil
import signal
import subprocess
import sys
import tempfile
import time
import tomllib
from pathlib import Path

import serial

from tests.helpers.paths import EXAMPLE_PROFILE, ROOT

FW = ROOT / "firmware_notes"
BUILD = FW / "build"
VECTORS = FW / "vectors" / "frames.tsv"
HARNESS_LINE = re.compile(r"^simavr harness: (\d+) checks over (\d+) vectors \(clock half period ([\d.]+) us\), "
                          r"(\d+) failures$", re.M)


def load_vectors() -> list[dict]:
    rows = [ln for ln in VECTORS.read_text().splitlines() if ln and not ln.startswith("#")]
    names = rows[0].split("\t")
    return [dict(zip(names, r.split("\t"), strict=True)) for r in rows[1:]]


VEC = load_vectors()
BY_NAME = {v["name"]: v for v in VEC}


def make(*args: str, timeout: float = 900) -> subprocess.CompletedProcess:
    """`make -C firmware_notes ARGS`, one at a time across test workers (they share build/ and apt)."""
    BUILD.mkdir(exist_ok=True)
    with open(BUILD / ".make.lock", "w") as lock:
        fcntl.flock(lock, fcntl.LOCK_EX)
        return subprocess.run(["make", "-C", str(FW), *args], capture_output=True, text=True, timeout=timeout)


def _failed(what: str, proc: subprocess.CompletedProcess) -> str:
    return f"{what} failed (exit {proc.returncode}):\n{proc.stdout[-3000:]}\n{proc.stderr[-3000:]}"


def build_bridge() -> tuple[Path, Path]:
    """The default image and the pty program; installs the AVR tools first when they are missing."""
    proc = make("pty-bridge")
    assert proc.returncode == 0, _failed("make -C firmware_notes pty-bridge (the AVR image, simavr)", proc)
    return BUILD / "bridge.elf", BUILD / "pty_bridge"


# --- the harness on the shared vectors ---------------------------------------------------------

def test_simavr_harness_passes_on_the_vectors():
    proc = make("sim")
    assert proc.returncode == 0, _failed("make -C firmware_notes sim", proc)
    runs = HARNESS_LINE.findall(proc.stdout)
    # The Makefile runs the harness at two clock speeds (10 us and 4 us half periods).  Each run:
    # two waveforms x (reading line, raw-frame line) per vector, two polled-mode checks and two
    # request-line checks; every expected line comes from the vectors file.
    assert [float(h) for _, _, h, _ in runs] == [10.0, 4.0], proc.stdout
    for checks, vectors, _, failures in runs:
        assert (int(checks), int(vectors), int(failures)) == (4 * len(VEC) + 4, len(VEC), 0), proc.stdout


def _mutant(defs: str, folder: str) -> subprocess.CompletedProcess:
    """An image built with `defs` (as a user with the wrong settings would), run in the harness."""
    proc = make(f"BUILD=build/{folder}", f"BRIDGE_DEFS={defs}", f"build/{folder}/bridge.elf", "build/harness")
    assert proc.returncode == 0, _failed(f"building the {defs} image", proc)
    return subprocess.run([str(BUILD / "harness"), str(BUILD / folder / "bridge.elf"), str(VECTORS), "10"],
                          capture_output=True, text=True, timeout=120)


def test_an_image_sampling_on_the_wrong_edge_fails_the_harness():
    run = _mutant("-DBRIDGE_EDGE_RISING=1", "mutant-rising")
    assert run.returncode == 1, run.stdout + run.stderr
    fails = [ln for ln in run.stderr.splitlines() if ln.startswith("FAIL ")]
    # Data that changes halfway through the clock's high time is stable at both edges, so only the
    # waveform whose data changes on the rising edge can tell: there a rising-edge image reads every
    # bit one place late.  sign24 +12.34 mm is 1234 counts (vectors: sign24_pos_mm); one place late
    # its magnitude bits 1..20 are read as bits 0..19, 1234 // 2 = 617 counts: +6.17 mm.
    assert any(ln.startswith('FAIL sign24_pos_mm (data on the rising edge): got "+6.17 mm\\r\\n"') for ln in fails)


def test_an_image_with_the_wrong_data_polarity_fails_the_harness():
    run = _mutant("-DBRIDGE_INVERT_DATA=1", "mutant-inverted")
    assert run.returncode == 1, run.stdout + run.stderr
    # Every bit flipped: sign24 +0.00 mm (24 zero bits, vectors: sign24_zero_mm) reads as 24 ones,
    # which sets the reserved bits 21 and 22: rejected, so no reading line at all; in raw mode
    # F:sign24:24:FFFFFF (the documented raw-frame line).
    assert 'FAIL sign24_zero_mm (data mid-high): got "", expected "+0.00 mm\\r\\n"' in run.stderr
    assert 'FAIL raw sign24_zero_mm (data mid-high): got "F:sign24:24:FFFFFF\\r\\n"' in run.stderr


def test_missing_tools_stop_with_a_message_when_not_root():
    # As an ordinary user, with no avr-gcc on PATH and no simavr headers where the Makefile looks:
    # no apt-get, a message naming the packages to install as root, and a failure.
    as_user = dict(user=65534, group=65534) if os.geteuid() == 0 else {}
    with tempfile.TemporaryDirectory() as bin_dir:  # PATH: only `id`, which the Makefile asks who it is
        os.chmod(bin_dir, 0o755)
        os.symlink(shutil.which("id"), Path(bin_dir) / "id")
        proc = subprocess.run([shutil.which("make"), "-k", "-C", str(FW), "SIM_INC=/nonexistent", "avr-toolchain",
                               "simavr-lib"], capture_output=True, text=True, timeout=60, env=dict(PATH=bin_dir),
                              **as_user)
    assert proc.returncode != 0
    assert ("firmware: missing gcc-avr binutils-avr avr-libc; install as root: "
            "apt-get install -y gcc-avr binutils-avr avr-libc") in proc.stderr, proc.stderr
    assert ("firmware: missing libsimavr-dev simavr; install as root: "
            "apt-get install -y libsimavr-dev simavr") in proc.stderr, proc.stderr


# --- the image on a pseudo-terminal ------------------------------------------------------------

class PtyBridge:
    """firmware_notes/build/pty_bridge as a subprocess: the image in simavr behind a pty."""

    def __init__(self, elf: Path, program: Path, variant: str, schedule: list[tuple[float, str]], folder: Path):
        path = folder / "schedule.tsv"
        path.write_text("".join(f"{t:.3f}\t{bits}\n" for t, bits in schedule))
        self.proc = subprocess.Popen([str(program), str(elf), variant, str(path)], stdout=subprocess.PIPE,
                                     stderr=subprocess.PIPE, text=True)
        ready, _, _ = select.select([self.proc.stdout], [], [], 30)
        self.path = self.proc.stdout.readline().strip() if ready else ""
        if not self.path.startswith("/dev/"):
            self.proc.kill()
            raise AssertionError(f"pty_bridge printed no pty path: {self.proc.communicate()}")

    def session_over(self, timeout: float) -> bool:
        """Whether it said "session over" (the schedule's last row is due) within `timeout` seconds."""
        ready, _, _ = select.select([self.proc.stdout], [], [], timeout)
        return bool(ready) and self.proc.stdout.readline().strip() == "session over"

    def finish(self, timeout: float = 15) -> str:
        """Wait for it to end (it does once its client closes the pty); returns its stderr."""
        try:
            _, err = self.proc.communicate(timeout=timeout)
        finally:
            if self.proc.poll() is None:
                self.proc.kill()
                self.proc.communicate()
        assert self.proc.returncode == 0, err
        return err


def test_the_pty_carries_the_images_lines_and_the_hosts_commands(tmp_path):
    elf, program = build_bridge()
    names = ["sign24_pos_mm", "sign24_neg_mm", "sign24_pos_in", "sign24_150_mm", "sign24_bit21_set"]
    order = [names[i % len(names)] for i in range(24)]
    schedule = [(0.1 * i, BY_NAME[n]["bits"]) for i, n in enumerate(order)]  # a streaming device, 10 frames/s
    bridge = PtyBridge(elf, program, "sign24", schedule, tmp_path)
    got, cut = [], b""
    try:
        # exclusive, as saglog opens ports: no other process on this machine can read from it meanwhile
        with serial.Serial(bridge.path, 115200, timeout=5, exclusive=True) as port:
            while len(got) < 16 and not cut:
                line = port.readline()
                if not line.endswith(b"\r\n"):
                    cut = line or b"(nothing)"
                    break
                got.append(line.decode("ascii")[:-2])
                if len(got) == 5:
                    port.write(b"R")  # raw-frame lines from now on
    finally:
        err = bridge.finish()
    assert not cut, f"no complete line within 5 s: {cut!r} after {got}; {err}"
    # Expected lines from the vectors (hand-worked): reading lines for the good frames (the bad one sends
    # nothing), then, once 'R' has reached the image, the raw-frame line of every frame, good or bad.
    good = lambda n: not BY_NAME[n]["expect"].startswith("reject:")  # noqa: E731
    readings = [(i, BY_NAME[n]["expect"]) for i, n in enumerate(order) if good(n)]
    first_raw = next((k for k, line in enumerate(got) if line.startswith("F:")), None)
    assert first_raw is not None and first_raw >= 5, got
    assert got[:first_raw] == [e for _, e in readings[:first_raw]], got
    # raw lines start with the frame after the last reading line, or the one after that when 'R'
    # arrived just after a bad frame (which sent nothing)
    after = readings[first_raw - 1][0] + 1
    starts = [after] if good(order[after]) else [after, after + 1]
    n_raw = len(got) - first_raw
    assert any(got[first_raw:] == [BY_NAME[n]["raw"] for n in order[j:j + n_raw]] for j in starts), got
    assert re.search(r"pty_bridge: \d+ sign24 frames clocked in", err), err


# --- end to end: an invented session through the emulated bridge into saglog capture -----------

def probe_sagitta_concave(legs: tuple[float, float, float], rho: float, R: float) -> tuple[float, float]:
    """Exact geometric construction of a three-ball spherometer seated on a concave sphere.

    Returns (r, s): the circumradius of the ball centres about the probe axis, and the probe's travel
    from the flat.  The ball centres are placed in the plane z = 0 from the centre-to-centre leg
    spacings (law of cosines); the probe axis is the point of that plane equidistant from them.  On the
    flat the balls stand rho above it, so the probe tip is at z = -rho.  Each ball touches the sphere,
    so its centre is R - rho from the sphere's centre, which lies on the axis at
    h = sqrt((R - rho)^2 - r^2) above the plane; the tip rests on the sphere at z = h - R.  The travel
    s = -rho - (h - R) = (R - rho) - sqrt((R - rho)^2 - r^2).
    """
    a, b, c = legs  # |P2P3|, |P1P3|, |P1P2|
    P = [(0.0, 0.0), (c, 0.0)]
    x3 = (b * b + c * c - a * a) / (2 * c)
    P.append((x3, math.sqrt(b * b - x3 * x3)))
    # equidistant point: |X - P1|^2 = |X - P2|^2 = |X - P3|^2, two linear equations
    (x1, y1), (x2, y2), (x3, y3) = P
    a11, a12, r1 = 2 * (x2 - x1), 2 * (y2 - y1), x2**2 + y2**2 - x1**2 - y1**2
    a21, a22, r2 = 2 * (x3 - x1), 2 * (y3 - y1), x3**2 + y3**2 - x1**2 - y1**2
    det = a11 * a22 - a12 * a21
    O = ((r1 * a22 - a12 * r2) / det, (a11 * r2 - a21 * r1) / det)
    dist = [math.hypot(px - O[0], py - O[1]) for px, py in P]
    assert max(dist) - min(dist) < 1e-9, "construction: the axis is not equidistant from the balls"
    r = dist[0]
    h = math.sqrt((R - rho) ** 2 - r * r)
    for px, py in P:  # every ball centre is R - rho from the sphere's centre (O, h)
        assert math.isclose(math.sqrt((px - O[0]) ** 2 + (py - O[1]) ** 2 + h * h), R - rho, rel_tol=1e-12)
    tip_flat, tip_sphere = -rho, h - R
    return r, tip_flat - tip_sphere


def bcd13_bits(counts: int, decimals: int = 3) -> str:
    """A bcd13 frame for counts x 10^-decimals mm, from the documented layout (README, FROM MEMORY):
    13 nibbles sent least significant bit first: four 0xF, sign (0 or 8), six BCD digits most
    significant first, decimal places, unit (0 = mm)."""
    digits = [int(ch) for ch in f"{abs(counts):06d}"]
    nibbles = [0xF] * 4 + [8 if counts < 0 else 0] + digits + [decimals, 0]
    return "".join(str((n >> i) & 1) for n in nibbles for i in range(4))


def reading_line(counts: int) -> str:
    """The bridge's reading line for counts of 0.001 mm (README, "The bridge's output")."""
    return f"{'-' if counts < 0 else '+'}{abs(counts) // 1000}.{abs(counts) % 1000:03d} mm"


R_TRUE_MM = 1650.0  # the invented mirror: concave, R = 1650 mm
FLAT_MM = 0.137  # what the indicator shows on the flat (not zeroed)
STOP_MM = -1.6  # lifted: the spindle runs out 1.6 mm to its stop
DRIFT_MM_PER_S = 0.0015 / 60  # a frame warming in the hand
PLAN = ["flat"] * 3 + ["surface"] * 5 + ["flat"] * 2
LEAD_S, LAND_S, SEATED_S, LIFT_S, LIFTED_S = 1.0, 0.2, 1.5, 0.15, 1.0
ROW_S = 0.05  # the schedule's rows; the bridge asks a bcd13 device every 100 ms


def invented_session(step_mm: float, sagitta_mm: float, seed: int = 1650) -> tuple[list[tuple[float, int]], float]:
    """(t_s, counts) rows of the indicator's display, and the session's length in seconds.

    Lifted at the stop; each seating lands over LAND_S (the spindle pushed in), holds SEATED_S at its
    level (placement scatter 0.6 um per seating, reading noise 0.4 um, to whole counts), and lifts over
    LIFT_S back to the stop, LIFTED_S there.  The surface reads the sagitta below the flat (concave,
    indicator in-positive: the spindle runs further out).
    """
    rng = random.Random(seed)
    keys = [(0.0, STOP_MM), (LEAD_S, STOP_MM)]  # the display's true path, piecewise linear
    for phase in PLAN:
        t = keys[-1][0]
        level = FLAT_MM - (sagitta_mm if phase == "surface" else 0.0) + rng.gauss(0, 0.0006)
        keys += [(t + LAND_S, level), (t + LAND_S + SEATED_S, level),
                 (t + LAND_S + SEATED_S + LIFT_S, STOP_MM), (t + LAND_S + SEATED_S + LIFT_S + LIFTED_S, STOP_MM)]
    length_s = keys[-1][0]
    rows = []
    for i in range(int(length_s / ROW_S) + 1):
        ts = i * ROW_S
        k = max(j for j in range(len(keys) - 1) if keys[j][0] <= ts)
        (t0, v0), (t1, v1) = keys[k], keys[k + 1]
        value = v0 + (v1 - v0) * (ts - t0) / (t1 - t0)
        value += DRIFT_MM_PER_S * ts + rng.gauss(0, 0.0004)
        rows.append((ts, round(value / step_mm)))
    return rows, length_s


def test_capture_through_the_emulated_bridge_gives_the_sessions_radius(tmp_path):
    elf, program = build_bridge()
    prof = tomllib.loads(EXAMPLE_PROFILE.read_text())
    legs = tuple(prof["spherometer"]["leg_spacings"])
    rho = prof["spherometer"]["ball_diameter"] / 2
    step = prof["indicator"]["resolution"]
    assert prof["unit"] == "mm" and prof["indicator"]["sense"] == "in-positive" and step == 0.001
    r, s_true = probe_sagitta_concave(legs, rho, R_TRUE_MM)
    rows, length_s = invented_session(step, s_true)
    assert 0.4 < s_true < 0.6  # a concave surface about half a millimetre below the flat zero

    bridge = PtyBridge(elf, program, "bcd13", [(t, bcd13_bits(c)) for t, c in rows], tmp_path)
    out = tmp_path / "run"
    # The session starts when the capture opens the pty.  On a machine too busy for the simulation to
    # keep up, the session runs longer than scheduled (pty_bridge never catches up in a burst), so the
    # capture is ended as a user ends one, by Ctrl-C once the session is over; --duration is a bound.
    cap = subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", bridge.path, "--profile",
                            str(EXAMPLE_PROFILE), "--out", str(out), "--duration", f"{3 * length_s:.0f}",
                            "--baud", "115200", "--no-bells", "--view", "plain"],
                           stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                           env=dict(os.environ, PYTHONPATH=str(ROOT)))
    try:
        over, deadline = False, time.monotonic() + 3 * length_s
        while not over and cap.poll() is None and time.monotonic() < deadline:
            over = bridge.session_over(timeout=1.0)
        cap.send_signal(signal.SIGINT)
        cap_out, cap_err = cap.communicate(timeout=60)
    finally:
        if cap.poll() is None:
            cap.kill()
            cap.communicate()
        bridge_err = bridge.finish()
    assert over, f"the session did not run to its end: {bridge_err}\n{cap_out}\n{cap_err}"
    assert cap.returncode == 0 and "Traceback" not in cap_err, cap_out + cap_err
    summary = json.loads((out / "summary.json").read_text())
    context = f"{bridge_err}\n{json.dumps(summary, indent=1)[:3000]}"

    # What came over the pty is the image's own output: bcd13 reading lines, each one of the
    # invented session's displays as the README's reading-line format writes it.
    # (The capture's end may cut the last line short: that one need only begin like a sent line.)
    sent = {reading_line(c) for _, c in rows}
    records = [ln.split("\t", 1)[1] for ln in (out / "stream.rec").read_text().splitlines() if ln[:1] != "#"]
    lines = [rec.removesuffix("\\x0d") for rec in records]
    assert len(lines) >= 100 and set(lines[:-1]) <= sent, (lines[:10], context)
    assert any(full.startswith(lines[-1]) for full in sent), (lines[-3:], context)

    # The invented plan: 5 flat seatings (3 before, 2 after) and 5 on the concave surface, none rejected.
    assert summary["status"] == "ok" and summary["surface"] == "concave", context
    assert (summary["seatings_flat"], summary["seatings_surface"], summary["seatings_rejected"]) == (5, 5, 0), context
    assert math.isclose(summary["ring_radius_mm"], r, rel_tol=1e-12), context  # the construction's circumradius
    # The true radius (the construction's) lies within the stated expanded uncertainty, and that
    # uncertainty is narrow enough to mean something: under 1 % of R, the shift a sagitta misread by
    # 1 % (five counts) would give.
    U = summary["radius_U_mm"]
    assert abs(summary["radius_mm"] - R_TRUE_MM) <= U, context
    assert 0 < U < 0.01 * R_TRUE_MM, context
