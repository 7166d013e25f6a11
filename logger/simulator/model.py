"""The virtual indicator's physics and its stream of text lines.

A session is a sequence of seatings, each on the reference flat or on the
sphere, with the instrument lifted in between (the spindle then runs out to
its stop).  What the probe reads on the sphere comes from the exact
ball-on-sphere geometry, `logger.analysis.geometry.probe_sagitta_mm`, with the
profile's contact circle and foot radius; nothing here approximates it.

Sign convention: `disp` is how far the spindle is pushed IN relative to
its position on the flat.  A concave surface lets the probe run out (disp =
-s), a convex one pushes it in (disp = +s); the display shows
zero + sense * disp, so with an "in-positive" indicator a concave surface
reads below the flat zero.

Every random number comes from numpy generators seeded from the run's seed:
one stream for the seatings (drawn once, in `simulate`) and one for the
sample noise (drawn again on every call to `SimRun.lines`), so a run is
reproducible and `lines()` can be replayed any number of times.
"""

from __future__ import annotations

import json
import math
from collections.abc import Iterator
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from logger.analysis import geometry
from logger.simulator.systematics import draw_systematics
from logger.errors import UserError
from logger.formats.recording import RecWriter, gap_comment
from logger.units import from_mm, to_mm
from logger.simulator.scenario import ENDINGS, Scenario

CHUNK = 4096  # samples computed per numpy step


@dataclass(frozen=True)
class _Segment:
    t0: float
    target: float  # relative reading the segment settles to (mm, display sense)
    start: float  # relative reading at t0
    tau: float
    omega: float  # rad/s of the settling ring; 0 for a plain exponential
    rock_a: float = 0.0
    rock_f: float = 0.0


def _omega(tau: float, overshoot: float) -> float:
    """Ring frequency w of exp(-t/tau)*cos(w t) whose first swing past the target is `overshoot`.

    With x = w tau the first extremum beyond the target is at w t = pi - atan(1/x)
    (where the derivative vanishes), of size exp(-(pi - atan(1/x))/x) * x / sqrt(1 + x^2),
    which grows with x; bisection finds x.
    """
    if overshoot <= 0:
        return 0.0

    def peak(x: float) -> float:
        return math.exp(-(math.pi - math.atan(1 / x)) / x) * x / math.sqrt(1 + x * x)

    lo, hi = 1e-3, 1e6
    for _ in range(200):
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if peak(mid) < overshoot else (lo, mid)
    return lo / tau


def _seg_value(seg: _Segment, t: float) -> float:
    dt = t - seg.t0
    e = math.exp(-dt / seg.tau) * (math.cos(seg.omega * dt) if seg.omega else 1.0)
    return seg.target + (seg.start - seg.target) * e + seg.rock_a * math.sin(2 * math.pi * seg.rock_f * dt)


def _format_plan(sc: Scenario) -> tuple[int, int]:
    """(decimals, integer size of one step in units of 10**-decimals) in the stream unit."""
    step_u = from_mm(sc.step, sc.unit)
    for d in range(0, 9):
        k = step_u * 10**d
        if abs(k - round(k)) < 1e-6 * max(1.0, k) and round(k) >= 1:
            dmin, kmin = d, round(k)
            break
    else:
        raise UserError(
            f"{sc.source or sc.name}: the indicator step {step_u:g} {sc.unit} is not a round decimal in the "
            f"stream unit; set [indicator] step (e.g. 0.00005 in or 0.001 mm)"
        )
    d = dmin if sc.decimals is None else sc.decimals
    if d < dmin:
        raise UserError(f"{sc.source or sc.name}: {d} decimals cannot show a step of {step_u:g} {sc.unit}")
    return d, kmin * 10 ** (d - dmin)


