"""`saglog calibrate` end to end: simulated runs replayed into run folders, the written profile, bad input."""

from __future__ import annotations

import json
import math
import tomllib

import pytest
from click.testing import CliRunner

from logger.analysis import geometry
from logger.cli.main import main
from logger.config.profile import load_profile
from logger.simulator import load_scenario, simulate
from logger.simulator.model import write_recording
from tests.helpers.paths import user_error


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def _replay(tmp, name, scenario, profile="example-three-ball", seed=None, *extra):
    rec = tmp / f"{name}.rec"
    write_recording(simulate(scenario, seed), rec)
    res = run("replay", rec, "--profile", profile, "--out", tmp / name, *extra)
    assert res.exit_code == 0, res.stderr
    return tmp / name


@pytest.fixture(scope="module")
def runs(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("cal")
    plate = load_scenario("calibration-test-plate")
    return {
        "plate": _replay(tmp, "plate", plate),
        "plate2": _replay(tmp, "plate2", plate, "example-three-ball", 7),
        "ball": _replay(tmp, "ball", plate.with_overrides(surface="convex", radius_mm=60.0), "example-three-ball", 60),
        "flat": _replay(tmp, "flat", plate.with_overrides(surface_seatings=0)),
        "inch": _replay(tmp, "inch", plate, "example-three-ball-inch"),
        "tmp": tmp,
    }


def test_json_matches_the_written_profile(runs, tmp_path):
    # Source: the profile as written must say what --json says (contract: ring_radius, ring_radius_u,
    # unit); u_c^2 = u(without ball)^2 + (dr/dd u(d))^2 (GUM 5.1.2, the ball's share carried apart).
    out = tmp_path / "cal.toml"
    res = run("calibrate", runs["plate"], runs["ball"], "--reference-radius", 1500, "--reference-radius", 60,
              "--reference-u", 0.05, "--reference-u", 0.001, "--out", out, "--json")
    assert res.exit_code == 0, res.stderr
    got = json.loads(res.stdout)
    data = tomllib.loads(out.read_text())
    prof = load_profile(out)
    assert data["spherometer"]["kind"] == "calibrated" and got["unit"] == data["unit"] == "mm"
    assert data["spherometer"]["ring_radius"] == got["ring_radius"]
    assert prof.contact_mm("concave")[0] == pytest.approx(got["ring_radius"], rel=1e-15)
    cal = data["calibration"]
    assert cal["ring_radius_u"] == pytest.approx(got["ring_radius_u"], rel=1e-12)
    ball_share = cal["ring_radius_per_ball_diameter"] * data["uncertainty"]["ball_diameter"]
    assert math.hypot(data["uncertainty"]["ring_radius"], ball_share) == pytest.approx(got["ring_radius_u"], rel=1e-9)
    assert [r["run"] for r in cal["references"]] == [str(runs["plate"]), str(runs["ball"])]
    assert [r["surface"] for r in cal["references"]] == ["concave", "convex"]
    assert cal["sagitta_min"] < cal["sagitta_max"] and cal["saglog_version"] and cal["date"]
    assert data["indicator"]["resolution"] == 0.001 and data["spherometer"]["ball_diameter"] == 6.35
    assert isinstance(got["consistent"], bool) and got["birge_ratio"] > 0


def test_text_output_and_the_calibrated_profile_in_a_replay(runs, tmp_path):
    out = tmp_path / "cal.toml"
    res = run("calibrate", runs["plate"], "--reference-radius", 1500, "--reference-u", 0.05, "--out", out)
    assert res.exit_code == 0, res.stderr
    assert "effective ring radius" in res.stdout and f"wrote {out}" in res.stdout
    # a measurement with it: far from the calibrated sagitta, the summary says so
    rec = tmp_path / "lens.rec"
    write_recording(simulate(load_scenario("calibration-test-plate").with_overrides(radius_mm=120.0)), rec)
    assert run("replay", rec, "--profile", out, "--out", tmp_path / "lens").exit_code == 0
    summary = json.loads((tmp_path / "lens" / "summary.json").read_text())
    assert "outside" in summary["calibration_note"]
    assert "ring radius" in [c["name"] for c in summary["budget"]]
    near = json.loads((runs["plate"] / "summary.json").read_text())
    assert "calibration_note" not in near  # a caliper profile: no such key


def test_two_runs_on_one_plate_share_its_certificate(runs, tmp_path):
    # Source: GUM 5.2: two runs on one reference share its certificate's error, so it does not
    # average down: the combined certificate term equals the single run's (same sensitivity s/r).
    out = tmp_path / "c.toml"
    res = run("calibrate", runs["plate"], runs["plate2"], "--reference-radius", 1500, "--reference-radius", 1500,
              "--reference-u", 0.05, "--out", out, "--json")
    assert res.exit_code == 0, res.stderr
    comps = {c["name"]: c for c in json.loads(res.stdout)["budget"]["components"]}
    cert = [c for name, c in comps.items() if "certificate" in name]
    assert len(cert) == 1
    s = json.loads((runs["plate"] / "summary.json").read_text())["sagitta_mm"]
    r = json.loads(res.stdout)["ring_radius"]
    assert cert[0]["contribution_mm"] == pytest.approx(0.05 * s / r, rel=0.01)


@pytest.mark.parametrize("names, said", [(("plate",), "1 reference run"), (("plate", "plate2"), "2 reference runs")])
def test_the_written_profile_counts_its_reference_runs_in_good_english(runs, tmp_path, names, said):
    out = tmp_path / "c.toml"
    res = run("calibrate", *(runs[n] for n in names), *("--reference-radius", 1500) * len(names),
              "--reference-u", 0.05, "--out", out)
    assert res.exit_code == 0, res.stderr
    text = out.read_text()
    assert tomllib.loads(text)["name"].endswith(f", calibrated on {said}")
    assert f"Written by saglog calibrate from {said}, calibrated" in text and "(s)" not in text


@pytest.mark.parametrize("case", ["count", "u-count", "surface", "radius", "flat-only", "instruments", "exists"])
def test_bad_input_is_one_line_and_writes_nothing(runs, tmp_path, case):
    out = tmp_path / "cal.toml"
    plate, R = runs["plate"], ("--reference-radius", 1500)
    args, words = {
        "count": ((plate, runs["ball"], *R), ("--reference-radius: 1 given for 2 run folders (",)),
        "u-count": ((plate, runs["ball"], *R, "--reference-radius", 60, "--reference-u", 1, "--reference-u", 2,
                     "--reference-u", 3), ("--reference-u",)),
        "surface": ((plate, *R, "--reference-surface", "convex"), (str(plate), "concave", "convex")),
        "radius": ((plate, "--reference-radius", 3.5), (str(plate), "cannot come from")),  # r^2 < 0
        "flat-only": ((runs["flat"], *R), (str(runs["flat"]), "no accepted seatings")),
        "instruments": ((plate, runs["inch"], *R, "--reference-radius", 1500 / 25.4), ("another instrument",)),
        "exists": ((plate, *R), ("already exists",)),
    }[case]
    if case == "exists":
        out.write_text("keep me")
    user_error(run("calibrate", *args, "--out", out), *words)
    assert (out.read_text() == "keep me") if case == "exists" else not out.exists()


def test_a_wrong_reference_radius_is_refused(runs, tmp_path):
    # Source: common practice: a reference radius that gives a ring radius far from the caliper's is a
    # wrong certificate value or unit (1500 in is not 1500 mm).
    out = tmp_path / "cal.toml"
    user_error(run("calibrate", runs["plate"], "--reference-radius", 3000, "--out", out), "far from the profile")
    assert not out.exists()
    assert geometry.ring_radius_from_reference_mm(3000.0, 0.547, 3.175, "concave") > 1.4 * 40.4


def test_real_subprocess_writes_and_refuses(runs, tmp_path):
    # Source: the contract's exit statuses, through a real `python -m logger` as a user runs it.
    from tests.helpers.paths import run_saglog

    out = tmp_path / "cal.toml"
    r = run_saglog("calibrate", runs["plate"], "--reference-radius", 1500, "--reference-u", 0.05, "--out", out, "--json")
    assert r.returncode == 0, r.stderr
    assert json.loads(r.stdout)["ring_radius"] == tomllib.loads(out.read_text())["spherometer"]["ring_radius"]
    r = run_saglog("calibrate", runs["plate"], runs["ball"], "--reference-radius", 1500, "--out", tmp_path / "x.toml")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    assert not (tmp_path / "x.toml").exists()


def test_from_a_run_folder_or_from_its_profile_the_same_sources(runs, tmp_path):
    # A profile stating its own rig sources (not the defaults; invented numbers): a run analysed with it
    # keeps them in settings.json, the spherometer rebuilt from there equals the profile's, and the
    # calibrated profiles from the run alone and with --profile carry the same sources, so a mirror
    # measured with either has the same budget, component by component (GUM 5.1.2: one term per source).
    from logger.cli.calibrate import _run_profile
    from logger.run.load import load_run

    text = (tmp_path / "rig.toml")
    text.write_text('unit = "mm"\n[spherometer]\nkind = "three-ball"\nleg_spacings = [70.02, 69.98, 70.01]\n'
                    'ball_diameter = 6.35\n[indicator]\nresolution = 0.001\n[uncertainty]\nleg_spacing = 0.012\n'
                    'flat_flatness = 0.0002\nindicator_error = 0.0004\nprobe_offset = 1.2\ncaliper_common = 0.003\n')
    plate = _replay(tmp_path, "plate", load_scenario("calibration-test-plate"), str(text))
    assert _run_profile(load_run(plate)).spherometer == load_profile(text).spherometer
    budgets, sources = [], []
    for name, extra in (("from-run", ()), ("from-profile", ("--profile", text))):
        out = tmp_path / f"{name}.toml"
        res = run("calibrate", plate, "--reference-radius", 1500, "--reference-u", 0.05, "--out", out, *extra)
        assert res.exit_code == 0, res.stderr
        sources.append(load_profile(out).spherometer.systematic_mm)
        mirror = _replay(tmp_path, f"mirror-{name}", load_scenario("mirror-150-f8-rough"), str(out))
        budgets.append(json.loads((mirror / "summary.json").read_text())["budget"])
    assert sources[0] == sources[1] == {"flat_flatness": 0.0002, "indicator_error": 0.0004, "probe_offset": 1.2}
    assert budgets[0] == budgets[1]
    assert {c["name"] for c in budgets[0]} >= {"reference flat's flatness over the ring",
                                               "indicator's error of indication", "probe offset from the circumcentre"}
