"""The live panel as the person at the stand reads it: phases, zero, what is still to go, digit size."""

from __future__ import annotations

import io
import re

import pytest
from rich.console import Console

from logger.analysis.seating import Seating
from logger.analysis.session import Decision
from logger.live.panel import LivePanel, big_digits, phase_text, scale_for
from logger.live.present import length_text, result_lines

SUMMARY = dict(seatings_flat=4, seatings_surface=9, seatings_rejected=1, zero_mm=-0.00001, sagitta_mm=0.3403,
               sagitta_u_mm=0.0004, radius_mm=2403.6, radius_U_mm=10.9, focal_length_mm=1201.8,
               target_radius_mm=2400.0, radius_to_go_mm=3.6, sagitta_to_go_mm=0.0005, status="ok",
               message="Measured.", unit="mm", coverage_factor=2.1, lines=900, bad_lines=0)  # invented


def _panel_text(width: int, last_phase: str | None = None, summary: dict = SUMMARY) -> str:
    console = Console(width=width, file=io.StringIO(), record=True, color_system=None)
    panel = LivePanel("mm", "test", console=console)
    panel.summary = dict(summary)
    if last_phase:
        panel.seating(Decision(Seating(14, 0.0, 1.0, 0.0, 0.0, 10), phase=last_phase), dict(SUMMARY))
    console.print(panel._render())
    return console.export_text()


def _block_width(text: str) -> int:
    return max(len(x.strip(" │")) for x in text.splitlines() if "█" in x)


def test_the_closing_flats_say_the_zero_is_being_checked():
    assert phase_text(SUMMARY, "flat") == "checking the zero on the flat (drift)"
    assert phase_text(SUMMARY, "surface") == "measuring the surface"
    assert "checking the zero on the flat" in _panel_text(100, "flat")


def test_a_zero_that_rounds_to_nothing_has_no_sign():
    assert length_text(-0.00001, "mm", 4) == "0.0000 mm"
    assert length_text(-0.0000001, "in", 4) == "0.00000 in"
    assert length_text(-0.0001, "mm", 4) == "-0.0001 mm"
    text = _panel_text(100)
    assert "-0.0000" not in text and re.search(r"zero\s+0\.0000 mm", text)


def test_one_name_for_what_is_still_to_go_on_the_panel_and_the_end_lines():
    text = _panel_text(120)
    assert re.search(r"still to go\s+radius 3\.6 mm, sagitta 0\.00050 mm", text)
    (end,) = [x for x in result_lines(SUMMARY) if "to go" in x]
    assert "radius still to go 3.6 mm" in end and "sagitta still to go 0.00050 mm" in end
    assert "at the ring" not in text + end


def test_past_the_target_is_said_in_words_not_by_a_minus_sign():
    # ground 1.3 mm past a 2400 mm target (invented): every place says "past the target", unsigned
    past = dict(SUMMARY, radius_mm=2398.7, radius_to_go_mm=-1.3, sagitta_to_go_mm=-0.00018,
                depth_to_go_mm=-0.0006, depth_to_go_U_mm=0.0053)
    text = _panel_text(120, summary=past)
    assert re.search(r"past the target by\s+radius 1\.3 mm, sagitta 0\.00018 mm", text)
    assert re.search(r"depth ground past the target\s+0\.0006 mm \+- 0\.0053 mm", text)
    end = result_lines(past)
    assert "target radius 2400.0 mm: radius past the target by 1.3 mm, sagitta past the target by 0.00018 mm" in end
    assert "depth ground past the target: 0.0006 mm +- 0.0053 mm at the centre (sphere)" in end
    assert "still to go" not in text + "\n".join(end) and "-1.3" not in text + "\n".join(end)
    ahead = result_lines(dict(past, radius_to_go_mm=1.3, sagitta_to_go_mm=0.00018, depth_to_go_mm=0.0006))
    assert "target radius 2400.0 mm: radius still to go 1.3 mm, sagitta still to go 0.00018 mm" in ahead
    assert "depth still to grind: 0.0006 mm +- 0.0053 mm at the centre (sphere)" in ahead


def test_the_status_is_said_once():
    assert result_lines(SUMMARY)[0] == "ok: Measured."


@pytest.mark.parametrize("bad, words", [(0, "0 bad lines of 900"), (1, "1 bad line of 900"),
                                        (2, "2 bad lines of 900")])
def test_the_end_lines_count_bad_lines_in_good_english(bad, words):
    (counts,) = [x for x in result_lines(dict(SUMMARY, bad_lines=bad)) if x.startswith("seatings:")]
    assert counts.endswith(f"; {words}")


def test_block_digits_grow_with_the_panel_and_always_fit():
    widths = {}
    for w in (40, 60, 90, 130, 200):
        text = _panel_text(w)
        widths[w] = _block_width(text)
        assert widths[w] <= w - 4
        assert all(len(x) <= w for x in text.splitlines())
    sizes = sorted(set(widths.values()))
    assert len(sizes) >= 3 and [widths[w] for w in sorted(widths)] == sorted(widths.values())
    # the shape holds: at scale s every glyph is 3s columns wide, 5 * ceil(s/2) rows tall
    for s in (1, 2, 3, 4):
        rows = big_digits("8", s).splitlines()
        assert len(rows) == 5 * ((s + 1) // 2) and max(len(r) for r in rows) == 3 * s
    assert scale_for("2403.6", 200) == 4 and scale_for("2403.6", 20) == 1