class SimRun:
    """One simulated session: the truth, and the lines the indicator sends."""

    def __init__(self, scenario: Scenario, seed: int):
        self.scenario = sc = scenario
        self.seed = seed
        pieces = ("concave", "convex") if sc.surface == "pair" else (sc.surface,)
        sags = {f: geometry.probe_sagitta_mm(sc.radius_mm, *sc.contact_mm(f), f) for f in pieces}
        # a probe off the axis meets the sphere nearer the balls' plane by R - sqrt(R^2 - e^2), either surface
        tip = sc.radius_mm - math.sqrt(sc.radius_mm**2 - sc.probe_offset_mm**2)
        disps = [-(sags[f] - tip) if f == "concave" else sags[f] - tip for f in pieces]  # mirror, tool, mirror, ...
        ring_r, foot_r = sc.contact_mm(pieces[0])
        sense = sc.profile.indicator.sign
        stop_disp = min(0.0, sc.flat_error_mm, *disps) - sc.lift_mm
        self._decimals, self._units_per_count = _format_plan(sc)
        self._step_u = from_mm(sc.step, sc.unit)

        rng = np.random.default_rng([seed, 0])
        n = sc.seatings_total
        scatter = rng.normal(0.0, 1.0, n) * sc.scatter_mm
        grit_u, grit_sign = rng.random(n), rng.choice([-1.0, 1.0], n)
        rock_u, rock_sign = rng.random(n), rng.choice([-1.0, 1.0], n)
        rock_period = rng.uniform(0.6, 1.5, n)

        stop_rel = sense * stop_disp
        segs = [_Segment(0.0, stop_rel, stop_rel, sc.lift_tau_s, 0.0)]
        seatings = []
        t = sc.lead_in_s
        omega = _omega(sc.settle_tau_s, sc.overshoot)
        for i in range(n):
            k = i - sc.flat_before  # the how-many-th surface seating
            phase = "flat" if k < 0 or k >= sc.surface_seatings else pieces[k % 2] if len(pieces) == 2 else "surface"
            number = i + 1
            kind = phase
            offset = 0.0
            rock_a = 0.0
            if number in sc.grit_seatings or grit_u[i] < sc.grit_probability:
                kind, offset = "grit", grit_sign[i] * sc.grit_offset_mm
            elif number in sc.rock_seatings or rock_u[i] < sc.rock_probability:
                kind, rock_a = "rock", rock_sign[i] * sc.rock_amplitude_mm
            rel = (sense * (sc.flat_error_mm if phase == "flat" else disps[k % len(disps)]) * (1 + sc.indicator_scale_error)
                   + scatter[i] + offset)
            t_seat, t_lift = t, t + sc.seated_s
            segs.append(_Segment(t_seat, rel, _seg_value(segs[-1], t_seat), sc.settle_tau_s, omega,
                                 rock_a, 1.0 / rock_period[i] if rock_a else 0.0))
            segs.append(_Segment(t_lift, stop_rel, _seg_value(segs[-1], t_lift), sc.lift_tau_s, 0.0))
            t_mid = 0.5 * (t_seat + t_lift)
            seatings.append({
                "index": number, "kind": kind if kind in ("grit", "rock") else "flat" if phase == "flat"
                else "surface", "phase": phase, "t_start_s": round(t_seat, 6), "t_end_s": round(t_lift, 6),
                "true_value_mm": self._zero(t_mid) + rel, "offset_from_zero_mm": rel,
            })
            t = t_lift + sc.lifted_s
        self.duration_s = seatings[-1]["t_end_s"] + sc.tail_s
        self._segs = segs
        self._seg_t0 = np.array([s.t0 for s in segs])
        self._draw_faults(seed)

        counts = {
            "flat": sum(s["phase"] == "flat" for s in seatings),
            "surface": sum(s["phase"] != "flat" for s in seatings),
            "grit": sum(s["kind"] == "grit" for s in seatings),
            "rock": sum(s["kind"] == "rock" for s in seatings),
            "expected_accepted_flat": sum(s["kind"] == "flat" for s in seatings),
            "expected_accepted_surface": sum(s["kind"] == "surface" for s in seatings),
        }
        extra = {"sagittas_mm": sags, "flat_error_mm": sc.flat_error_mm} if len(pieces) == 2 else {}
        self.truth = {
            "scenario": sc.name, "invented": True, "seed": seed,
            "surface": sc.surface, "radius_mm": sc.radius_mm, "ring_radius_mm": ring_r, "foot_radius_mm": foot_r,
            "sagitta_mm": sags[pieces[0]], "sense": sc.profile.indicator.sense,
            "drift_mm_per_min": sc.drift_mm_per_min, "zero_mm": sc.zero_mm,
            "stop_mm": self._zero(0.0) + stop_rel, "step_mm": sc.step, "scatter_mm": sc.scatter_mm,
            "noise_mm": sc.noise_mm, "unit": sc.unit, "mode": sc.mode, "rate_hz": sc.rate_hz,
            "duration_s": round(self.duration_s, 6), "seatings": seatings, "counts": counts,
            "garbage_lines": len(self._garbage), "half_line": sc.half_line_at_start,
            "disconnects": [{"t_start_s": a, "t_end_s": b} for a, b in self._gaps], **extra,
        }

    def _draw_faults(self, seed: int) -> None:
        """Faults, drawn from their own generator so they do not shift the seatings."""
        sc = self.scenario
        frng = np.random.default_rng([seed, 2])
        self._gaps: list[tuple[float, float]] = []
        if sc.disconnect_at_s is not None and sc.disconnect_at_s < self.duration_s:
            end = self.duration_s if sc.disconnect_for_s is None else sc.disconnect_at_s + sc.disconnect_for_s
            self._gaps.append((sc.disconnect_at_s, min(end, self.duration_s)))
        n_garbage = int(frng.poisson(sc.garbage_per_min * self.duration_s / 60.0)) if sc.garbage_per_min else 0
        g_times = np.sort(frng.uniform(0.0, self.duration_s, n_garbage))
        self._garbage = []
        for gt in g_times:
            size = int(frng.integers(3, 17))
            body = bytes(frng.choice(np.r_[0x00, np.arange(0x80, 0x100)], size).astype(np.uint8))
            if not self._in_gap(gt):
                self._garbage.append((float(gt), body + ENDINGS[sc.ending]))
        self._half_lead = bytes([int(frng.integers(0x80, 0x100))])
        self._half_cut = float(frng.random())

    def _zero(self, t_s: float) -> float:
        return self.scenario.zero_mm + self.scenario.drift_mm_per_min * t_s / 60.0

    def _in_gap(self, t: float) -> bool:
        return any(a <= t < b for a, b in self._gaps)

    def values_mm(self, t_s: np.ndarray) -> np.ndarray:
        """The noise-free display (mm) at the given times: zero, drift, seatings, transients."""
        t_s = np.asarray(t_s, dtype=float)
        idx = np.searchsorted(self._seg_t0, t_s, side="right") - 1
        out = np.empty_like(t_s)
        for k in np.unique(idx):
            seg = self._segs[k]
            sel = idx == k
            dt = t_s[sel] - seg.t0
            e = np.exp(-dt / seg.tau)
            if seg.omega:
                e *= np.cos(seg.omega * dt)
            v = seg.target + (seg.start - seg.target) * e
            if seg.rock_a:
                v += seg.rock_a * np.sin(2 * np.pi * seg.rock_f * dt)
            out[sel] = v
        return out + self.scenario.zero_mm + self.scenario.drift_mm_per_min * t_s / 60.0

    def _format(self, counts: int) -> bytes:
        sc = self.scenario
        units = abs(counts) * self._units_per_count
        d = self._decimals
        num = f"{units // 10**d}.{units % 10**d:0{d}d}" if d else str(units)
        if sc.decimal != ".":
            num = num.replace(".", sc.decimal)
        sign = "-" if counts < 0 else "+" if sc.sign == "always" else ""
        if sc.width:
            num = sign + num.rjust(sc.width - len(sign), "0") if sc.pad == "0" else (sign + num).rjust(sc.width)
        else:
            num = sign + num
        return (num + sc.suffix).encode("ascii") + ENDINGS[sc.ending]

    def sent_values(self) -> Iterator[tuple[float, float]]:
        """(t_s, reading in indicator steps) of every reading line, before formatting."""
        sc = self.scenario
        rng = np.random.default_rng([self.seed, 1])
        n_total = int(math.floor(self.duration_s * sc.rate_hz)) + 1
        last = None
        for i0 in range(0, n_total, CHUNK):
            t = np.arange(i0, min(i0 + CHUNK, n_total)) / sc.rate_hz
            v = self.values_mm(t) + rng.normal(0.0, 1.0, t.size) * sc.noise_mm
            counts = np.rint(from_mm(v, sc.unit) / self._step_u).astype(np.int64)
            if sc.mode == "on-change":
                prev = np.r_[counts[0] - 1 if last is None else last, counts[:-1]]
                keep = counts != prev
                last = counts[-1]
                t, counts = t[keep], counts[keep]
            for ti, c in zip(t.tolist(), counts.tolist()):
                yield ti, c

    def lines(self) -> Iterator[tuple[float, bytes]]:
        """(t_s, bytes with the line ending) in time order, as the device sends them."""
        garbage = iter(self._garbage)
        g = next(garbage, None)
        first = self.scenario.half_line_at_start
        for t, c in self.sent_values():
            if self._in_gap(t):
                continue
            while g is not None and g[0] <= t:
                yield g
                g = next(garbage, None)
            line = self._format(c)
            if first:
                first = False
                body = line.rstrip(b"\r\n")
                cut = 1 + int(self._half_cut * max(1, len(body) - 1))
                line = self._half_lead + line[cut:]  # joined mid-line; the UART garbles the first byte
            yield t, line
        while g is not None:
            yield g
            g = next(garbage, None)

    def reading_mm(self, counts: int) -> float:
        """The value in mm that a reading line of `counts` steps states."""
        return to_mm(counts * self._step_u, self.scenario.unit)

    def write_truth(self, path) -> None:
        Path(path).write_text(json.dumps(self.truth, indent=2) + "\n", encoding="utf-8")


