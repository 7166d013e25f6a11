"""Spoken results (`--speak`): the person at the stand hears each seating's outcome.

After each seating one short phrase: an accepted surface seating says the
radius, rounded to the place of the first significant digit of its expanded
uncertainty (more digits would claim what the measurement does not support),
in the profile's unit, and with a target what is left to go; a rejected one
says "rejected" and the short reason; the first accepted flat says the zero
is set.  Every phrase is also written to the log as `say: PHRASE`.

Speech runs on its own thread and never blocks the capture.  Only the newest
phrase waits to be said: when seatings come faster than speech, older ones
are skipped (they are in the log).  The engine is espeak-ng, run directly,
on Linux; elsewhere (or without espeak-ng) pyttsx3, which drives the
platform's own synthesiser.  With neither, one warning line and the capture
goes on.
"""

from __future__ import annotations

import math
import shutil
import subprocess
import sys
import threading

from logger.analysis.phases import FLAT, SURFACE
from logger.live.listener import Listener
from logger.units import from_mm

UNIT_WORDS = {"mm": "millimetres", "in": "inches"}
WORDS_PER_MINUTE = 160
SAY_TIMEOUT_S = 30.0


def rounding_step(u: float) -> float:
    """The place of the first significant digit of `u` (3.1 -> 1, 0.42 -> 0.1, 31 -> 10)."""
    return 10.0 ** math.floor(math.log10(u))


def rounded(x: float, step: float) -> str:
    """`x` rounded to a multiple of `step` (a power of ten), with just the decimals that step needs."""
    decimals = max(0, -round(math.log10(step)))
    return f"{round(x / step) * step:.{decimals}f}"


def surface_phrase(summary: dict, unit: str) -> str:
    """`radius 2436 millimetres, 36 to go` -- the radius as far as its uncertainty supports, and the target."""
    radius = from_mm(summary["radius_mm"], unit)
    U_mm = summary.get("radius_U_mm")
    words = UNIT_WORDS[unit]
    if U_mm:
        step = rounding_step(from_mm(U_mm, unit))
        text = f"radius {rounded(radius, step)} {words}"
    else:  # one seating: no uncertainty yet, so three significant figures and a plain "about"
        step = 10.0 ** (math.floor(math.log10(abs(radius))) - 2)
        text = f"radius about {rounded(radius, step)} {words}"
    to_go_mm = summary.get("radius_to_go_mm")
    if to_go_mm is not None:
        to_go = rounded(abs(from_mm(to_go_mm, unit)), step)
        if float(to_go) == 0:
            text += ", on target"
        else:
            text += f", {to_go} to go" if to_go_mm > 0 else f", {to_go} past the target"
    return text


def phrase(decision, summary: dict, unit: str, zero_was_set: bool) -> str:
    """What to say after one seating (`zero_was_set`: an earlier flat seating set the zero already)."""
    if not decision.accepted:
        short = decision.reason.split(":")[0].strip() or "no reason given"
        return f"rejected, {short}"
    if decision.phase == FLAT:
        return "flat accepted" if zero_was_set else "zero set"
    if decision.phase == SURFACE and summary.get("radius_mm") is not None:
        return surface_phrase(summary, unit)
    return "surface accepted, no radius yet"


class Espeak:
    """espeak-ng run directly: each phrase is one short process (text on stdin, never on the command line)."""

    def __init__(self, exe: str):
        self.exe = exe

    def command(self, wav_path=None) -> list[str]:
        return [self.exe, "-s", str(WORDS_PER_MINUTE), "--stdin"] + (["-w", str(wav_path)] if wav_path else [])

    def say(self, text: str, wav_path=None) -> None:
        subprocess.run(self.command(wav_path), input=text.encode(), stdout=subprocess.DEVNULL,
                       stderr=subprocess.DEVNULL, timeout=SAY_TIMEOUT_S, check=False)


class Pyttsx:
    """pyttsx3: the platform's synthesiser (SAPI5, the macOS one, espeak); made on the thread that speaks."""

    def __init__(self, module):
        self.engine = module.init()

    def say(self, text: str) -> None:
        self.engine.say(text)
        self.engine.runAndWait()


def find_engine():
    """A callable that makes the engine on the speaking thread, or None when this machine has none."""
    exe = shutil.which("espeak-ng")
    if exe and sys.platform.startswith("linux"):
        return lambda: Espeak(exe)
    try:
        import pyttsx3
    except ImportError:
        return (lambda: Espeak(exe)) if exe else None
    return lambda: Pyttsx(pyttsx3)


class Speaker(Listener):
    """The `--speak` listener: logs every phrase at once, speaks the newest on its own thread."""

    def __init__(self, unit: str, log, make_engine=None, warn=None):
        self.unit = unit
        self.log = log  # one line of text into the run's log (the plain log's `say`)
        self._zero_set = False
        self._next: str | None = None
        self._done = False
        self._wake = threading.Condition()
        self._thread = None
        if make_engine is None:
            (warn or _warn)("speech: no speech engine found (espeak-ng or pyttsx3); phrases go to the log only")
            return
        self._thread = threading.Thread(target=self._speak_loop, args=(make_engine, warn or _warn),
                                        name="speech", daemon=True)
        self._thread.start()

    def seating(self, decision, summary: dict) -> None:
        text = phrase(decision, summary, self.unit, self._zero_set)
        self._zero_set = self._zero_set or (decision.accepted and decision.phase == FLAT)
        self.log(f"say: {text}")
        with self._wake:
            self._next = text  # an older phrase not yet said is replaced: only the newest result matters
            self._wake.notify()

    def end(self, summary: dict) -> None:
        with self._wake:
            self._done = True
            self._wake.notify()
        if self._thread is not None:
            self._thread.join(SAY_TIMEOUT_S)  # the phrase being said, and the newest waiting, are said before exit

    def _speak_loop(self, make_engine, warn) -> None:
        try:
            engine = make_engine()
        except Exception as exc:  # noqa: BLE001 - a broken engine must not end the capture
            warn(f"speech: the speech engine did not start ({exc}); phrases go to the log only")
            return
        while True:
            with self._wake:
                while self._next is None and not self._done:
                    self._wake.wait()
                text, self._next = self._next, None
            if text is None:
                return
            try:
                engine.say(text)
            except Exception as exc:  # noqa: BLE001
                warn(f"speech: could not speak ({exc}); phrases go to the log only")
                return


def _warn(text: str) -> None:
    print(text, file=sys.stderr, flush=True)
