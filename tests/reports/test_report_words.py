"""report.md in the words of the end lines and the panel (one word for one thing), from a real replay."""

from __future__ import annotations

import re

from tests.helpers.paths import EXAMPLE_PROFILE, run_saglog
from tests.live.test_replay import write_session


def test_report_md_speaks_like_the_end_lines(tmp_path):
    rec, out = tmp_path / "s.rec", tmp_path / "run"
    write_session(rec, garbage=True)
    r = run_saglog("replay", rec, "--profile", EXAMPLE_PROFILE, "--out", out, "--rejection", "grubbs")
    assert r.returncode == 0, r.stderr
    end = r.stdout
    assert re.search(r"seatings: 5 flat, 4 surface accepted, 0 rejected; 9 bad lines of \d+", end)
    assert "unreadable" not in end and not end.startswith("status:")
    rep = run_saglog("report", out, "--unit", "in")
    assert rep.returncode == 0, rep.stderr
    md = (out / "report.md").read_text()
    assert re.search(r"seatings: 5 flat, 4 surface accepted, 0 rejected .* 9 bad lines of \d+", md)
    (settings,) = [x for x in md.splitlines() if x.startswith("- settings: ")]
    assert "=" not in settings and "saglog_version" not in settings and "profile_unit" not in settings
    assert "(in mm), rejection grubbs (alpha 0.05)" in settings
    # one count of the example profile, 0.001 mm, in inches: 0.001 / 25.4 = 0.0000394 (exact 25.4 per inch)
    assert "one count 0.0000394 in (0.001 mm)" in md
    assert "leg spacings a, b, c" in md
