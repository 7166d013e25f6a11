"""Spoken results: what is said (rounded as the uncertainty supports), that espeak-ng really speaks it, and that
speech never holds the capture back.

Rounding follows JCGM 100:2008 (GUM) 7.2.6: a result is not given with more
digits than its uncertainty supports -- here the place of the first
significant digit of the expanded uncertainty U.  The WAV file espeak-ng
writes is measured by sox's `stat` effect (Debian's sox), an outside tool.
"""

from __future__ import annotations

import math
import re
import shutil
import subprocess

from hypothesis import given, settings, strategies as st

from logger.analysis.phases import FLAT, SURFACE
from logger.analysis.session import AnalysisSettings
from logger.live.speech import Espeak, Speaker, find_engine, surface_phrase
from tests.helpers import debian
from tests.helpers.simrun import live_session

NUMBER = re.compile(r"radius (\d+(?:\.\d+)?) (millimetres|inches)")


def spoken_number(text: str) -> tuple[float, int]:
    """The radius in a phrase and how many decimals were said."""
    m = NUMBER.match(text)
    assert m, text
    digits = m.group(1).partition(".")[2]
    return float(m.group(1)), len(digits)


@settings(max_examples=300, deadline=None)
@given(radius_mm=st.floats(100, 50_000), U_mm=st.floats(0.0005, 900), unit=st.sampled_from(["mm", "in"]))
def test_the_radius_is_said_to_the_first_significant_digit_of_U(radius_mm, U_mm, unit):
    scale = 25.4 if unit == "in" else 1.0  # 25.4 mm to the inch, exactly
    text = surface_phrase({"radius_mm": radius_mm, "radius_U_mm": U_mm}, unit)
    said, decimals = spoken_number(text)
    R, U = radius_mm / scale, U_mm / scale
    place = 10.0 ** math.floor(math.log10(U))  # worked out here from U alone
    assert place <= U * (1 + 1e-12) < 10 * place * (1 + 1e-12)
    assert abs(said - R) <= place / 2 * (1 + 1e-9) + 1e-9  # the nearest multiple of that place
    assert decimals == max(0, -round(math.log10(place)))  # and no digit beyond it
    assert text.split()[2] == ("inches" if unit == "in" else "millimetres")


@given(radius_mm=st.floats(1000, 5000), to_go_mm=st.floats(-300, 300), U_mm=st.floats(0.5, 60))
def test_with_a_target_the_phrase_says_what_is_left_and_which_way(radius_mm, to_go_mm, U_mm):
    text = surface_phrase({"radius_mm": radius_mm, "radius_U_mm": U_mm, "radius_to_go_mm": to_go_mm}, "mm")
    place = 10.0 ** math.floor(math.log10(U_mm))
    if abs(to_go_mm) < place / 2 * (1 - 1e-9):
        assert text.endswith(", on target")
    elif abs(to_go_mm) > place / 2 * (1 + 1e-9):
        m = re.search(r", (\d+(?:\.\d+)?) (to go|past the target)$", text)
        assert m and abs(float(m.group(1)) - abs(to_go_mm)) <= place / 2 * (1 + 1e-9)
        assert m.group(2) == ("to go" if to_go_mm > 0 else "past the target")


def test_without_U_the_radius_is_about_three_figures():
    assert surface_phrase({"radius_mm": 2436.37, "radius_U_mm": None}, "mm") == "radius about 2440 millimetres"


class WavEngine:
    """espeak-ng itself, speaking each phrase into its own WAV file instead of the loudspeaker."""

    def __init__(self, folder):
        self.espeak = Espeak(shutil.which("espeak-ng"))
        self.folder, self.said = folder, []

    def say(self, text: str) -> None:
        self.espeak.say(text, wav_path=self.folder / f"{len(self.said)}.wav")
        self.said.append(text)


def sox_stat(path) -> dict:
    out = subprocess.run(["sox", str(path), "-n", "stat"], capture_output=True, text=True, check=True).stderr
    return {k.strip(): float(v) for k, v in (line.split(":", 1) for line in out.splitlines() if ":" in line)
            if re.fullmatch(r"\s*-?[\d.]+(e-?\d+)?\s*", v)}


def test_espeak_ng_speaks_a_phrase_that_sox_hears(tmp_path):
    debian.ensure({"espeak-ng": "espeak-ng", "sox": "sox"})
    engine = WavEngine(tmp_path)
    engine.say("radius 2436 millimetres, 36 to go")
    stat = sox_stat(tmp_path / "0.wav")
    assert stat["Length (seconds)"] > 1.0  # several words take more than a second at 160 words a minute
    assert stat["Maximum amplitude"] > 0.1 and stat["RMS     amplitude"] > 0.01  # not silence


def run_session(listeners):
    return live_session(listeners, "messy-grit-rock", AnalysisSettings(target_radius_mm=2400.0))


def test_every_seating_is_logged_and_only_the_newest_waits_to_be_said(tmp_path):
    debian.ensure({"espeak-ng": "espeak-ng"})
    logged = []
    engine = WavEngine(tmp_path)
    speaker = Speaker("mm", logged.append, lambda: engine)
    pipeline = run_session([speaker])  # seatings come far faster than speech here: no real time
    decisions = pipeline.result.decisions
    assert len(logged) == len(decisions) and all(line.startswith("say: ") for line in logged)
    assert logged[0] == "say: zero set"
    phrases = [line[5:] for line in logged]
    assert engine.said[-1] == phrases[-1] and len(engine.said) < len(phrases)  # the newest said; older skipped
    assert all(p in phrases for p in engine.said) and len(list(tmp_path.glob("*.wav"))) == len(engine.said)


def test_the_phrases_follow_the_decisions():
    logged = []
    pipeline = run_session([Speaker("mm", logged.append, None, warn=logged.append)])
    assert logged[0].startswith("speech: no speech engine found")  # one warning, then the phrases
    phrases = [line[5:] for line in logged[1:]]
    assert len(phrases) == len(pipeline.seatings)
    rejected = [p for p in phrases if p.startswith("rejected, ")]
    assert rejected and all(p.split(", ")[1] in ("outlier", "unsteady") for p in rejected)
    assert any(p.startswith("radius ") and ("to go" in p or "past the target" in p) for p in phrases)
    assert phrases.count("zero set") == 1 and "flat accepted" in phrases
    assert {d.phase for d in pipeline.result.decisions} == {FLAT, SURFACE}


def test_find_engine_prefers_espeak_ng_on_linux():
    debian.ensure({"espeak-ng": "espeak-ng"})
    engine = find_engine()()
    assert isinstance(engine, Espeak) and engine.exe == shutil.which("espeak-ng")
