"""`saglog radius`, `plan` and `new-profile` through click's CliRunner and one real subprocess."""

import json
import math
import os
import re
import subprocess
import sys
import tempfile
import tomllib
from decimal import Decimal
from pathlib import Path

import pytest
import sympy
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.optimize import brentq

from tests.helpers.exact_construction import three_ball_reading
from tests.helpers.paths import user_error
from logger.config.profile import DEFAULT_SYSTEMATIC_MM
from logger.cli.main import main
from logger.config.profile import load_profile

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = str(ROOT / "logger" / "config" / "profiles" / "example-three-ball.toml")
RING_IN = str(ROOT / "logger" / "config" / "profiles" / "example-ring-inch.toml")


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args])


def ok_json(*args):
    res = run(*args, "--json")
    assert res.exit_code == 0, res.stderr
    return json.loads(res.stdout)


def three_ball_file(folder, legs, ball_d, unit, resolution):
    p = Path(folder) / f"p-{unit}.toml"
    p.write_text(f'unit = "{unit}"\n[spherometer]\nkind = "three-ball"\nleg_spacings = {list(legs)!r}\n'
                 f"ball_diameter = {ball_d!r}\n[indicator]\nresolution = {resolution!r}\n", encoding="utf-8")
    return p


UNIT_SCALE = {"mm": 1.0, "in": 25.4}  # 25.4 mm per inch exactly


@st.composite
def seated(draw):
    unit = draw(st.sampled_from(["mm", "in"]))
    a = draw(st.floats(30.0, 120.0))
    b = draw(st.floats(0.8 * a, 1.2 * a))
    c = draw(st.floats(0.8 * a, 1.2 * a))
    ball = draw(st.floats(0.0, 10.0))
    ratio = draw(st.floats(2.0, 200.0))
    surface = draw(st.sampled_from(["concave", "convex"]))
    return unit, [x / UNIT_SCALE[unit] for x in (a, b, c)], ball / UNIT_SCALE[unit], ratio, surface


@settings(max_examples=40, deadline=None)
@given(seated())
def test_radius_json_matches_exact_construction(case):
    # Source: exact construction (tests/helpers/exact_construction.py): the reading a sphere of radius R gives,
    # fed back through `saglog radius --json`, must give R (and f = R/2, textbook) to 1e-6 relative.
    unit, legs, ball, ratio, surface = case
    k = UNIT_SCALE[unit]
    R_mm = ratio * max(legs) * k
    reading_mm = three_ball_reading(*(x * k for x in legs), ball * k / 2, R_mm, surface)
    with tempfile.TemporaryDirectory() as d:
        prof = three_ball_file(d, legs, ball, unit, 0.001)
        out = ok_json("radius", "--profile", prof, "--sagitta", repr(reading_mm / k), "--surface", surface)
    assert out["unit"] == unit
    assert out["radius"] == pytest.approx(R_mm / k, rel=1e-6)
    assert out["focal_length"] == pytest.approx(R_mm / k / 2, rel=1e-6)


@settings(max_examples=25, deadline=None)
@given(seated(), st.floats(3.0, 12.0), st.floats(0.05, 0.4))
def test_plan_json_matches_exact_construction(case, N, D_frac):
    # Source: exact construction for the readings on the mirror and on the convex tool; the textbook
    # sphere for the aperture depth; R = 2f and N = f/D (textbook mirror relations).
    unit, legs, ball, _, _ = case
    k = UNIT_SCALE[unit]
    D = D_frac * 1000.0 / k
    q = 0.001 if unit == "mm" else 0.00005
    R = 2 * N * D  # in the profile's unit
    rho = ball / 2
    with tempfile.TemporaryDirectory() as d:
        prof = three_ball_file(d, legs, ball, unit, q)
        out = ok_json("plan", "--profile", prof, "--diameter", repr(D), "--focal-ratio", repr(N))
    s_cc = three_ball_reading(*legs, rho, R, "concave")
    s_cx = three_ball_reading(*legs, rho, R, "convex")
    assert out["unit"] == unit
    assert out["target_radius"] == pytest.approx(R, rel=1e-12)
    assert out["target_sagitta"] == pytest.approx(s_cc, rel=1e-6)
    assert out["tool_sagitta"] == pytest.approx(s_cx, rel=1e-6)
    rim = D / 2  # the rim point (D/2, depth) lies on the sphere x^2 + (z - R)^2 = R^2
    assert rim**2 + (out["aperture_sagitta"] - R) ** 2 == pytest.approx(R**2, rel=1e-12)
    assert out["aperture_sagitta"] < R
    # One count: the exact change of R between readings s and s + q, from the construction (solved
    # for R), agrees with the linearised figure to within the curvature term, about q/s.
    R_plus = brentq(lambda x: three_ball_reading(*legs, rho, x, "concave") - (s_cc + q), 0.3 * R, R)
    assert out["radius_per_count"] == pytest.approx(R - R_plus, rel=3 * q / s_cc + 1e-6)