def simulate(scenario: Scenario, seed: int | None = None) -> SimRun:
    """A reproducible session from a scenario (its own seed unless one is given)."""
    s = scenario.seed if seed is None else int(seed)
    if not scenario.systematics:
        return SimRun(scenario, s)
    drawn_scenario, drawn = draw_systematics(scenario, s)
    run = SimRun(drawn_scenario, s)
    run.truth["systematics"] = drawn
    return run


def write_recording(run: SimRun, path) -> None:
    """The run as a .rec file, without real time: the raw field is each line without its final LF."""
    sc = run.scenario
    start = datetime.fromisoformat(sc.start_utc.replace("Z", "+00:00"))
    if start.tzinfo is None:
        start = start.replace(tzinfo=timezone.utc)
    header = {
        "source": "virtual indicator (saglog simulate), an invented scenario",
        "scenario": sc.name, "seed": run.seed, "port": "simulated",
        "stream": f"{sc.mode} {sc.rate_hz:g} Hz, {sc.unit}, ending {sc.ending}",
    }
    gaps = list(run.truth["disconnects"])
    with RecWriter(path, start.timestamp(), header) as w:
        for t, data in run.lines():
            while gaps and gaps[0]["t_start_s"] <= t:
                gap = gaps.pop(0)
                w.comment(gap_comment(gap["t_start_s"], gap["t_end_s"]))
            w.write(t, data[:-1] if data.endswith(b"\n") else data)
        for gap in gaps:
            w.comment(gap_comment(gap["t_start_s"], max(gap["t_end_s"], gap["t_start_s"])))
