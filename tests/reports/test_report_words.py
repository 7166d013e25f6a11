"""report.md in the words of the end lines and the panel (one word for one thing), from a real replay."""

from __future__ import annotations

import re
from pathlib import Path

from logger.config.profile import profile_words
from logger.reports.report import HEADER_COLUMNS, make_report_figure
from logger.run.load import load_run
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


def test_a_shipped_profile_is_named_not_given_as_a_path_into_the_package(tmp_path):
    """A run made with a shipped profile names it (the path inside an install means nothing elsewhere);
    any other profile keeps its path."""
    rec, out = tmp_path / "s.rec", tmp_path / "run"
    write_session(rec)
    assert run_saglog("replay", rec, "--profile", "example-three-ball", "--out", out).returncode == 0
    assert run_saglog("report", out).returncode == 0
    (settings,) = [x for x in (out / "report.md").read_text().splitlines() if x.startswith("- settings: ")]
    assert "profile example-three-ball (in mm)" in settings and "profiles/" not in settings
    own = tmp_path / "example-three-ball.toml"
    own.write_text(Path(EXAMPLE_PROFILE).read_text())
    assert profile_words(own) == str(own)


def test_the_picture_header_is_wrapped_to_the_figure(tmp_path):
    """Every header line of report.png fits the width it is drawn in (a long path once ran off the picture)."""
    rec, out = tmp_path / "s.rec", tmp_path / "run"
    write_session(rec)
    deep = tmp_path / ("a-long-folder-name-" * 6) / "mine.toml"
    deep.parent.mkdir(parents=True)
    deep.write_text(Path(EXAMPLE_PROFILE).read_text())
    assert run_saglog("replay", rec, "--profile", deep, "--out", out).returncode == 0
    fig = make_report_figure(load_run(out))
    (head,) = [a for a in fig.axes if a.get_gid() == "header"]
    body = head.texts[1].get_text().splitlines()
    assert len(body) > 5 and all(len(line) <= HEADER_COLUMNS for line in body)
    assert str(deep.parent)[:40] in "".join(x.strip() for x in body)