def test_radius_human_output_and_budget():
    res = run("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--scatter", "0.002", "--mean-of", "10")
    assert res.exit_code == 0, res.stderr
    assert "radius of curvature" in res.stdout and "Uncertainty budget" in res.stdout
    assert "seating scatter" in res.stdout and "leg spacing a" in res.stdout and "expanded uncertainty U" in res.stdout
    out = ok_json("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--scatter", "0.002", "--mean-of", "10")
    assert out["budget"]["nu_eff"] > 9 and out["radius_U"] == pytest.approx(out["budget"]["U_mm"])
    # Source: GUM 4.2.3, s/sqrt(n) with n - 1 dof.
    (scatter,) = [c for c in out["budget"]["components"] if c["name"] == "seating scatter"]
    assert scatter["u_mm"] == pytest.approx(0.002 / math.sqrt(10)) and scatter["dof"] == 9


def test_radius_inches_and_zero_u():
    out = ok_json("radius", "--profile", RING_IN, "--sagitta", "0.01", "--zero-u", "0.00002")
    assert out["unit"] == "in"
    assert any(c["name"] == "zero (flat seatings)" for c in out["budget"]["components"])
    # Source: JCGM 100:2008 eq. 10 rebuilt here, in inches, from the profile file's own numbers
    # (logger/config/profiles/example-ring-inch.toml: outer 3.000, edge 0.010, u 0.0004 and 0.002,
    # step 0.00005).  A concave surface bears on the outer edge (common practice):
    # R = ((o/2 - e)^2 + s^2) / (2 s) + e, sensitivities by sympy.  The sagitta carries the zero's
    # u and two reading steps q / sqrt(12) (GUM F.2.2.1: no scatter given); every dof is infinite,
    # so k is the normal quantile for 95.45 %.
    o, e, s_ = sympy.symbols("o e s", positive=True)
    R = ((o / 2 - e) ** 2 + s_**2) / (2 * s_) + e
    vals = {o: 3.0, e: 0.010, s_: 0.01}
    d = {x: float(sympy.diff(R, x).subs(vals)) for x in (o, e, s_)}
    q = 0.00005
    # the rig's other sources at the profile defaults (no caliper legs on a ring): flat and indicator
    # bounds on s, the probe offset's R e^2 / r^2 on R, rectangles (GUM 4.3.7)
    rig = {k: v / 25.4 for k, v in DEFAULT_SYSTEMATIC_MM.items()}
    R0, r0 = float(R.subs(vals)), 3.0 / 2 - 0.010
    rig2 = ((d[s_] * rig["flat_flatness"]) ** 2 + (d[s_] * rig["indicator_error"]) ** 2
            + (R0 * rig["probe_offset"] ** 2 / r0**2) ** 2) / 3
    u_c = math.sqrt((d[s_] ** 2) * (0.00002**2 + 2 * q * q / 12) + (d[o] * 0.0004) ** 2 + (d[e] * 0.002) ** 2 + rig2)
    assert out["radius"] == pytest.approx(float(R.subs(vals)), rel=1e-12)
    assert out["radius_u"] == pytest.approx(u_c, rel=1e-6)
    assert out["radius_U"] == pytest.approx(stats.norm.ppf(0.5 + 0.9545 / 2) * u_c, rel=1e-6)
    assert out["budget"]["U_in"] == out["radius_U"]


def test_plan_human_and_seatings():
    res = run("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-length", "1200",
              "--scatter", "0.002", "--radius-u", "6")
    assert res.exit_code == 0, res.stderr
    assert "seatings needed" in res.stdout and "convex tool" in res.stdout
    out = ok_json("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "6",
                  "--scatter", "0.002", "--radius-u", "6")
    n = out["seatings_needed"]
    # Source: definition (GUM eq. 10): n seatings reach the target, n - 1 do not; the zero is the mean
    # of as many flat seatings with the same scatter, so its Type A term doubles the variance (GUM 4.2.3).
    per = out["radius_per_count"] / 0.001 * 0.002 * math.sqrt(2)  # |dR/ds| * scatter, linearised as in the plan
    assert math.hypot(per / math.sqrt(n), out["radius_u_without_scatter"]) <= 6.0
    assert math.hypot(per / math.sqrt(n - 1), out["radius_u_without_scatter"]) > 6.0
    unreachable = ok_json("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "6",
                          "--scatter", "0.002", "--radius-u", "0.2")
    assert unreachable["seatings_needed"] is None
    res = run("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "6", "--scatter", "0.002",
              "--radius-u", "0.2")
    assert "not reachable" in res.stdout


