"""Live capture over a real pty: lossless line rate, CPU cost at 100 lines/s, seating-to-summary latency.

Each capture is the real command (`python -m logger capture`) in its own
process, fed by `feeder.Pacer` from this one.  A rate counts as held when
every line sent is in stream.rec and samples.csv and the feeder kept its
pace (a pty never drops bytes: a reader that falls behind makes the
writer block, so falling behind shows as lost pace, not lost lines).  The
bare reader (benchmarks.rawcopy: the capture's own select + os.read and
nothing else) runs over the same kind of pty at the same rates, as the
ceiling for any reader in Python, and at 100 lines/s beside the capture,
as the floor of its CPU: one wake-up per arrival.  Beside both, `cat`
reading the same kind of port (rawcopy --compiled) is the floor without an
interpreter.  CPU time is the scheduler's, in ns (cpu_seconds).  An idle capture (a
device that sends nothing) is measured too: its CPU per second and wake-ups.
The capture is measured as it runs by default (each line read as it comes)
and with `--gather GATHER_S` (lines let gather between reads): rates, CPU and
latency side by side.
"""

from __future__ import annotations

import fcntl
import json
import os
import random
import signal
import subprocess
import sys
import termios
import time
from pathlib import Path

import psutil

from logger.run.columns import RECORDING_FILE, SAMPLES_FILE, SUMMARY_FILE

from .feeder import Pacer, PtyDevice, session

ROOT = Path(__file__).resolve().parents[1]
PROFILE = ROOT / "logger" / "config" / "profiles" / "example-three-ball.toml"
RATES = (1_000, 2_000, 5_000, 10_000, 20_000, 50_000)
RATE_S = 3.0
CPU_RATE, CPU_S, CPU_ROUNDS = 100.0, 20.0, 2
LATENCY_SEATINGS = 20
IDLE_S = 10.0
GATHER_S = 0.1  # capture --gather, as suggested for a small computer
GATHERING = ("--gather", GATHER_S)
ENV = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))


def _wait(cond, timeout_s, what):
    deadline = time.monotonic() + timeout_s
    while not cond():
        if time.monotonic() > deadline:
            raise RuntimeError(f"benchmark: timed out waiting for {what}")
        time.sleep(0.002)


def _queued(dev: PtyDevice) -> int:
    """Bytes written but not yet read by the program on the other end (FIONREAD on the slave)."""
    return int.from_bytes(fcntl.ioctl(dev._slave, termios.FIONREAD, b"\0\0\0\0"), "little")


def start_capture(dev: PtyDevice, out: Path, *extra) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-m", "logger", "capture", "--port", str(dev.link), "--out", str(out),
                             "--profile", str(PROFILE), "--view", "plain", "--no-bells", *map(str, extra)],
                            env=ENV, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    _wait(lambda: (out / RECORDING_FILE).exists() or proc.poll() is not None, 60, "the capture to open the port")
    if proc.poll() is not None:
        raise RuntimeError(f"capture ended early: {proc.stderr.read()}")
    return proc