def test_plan_prints_lengths_in_plain_decimals_never_e_notation():
    # An inch indicator's count (0.00005 in, read from the shipped profile) and an inch scatter as small:
    # every length in plain decimals (Python's decimal module writes the count without an exponent),
    # with the values of --json to six significant figures.
    inch = ROOT / "logger" / "config" / "profiles" / "example-three-ball-inch.toml"
    q = tomllib.loads(inch.read_text())["indicator"]["resolution"]
    args = ("plan", "--profile", inch, "--diameter", "6", "--focal-ratio", "8", "--scatter", repr(q),
            "--radius-u", "0.01")
    res = run(*args)
    assert res.exit_code == 0, res.stderr
    assert not re.search(r"\d[eE][-+]?\d", res.stdout), res.stdout
    assert f"one indicator count ({Decimal(repr(q)):f} in) moves R by " in res.stdout
    assert f"with {Decimal(repr(q)):f} in scatter" in res.stdout
    per_count = float(re.search(r"moves R by ([0-9.]+) in", res.stdout).group(1))
    assert per_count == pytest.approx(ok_json(*args)["radius_per_count"], rel=1e-5)


def _new(tmp_path, *args, name="new.toml"):
    return run("new-profile", "--out", tmp_path / name, *args)


@pytest.mark.parametrize("how,offset", [("--outside", -6.35), ("--inside", 6.35), ("--leg-spacings", 0.0), ("--centres", 0.0)])
def test_new_profile_from_caliper_readings_round_trips(tmp_path, how, offset):
    # Source: common practice: outside-to-outside = centre distance + one ball diameter,
    # inside-to-inside = centre distance - one ball diameter.
    readings = [76.37, 76.33, 76.36] if how == "--outside" else [63.67, 63.63, 63.66] if how == "--inside" \
        else [70.02, 69.98, 70.01]
    res = _new(tmp_path, "--unit", "mm", how, *readings, "--ball", "6.35", "--resolution", "0.001")
    assert res.exit_code == 0, res.stderr
    # a three-ball instrument has one ring radius, the circle through the ball centres, whatever the surface
    assert "(the circle through the ball centres)" in res.stdout and "concave" not in res.stdout
    p = load_profile(tmp_path / "new.toml")
    assert list(p.spherometer.legs_mm()) == pytest.approx([x + offset for x in readings], abs=1e-9)
    assert p.spherometer.params_mm["ball_diameter"] == 6.35 and p.indicator.resolution_mm == 0.001
    # readings are kept as read (the legs share the ball's error); the geometry is that of the centres
    again = _new(tmp_path, "--unit", "mm", "--centres", *p.spherometer.legs_mm(),
                 "--ball", "6.35", "--resolution", "0.001", name="again.toml")
    assert again.exit_code == 0
    q = load_profile(tmp_path / "again.toml")
    for surface in ("concave", "convex"):
        assert q.contact_mm(surface) == pytest.approx(p.contact_mm(surface), rel=1e-12)
    assert (q.indicator, q.unit) == (p.indicator, p.unit)


def test_new_profile_ring_and_calibrated_in_inches(tmp_path):
    res = _new(tmp_path, "--unit", "in", "--ring-inner", "2.75", "--ring-outer", "3", "--edge-radius", "0.01",
               "--resolution", "0.00005", "--indicator-unit", "in", "--name", "my \"ring\"")
    assert res.exit_code == 0, res.stderr
    # a ring sits on its outer edge on a concave surface (3/2 - 0.01), its inner edge on a convex one (2.75/2 + 0.01)
    assert "ring radius 1.49 in on a concave surface, 1.385 in on a convex one" in res.stdout
    p = load_profile(tmp_path / "new.toml")
    ref = load_profile(RING_IN)
    assert (p.spherometer.kind, p.spherometer.params_mm) == ("ring", ref.spherometer.params_mm)
    assert p.name == 'my "ring"' and p.unit == "in"
    res = _new(tmp_path, "--unit", "mm", "--ring-radius", "40.412", "--ball", "6.35", "--resolution", "0.001",
               "--sense", "out-positive", name="cal.toml")
    assert res.exit_code == 0, res.stderr
    c = load_profile(tmp_path / "cal.toml")
    assert c.contact_mm("concave") == (40.412, 3.175) and c.indicator.sense == "out-positive"