def start_raw(dev: PtyDevice, compiled: bool = False) -> subprocess.Popen:
    proc = subprocess.Popen([sys.executable, "-m", "benchmarks.rawcopy", str(dev.link), *(["--compiled"] * compiled)],
                            env=ENV, cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    assert proc.stdout.readline().strip() == "open"
    return proc


def cpu_seconds(ps: psutil.Process) -> float:
    """CPU time of a process so far: to the nanosecond from the scheduler where Linux gives it, else psutil's ticks.

    psutil's user + system time counts in clock ticks (10 ms), a tenth of
    what a 20 s window at 100 lines/s costs; /proc/PID/task/*/schedstat is
    each thread's time on a CPU in ns.
    """
    try:
        tasks = Path(f"/proc/{ps.pid}/task").iterdir()
        return sum(int((t / "schedstat").read_text().split()[0]) for t in tasks) / 1e9
    except (OSError, ValueError, IndexError):
        c = ps.cpu_times()
        return c.user + c.system


class TreeCpu:
    """CPU time of a process and of the children it has now (a gathering capture's `cat` relay).

    A small computer pays for the relay as much as for the capture, so a
    capture's cost is both.  The children are taken once, when measuring
    starts; the relay lives as long as the port is open.
    """

    def __init__(self, ps: psutil.Process):
        self.procs = [ps, *ps.children(recursive=True)]

    def seconds(self) -> float:
        return sum(cpu_seconds(p) for p in self.procs)


def _end(proc: subprocess.Popen | None, dev: PtyDevice) -> None:
    """After a measurement, even a failed one: no reader left running, the pty closed."""
    if proc is not None and proc.poll() is None:
        proc.kill()
        proc.wait(timeout=30)
    dev.close()


def stop(proc: subprocess.Popen) -> None:
    proc.send_signal(signal.SIGTERM)
    if proc.wait(60) != 0:
        raise RuntimeError(f"capture failed: {proc.stderr.read()}")


def count_records(out: Path) -> tuple[int, int]:
    with open(out / RECORDING_FILE) as f:
        rec = sum(1 for line in f if line[:1] != "#")
    with open(out / SAMPLES_FILE) as f:
        samples = sum(1 for _ in f) - 1
    return rec, samples


def one_rate(tmp: Path, lines: list[bytes], rate: int, raw: bool, *extra) -> dict:
    name = f"{'raw' if raw else 'cap'}{'-gather' if extra else ''}-{rate}"
    dev = PtyDevice(tmp / f"tty-{name}")
    out = tmp / f"out-{name}"
    proc = None
    try:
        proc = start_raw(dev) if raw else start_capture(dev, out, *extra)
        n = int(rate * RATE_S)
        pacer = Pacer(dev, lines[:n], rate)
        pacer.run()
        _wait(lambda: _queued(dev) == 0 or proc.poll() is not None, 60, "the reader to drain the pty")
        time.sleep(0.2)
        if raw:
            proc.send_signal(signal.SIGTERM)
            received = int(proc.communicate(timeout=30)[0].split()[-1])
            samples = received
        else:
            stop(proc)
            received, samples = count_records(out)
    finally:
        _end(proc, dev)
    kept_pace = pacer.elapsed_s <= RATE_S * 1.05 + 0.05
    return dict(rate=rate, sent=pacer.sent, received=received, samples=samples, feeder_s=round(pacer.elapsed_s, 3),
                held=received == pacer.sent == samples and kept_pace)


def highest_held(results: list[dict]) -> int:
    best = 0
    for r in results:
        if not r["held"]:
            break
        best = r["rate"]
    return best


READERS = ("capture", "gathering", "bare", "compiled")  # the capture both ways, and the two floors under it (rawcopy)


def cpu_per_1000(tmp: Path, reader: str, k: int = 0) -> float:
    """CPU s per 1000 lines of one of READERS, fed at CPU_RATE for CPU_S (round k)."""
    stream = session(int(CPU_S / 3) + 2, rate_hz=CPU_RATE, seed=3)
    name = f"{reader}-{k}"
    dev = PtyDevice(tmp / f"tty-cpu-{name}")
    out = tmp / f"cpu-{name}"
    proc = None
    try:
        if reader in ("capture", "gathering"):
            proc = start_capture(dev, out, *(GATHERING if reader == "gathering" else ()))
        else:
            proc = start_raw(dev, compiled=reader == "compiled")
        time.sleep(0.2)  # the compiled reader's exec done, the capture's first files written (and its relay started)
        tree = TreeCpu(psutil.Process(proc.pid))
        c0 = tree.seconds()
        pacer = Pacer(dev, stream.lines[:int(CPU_RATE * CPU_S)], CPU_RATE)
        pacer.run()
        _wait(lambda: _queued(dev) == 0, 30, "the reader to drain the pty")
        time.sleep(0.1)
        c1 = tree.seconds()
        if reader in ("capture", "gathering"):
            stop(proc)
        else:
            proc.send_signal(signal.SIGTERM)
            proc.communicate(timeout=30)
    finally:
        _end(proc, dev)
    return (c1 - c0) / pacer.sent * 1000


def idle_cost(tmp: Path) -> tuple[float, float]:
    """(ms CPU per s, wake-ups per s) of a capture whose device sends nothing, over IDLE_S."""
    dev = PtyDevice(tmp / "tty-idle")
    proc = None
    try:
        proc = start_capture(dev, tmp / "cap-idle")
        ps = psutil.Process(proc.pid)
        time.sleep(1.0)  # past the first flushes
        c0, w0 = cpu_seconds(ps), ps.num_ctx_switches().voluntary
        time.sleep(IDLE_S)
        c1, w1 = cpu_seconds(ps), ps.num_ctx_switches().voluntary
        stop(proc)
    finally:
        _end(proc, dev)
    return (c1 - c0) / IDLE_S * 1000, (w1 - w0) / IDLE_S


def latency(tmp: Path, *extra) -> list[float]:
    """Seconds from writing the line that ends a seating (the lift) to summary.json counting it.

    The pause before each lift is drawn (seeded) over a whole gather: a fixed
    one locks the lift to the gathering capture's sleeps (each seating takes
    a whole number of them), and its latency then shows one phase of the
    gather, not what a lift at any moment meets.
    """
    pauses = random.Random(5)
    stream = session(LATENCY_SEATINGS, rate_hz=100.0, seated_s=1.6, lifted_s=0.5, seed=5)
    name = "lat-gather" if extra else "lat"
    dev = PtyDevice(tmp / f"tty-{name}")
    out = tmp / f"out-{name}"
    summary = out / SUMMARY_FILE

    def seatings_total():
        try:
            return json.loads(summary.read_text()).get("seatings_total", 0)
        except (OSError, ValueError):
            return -1

    delays = []
    proc = None
    try:
        proc = start_capture(dev, out, *extra)
        start = 0
        for k, lift in enumerate(stream.lift_at):
            Pacer(dev, stream.lines[start:lift], 100.0).run()
            time.sleep(0.01 + pauses.uniform(0, GATHER_S))
            t = time.perf_counter()
            dev.write(stream.lines[lift])
            _wait(lambda: seatings_total() >= k + 1, 10, f"seating {k + 1} in summary.json")
            delays.append(time.perf_counter() - t)
            start = lift + 1
        stop(proc)
    finally:
        _end(proc, dev)
    return delays


def run(tmp: Path) -> list[dict]:
    lines = session(int(max(RATES) * RATE_S / 300) + 2, rate_hz=100.0, seed=1).lines
    figures = []
    table = {}
    gathered = f"capture --gather {GATHER_S:g}"
    for name, raw, extra in (("capture", False, ()), (gathered, False, GATHERING), ("bare reader", True, ())):
        results = []
        for rate in RATES:
            r = one_rate(tmp, lines, rate, raw, *extra)
            results.append(r)
            print(f"{name}: {rate} lines/s: sent {r['sent']}, received {r['received']}, "
                  f"feeder {r['feeder_s']:.2f} s -> {'held' if r['held'] else 'NOT held'}", flush=True)
        table[name] = results
    for name in ("capture", gathered):
        best = highest_held(table[name])
        figures.append(dict(name=f"{name}: highest lossless rate", value=best, unit="lines/s", detail=table[name],
                            text=f"{best:,} lines/s (of {', '.join(f'{r:,}' for r in RATES)})",
                            goal="zero lost lines; up to 50,000 lines/s", met=best == max(RATES)))
    raw_best = highest_held(table["bare reader"])
    figures.append(dict(name="bare reader: highest rate", value=raw_best, unit="lines/s",
                        detail=table["bare reader"], text=f"{raw_best:,} lines/s", goal="(reference)",
                        met=True))
    cpus = {reader: [] for reader in READERS}
    for k in range(CPU_ROUNDS):  # interleaved, so all see the same machine
        for reader in READERS:
            cpus[reader].append(cpu_per_1000(tmp, reader, k))
    cpu, cpu_gathered, bare, compiled = (min(cpus[reader]) for reader in READERS)
    print(f"capture: CPU s per 1000 lines at {CPU_RATE:g} lines/s: {cpus}", flush=True)
    rounds = f"best of {CPU_ROUNDS}, interleaved with the capture"
    for name, value in (("capture", cpu), (gathered, cpu_gathered)):
        figures.append(dict(name=f"{name} CPU at {CPU_RATE:g} lines/s", value=round(value, 5),
                            unit="CPU s per 1000 lines",
                            text=f"{value:.4f} CPU s per 1000 lines ({value * CPU_RATE / 1000 * 100:.1f} % of one core;"
                                 f" {rounds})",
                            goal="< 0.05 CPU s per 1000 lines (issue 17)", met=value < 0.05))
    figures.append(dict(name=f"bare reader CPU at {CPU_RATE:g} lines/s (select + os.read only)", value=round(bare, 5),
                        unit="CPU s per 1000 lines", text=f"{bare:.4f} CPU s per 1000 lines ({rounds})",
                        goal="(reference: the floor for one wake-up a line in Python)", met=True))
    figures.append(dict(name=f"compiled reader CPU at {CPU_RATE:g} lines/s (cat, blocking read)",
                        value=round(compiled, 5), unit="CPU s per 1000 lines",
                        text=f"{compiled:.4f} CPU s per 1000 lines ({rounds})",
                        goal="(reference: the floor for one wake-up a line, no interpreter)", met=True))
    idle_ms, idle_wakes = idle_cost(tmp)
    print(f"capture: idle {idle_ms:.2f} ms CPU per s, {idle_wakes:.1f} wake-ups per s", flush=True)
    figures.append(dict(name="idle capture (the device sends nothing)", value=round(idle_ms, 3),
                        unit="ms CPU per s", text=f"{idle_ms:.2f} ms CPU per s ({idle_ms / 10:.3f} % of one core), "
                                                  f"{idle_wakes:.1f} wake-ups per s",
                        goal="< 1 ms CPU per s", met=idle_ms < 1.0))
    for name, extra in (("capture", ()), (gathered, GATHERING)):
        delays = sorted(latency(tmp, *extra))
        med, worst = delays[len(delays) // 2], delays[-1]
        print(f"{name}: lift -> summary.json latency median {med * 1000:.1f} ms, max {worst * 1000:.1f} ms",
              flush=True)
        figures.append(dict(name=f"{name}: lift -> summary.json latency",
                            value={"median_s": round(med, 4), "max_s": round(worst, 4)}, unit="s",
                            text=f"median {med * 1000:.0f} ms, max {worst * 1000:.0f} ms ({len(delays)} seatings)",
                            goal="well under a second (the next seating)", met=worst < 0.5))
    return figures