def test_new_profile_refuses_to_overwrite_unless_forced(tmp_path):
    args = ("--unit", "mm", "--centres", 70, 70, 70, "--ball", 6.35, "--resolution", 0.001)
    assert _new(tmp_path, *args).exit_code == 0
    before = (tmp_path / "new.toml").read_text()
    user_error(_new(tmp_path, "--unit", "mm", "--centres", 60, 60, 60, "--ball", 6.35, "--resolution", 0.001),
               "already exists", "--force")
    assert (tmp_path / "new.toml").read_text() == before
    assert _new(tmp_path, "--unit", "mm", "--centres", 60, 60, 60, "--ball", 6.35, "--resolution", 0.001,
                "--force").exit_code == 0
    assert load_profile(tmp_path / "new.toml").spherometer.params_mm["a"] == 60


NEW_BAD = [
    (("--unit", "cm", "--centres", 70, 70, 70, "--ball", 6, "--resolution", 0.001), ["--unit", "'cm' is not one of"]),
    (("--unit", "mm", "--centres", 10, 10, 30, "--ball", 1, "--resolution", 0.001), ["triangle"]),
    (("--unit", "mm", "--outside", 5, 70, 70, "--ball", 6, "--resolution", 0.001), ["--outside"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--ball", -6, "--resolution", 0.001), ["--ball"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--ball", 6, "--resolution", 0), ["--resolution"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--resolution", 0.001), ["--ball"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--inside", 60, 60, 60, "--ball", 6, "--resolution", 0.001),
     ["exactly one"]),
    (("--unit", "mm", "--ring-inner", 70, "--resolution", 0.001), ["--ring-outer"]),
    (("--unit", "mm", "--ring-inner", 80, "--ring-outer", 70, "--resolution", 0.001), ["inner_diameter"]),
    (("--unit", "mm", "--ring-inner", 60, "--ring-outer", 70, "--ball", 3, "--resolution", 0.001), ["--ball"]),
    (("--unit", "mm", "--resolution", 0.001), ["exactly one"]),
    (("--unit", "mm", "--centres", 70, 70, "--resolution", 0.001), ["--centres"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--ball", "nan", "--resolution", 0.001), ["--ball"]),
    (("--unit", "mm", "--ring-inner", 60, "--ring-outer", 70, "--probe-distances", 30, 30, 30, "--resolution", 0.001),
     ["--probe-distances", "three-ball"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--ball", 6, "--probe-distances", 90, 90, 2, "--resolution", 0.001),
     ["probe_distances", "outside the ring"]),
    (("--unit", "mm", "--centres", 70, 70, 70, "--ball", 6, "--probe-distances", 40, 40, "--resolution", 0.001),
     ["--probe-distances"]),
]


def test_new_profile_with_the_probes_distances_in_inches(tmp_path):
    # Source: exact construction (tests/helpers/exact_construction.py): the probe's tip 1 mm from the
    # circumcentre of the example legs; its distances to the balls given in inches (25.4 mm exactly)
    # must give back the 1 mm offset, and the profile then reads the construction's sphere exactly.
    from tests.helpers.exact_construction import three_ball_reading_probe_off

    legs_mm, ball_mm = (70.02, 69.98, 70.01), 6.35
    s_mm, d_mm = three_ball_reading_probe_off(*legs_mm, ball_mm / 2, 2400.0, "concave", (0.0, 1.0))
    res = _new(tmp_path, "--unit", "in", "--centres", *[x / 25.4 for x in legs_mm], "--ball", ball_mm / 25.4,
               "--probe-distances", *[x / 25.4 for x in d_mm], "--resolution", 0.00005)
    assert res.exit_code == 0, res.stderr
    sph = load_profile(tmp_path / "new.toml").spherometer
    assert sph.probe_offset_mm() == pytest.approx(1.0, rel=1e-9)
    assert sph.radius_mm(s_mm, "concave") == pytest.approx(2400.0, rel=1e-9)


@pytest.mark.parametrize("args,words", NEW_BAD)
def test_new_profile_bad_input(tmp_path, args, words):
    user_error(_new(tmp_path, *args), *words)
    assert not (tmp_path / "new.toml").exists()


def test_new_profile_unwritable_folder(tmp_path):
    user_error(run("new-profile", "--out", tmp_path / "no" / "such" / "p.toml", "--unit", "mm", "--centres",
                   70, 70, 70, "--ball", 6, "--resolution", 0.001), "cannot write")


def test_bad_profiles_through_the_commands(tmp_path):
    good = Path(EXAMPLE).read_text()
    cases = {
        "syntax.toml": ("[spherometer\n", "TOML syntax error"),
        "typo.toml": (good.replace("ball_diameter", "ball_diam"), "unknown key"),
        "unit.toml": (good.replace('unit = "mm"', 'unit = "furlong"'), "unknown unit"),
        "flat.toml": (good.replace("[70.02, 69.98, 70.01]", "[10.0, 20.0, 30.0]"), "leg_spacings"),
        "neg.toml": (good.replace("6.35", "-6.35"), "ball_diameter"),
    }
    for name, (text, word) in cases.items():
        (tmp_path / name).write_text(text)
        user_error(run("radius", "--profile", tmp_path / name, "--sagitta", "0.5"), name, word)
        user_error(run("plan", "--profile", tmp_path / name, "--diameter", "200", "--focal-ratio", "5"), name, word)
    user_error(run("radius", "--profile", tmp_path / "missing.toml", "--sagitta", "0.5"), "missing.toml", "not found")


CMD_BAD = [
    (("radius", "--profile", EXAMPLE, "--sagitta", "41"), ["--sagitta", "ring radius"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "0"), ["--sagitta"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "-0.5"), ["--sagitta"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "inf"), ["--sagitta"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "abc"), ["--sagitta"]),
    (("radius", "--profile", EXAMPLE), ["--sagitta"]),
    (("radius", "--sagitta", "0.5"), ["--profile"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--surface", "flat"), ["--surface"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--scatter", "0.002"), ["--mean-of"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--scatter", "0.002", "--mean-of", "1"), ["--mean-of"]),
    # capture's stop-after-N is not the count of a mean: the old spelling says which name to use
    (("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--scatter", "0.002", "--seatings", "5"), ["--mean-of 5"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--scatter", "-1", "--mean-of", "5"), ["--scatter"]),
    (("radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--zero-u", "-1"), ["--zero-u"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "0"), ["--focal-ratio"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "-5"), ["--focal-ratio"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "0", "--focal-ratio", "5"), ["--diameter"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "-200", "--focal-ratio", "5"), ["--diameter"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-length", "0"), ["--focal-length"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200"), ["--focal-ratio", "--focal-length"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "5", "--focal-length", "1000"),
     ["exactly one"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "0.1"), ["--diameter", "too large"]),
    # the 100 mm is the mirror's half-diameter (R = 2 f = 40 mm), not the spherometer's ring
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "0.1"),
     ["sphere of radius 40 mm cannot span an aperture of radius 100 mm, half the diameter"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "20", "--focal-ratio", "0.6"), ["--focal-ratio", "too short"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "5", "--scatter", "0.002"),
     ["--radius-u"]),
    (("plan", "--profile", EXAMPLE, "--diameter", "200", "--focal-ratio", "5", "--scatter", "0.002",
      "--radius-u", "0"), ["--radius-u"]),
    (("no-such-command",), ["no-such-command"]),
]


@pytest.mark.parametrize("args,words", CMD_BAD)
def test_command_bad_input(args, words):
    user_error(run(*args), *words)


def test_real_subprocess():
    # Through a real interpreter: `python -m logger`, from the repository root found from this file.
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    ok = subprocess.run([sys.executable, "-m", "logger", "radius", "--profile", EXAMPLE, "--sagitta", "0.5", "--json"],
                        capture_output=True, text=True, env=env, timeout=60)
    assert ok.returncode == 0, ok.stderr
    # Source: exact construction: a sphere of the printed radius gives the reading we passed in.
    legs = [70.02, 69.98, 70.01]  # the example profile's legs; its balls are 6.35 mm
    assert three_ball_reading(*legs, 3.175, json.loads(ok.stdout)["radius"], "concave") == pytest.approx(0.5, rel=1e-9)
    bad = subprocess.run([sys.executable, "-m", "logger", "plan", "--profile", EXAMPLE, "--diameter", "-1",
                          "--focal-ratio", "5"], capture_output=True, text=True, env=env, timeout=60)
    assert bad.returncode == 2 and bad.stdout == ""
    assert bad.stderr.count("\n") == 1 and "--diameter" in bad.stderr and "Traceback" not in bad.stderr
