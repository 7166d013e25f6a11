"""Profiles: the shipped examples, unit handling, defaults, and every bad file a user can write."""

import math
import tomllib
from pathlib import Path

import pytest

from tests.helpers.exact_construction import three_ball_reading
from logger.analysis import geometry
from logger.errors import UserError
from logger.config.profile import DEFAULT_U_MM, load_profile

PROFILES = Path(__file__).resolve().parents[2] / "logger" / "config" / "profiles"

GOOD = """unit = "mm"
[spherometer]
kind = "three-ball"
leg_spacings = [70.0, 70.0, 70.0]
ball_diameter = 6.35
[indicator]
resolution = 0.001
"""


def _write(tmp_path, text, name="p.toml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


def test_shipped_examples_load_and_are_labelled_invented():
    files = sorted(PROFILES.glob("*.toml"))
    assert {load_profile(f).spherometer.kind for f in files} == {"three-ball", "ring", "calibrated"}
    for f in files:
        assert "invented" in f.read_text(encoding="utf-8")


def test_inch_ring_profile_converts_exactly():
    # Source: international inch, 25.4 mm exactly (1959 agreement).
    p = load_profile(PROFILES / "example-ring-inch.toml")
    assert p.unit == "in" and p.indicator.unit == "in"
    assert p.spherometer.params_mm["outer_diameter"] == pytest.approx(3.0 * 25.4, rel=1e-15)
    assert p.indicator.resolution_mm == pytest.approx(0.00005 * 25.4, rel=1e-15)
    assert p.spherometer.u_mm["edge_radius"] == pytest.approx(0.002 * 25.4, rel=1e-15)
    # A concave surface bears on the outer edge, a convex one on the inner edge (common practice).
    assert p.contact_mm("concave") == pytest.approx((1.5 * 25.4 - 0.254, 0.254), rel=1e-12)
    assert p.contact_mm("convex") == pytest.approx((1.375 * 25.4 + 0.254, 0.254), rel=1e-12)


def test_equilateral_ring_radius_and_defaults(tmp_path):
    # Source: textbook, an equilateral triangle of side a has circumradius a / sqrt(3).
    p = load_profile(_write(tmp_path, GOOD))
    r, rho = p.contact_mm("concave")
    assert r == pytest.approx(70.0 / math.sqrt(3), rel=1e-14) and rho == pytest.approx(3.175)
    assert p.spherometer.u_mm == {"a": DEFAULT_U_MM["leg_spacing"], "b": DEFAULT_U_MM["leg_spacing"],
                                  "c": DEFAULT_U_MM["leg_spacing"], "ball_diameter": DEFAULT_U_MM["ball_diameter"]}
    assert p.indicator.sense == "in-positive" and p.indicator.unit == "mm"


@pytest.mark.parametrize("surface,R_ref", [("convex", 50.8), ("concave", 500.0)])
def test_calibrated_profile_and_reference_inverse(surface, R_ref):
    # Source: exact construction (tests/helpers/exact_construction.py) with the file's own numbers,
    # read here with tomllib: balls of half the stated diameter on an equilateral triangle whose
    # circumradius a / sqrt(3) (textbook) is the stated ring radius, seated on a reference sphere (a
    # 4 in precision ball, ISO 3290-1 sizes, from memory; or a concave test plate).
    path = PROFILES / "example-calibrated.toml"
    raw = tomllib.loads(path.read_text(encoding="utf-8"))
    assert raw["unit"] == "mm"
    ring, rho = raw["spherometer"]["ring_radius"], raw["spherometer"]["ball_diameter"] / 2
    p = load_profile(path)
    assert p.contact_mm(surface) == pytest.approx((ring, rho), rel=1e-15)
    assert p.spherometer.u_mm == pytest.approx(raw["uncertainty"], rel=1e-15)
    legs = (ring * math.sqrt(3),) * 3
    s = three_ball_reading(*legs, rho, R_ref, surface)
    assert geometry.probe_sagitta_mm(R_ref, ring, rho, surface) == pytest.approx(s, rel=1e-10)
    assert geometry.ring_radius_from_reference_mm(R_ref, s, rho, surface) == pytest.approx(ring, rel=1e-10)


BAD = [
    ("unit = \"mm\"\n[spherometer\nkind = 1", "TOML syntax error"),
    (GOOD.replace('unit = "mm"', 'unit = "cm"'), "unknown unit"),
    (GOOD.replace("ball_diameter", "ball_diamter"), "did you mean 'ball_diameter'"),
    (GOOD.replace("resolution = 0.001", ""), "missing key 'resolution'"),
    (GOOD.replace('unit = "mm"\n', ""), "missing key 'unit'"),
    (GOOD.replace("[70.0, 70.0, 70.0]", "[10.0, 10.0, 30.0]"), "leg_spacings: leg spacings"),
    (GOOD.replace("[70.0, 70.0, 70.0]", "[70.0, 0.0, 70.0]"), "leg_spacings: must be positive"),
    (GOOD.replace("[70.0, 70.0, 70.0]", "[70.0, 70.0]"), "list of three"),
    (GOOD.replace("6.35", "-1"), "ball_diameter: must be zero or positive"),
    (GOOD.replace("6.35", "80.0"), "ball_diameter is too large"),
    (GOOD.replace("6.35", '"big"'), "must be a number"),
    (GOOD.replace("6.35", "true"), "must be a number"),
    (GOOD.replace("0.001", "0"), "resolution: must be positive"),
    (GOOD.replace('"three-ball"', '"four-ball"'), "kind must be one of"),
    (GOOD + 'sense = "sideways"\n', "sense must be"),
    (GOOD + "[uncertainty]\nleg_spacing = -0.1\n", "[uncertainty] leg_spacing"),
    (GOOD + "[uncertainty]\nlegs = 0.1\n", "unknown key 'legs'"),
    ('unit = "mm"\n[spherometer]\nkind = "ring"\ninner_diameter = 80.0\nouter_diameter = 70.0\n'
     "[indicator]\nresolution = 0.001\n", "inner_diameter must be smaller"),
    ('unit = "mm"\n[spherometer]\nkind = "ring"\ninner_diameter = 60.0\nouter_diameter = 70.0\nedge_radius = 3.0\n'
     "[indicator]\nresolution = 0.001\n", "edge_radius is too large"),
    ('unit = "mm"\n[spherometer]\nkind = "calibrated"\n[indicator]\nresolution = 0.001\n', "missing key 'ring_radius'"),
    ('unit = "mm"\n[spherometer]\nkind = "calibrated"\nring_radius = 40.0\nball_diameter = 100.0\n'
     "[indicator]\nresolution = 0.001\n", "ball_diameter is too large for the ring_radius"),
    (GOOD.replace("ball_diameter = 6.35", "ball_diameter = 6.35\nprobe_distances = [40.0, 40.0]"),
     "probe_distances must be a list of three"),
    (GOOD.replace("ball_diameter = 6.35", "ball_diameter = 6.35\nprobe_distances = [40.0, -40.0, 40.0]"),
     "probe_distances: must be positive"),
    (GOOD.replace("ball_diameter = 6.35", "ball_diameter = 6.35\nprobe_distances = [80.0, 80.0, 5.0]"),
     "probe_distances put the probe"),
    ('unit = "mm"\n[spherometer]\nkind = "ring"\ninner_diameter = 60.0\nouter_diameter = 70.0\n'
     "probe_distances = [30.0, 30.0, 30.0]\n[indicator]\nresolution = 0.001\n", "unknown key 'probe_distances'"),
    (GOOD + "[uncertainty]\nprobe_distance = -0.05\n", "[uncertainty] probe_distance"),
]


@pytest.mark.parametrize("text,problem", BAD)
def test_bad_profiles_name_the_file_and_problem(tmp_path, text, problem):
    path = _write(tmp_path, text)
    with pytest.raises(UserError) as err:
        load_profile(path)
    msg = str(err.value)
    assert str(path) in msg and problem in msg and "\n" not in msg


def test_missing_and_unreadable_files(tmp_path):
    with pytest.raises(UserError, match="profile not found"):
        load_profile(tmp_path / "nope.toml")
    (tmp_path / "bin.toml").write_bytes(b"\xff\xfe\x00")
    with pytest.raises(UserError, match="cannot read profile"):
        load_profile(tmp_path / "bin.toml")
    with pytest.raises(UserError, match="cannot read profile"):
        load_profile(tmp_path)  # a directory


def test_ring_uncertainty_keys_are_named_for_the_profile_keys():
    from logger.config.profile import parse_profile

    def u(stated):
        return parse_profile({"unit": "mm", "spherometer": {"kind": "ring", "inner_diameter": 70.0,
                                                            "outer_diameter": 76.0},
                              "indicator": {"resolution": 0.001}, "uncertainty": stated}, "t").spherometer.u_mm
    got = u({"inner_diameter": 0.003, "outer_diameter": 0.004})
    assert (got["inner_diameter"], got["outer_diameter"]) == (0.003, 0.004)
    got = u({"ring_diameter": 0.005, "outer_diameter": 0.004})  # the earlier key sets both; the specific one wins
    assert (got["inner_diameter"], got["outer_diameter"]) == (0.005, 0.004)


def test_probe_distances_from_the_centre_of_an_equilateral_rig(tmp_path):
    # Source: textbook geometry: in an equilateral triangle of side L the circumcentre is L / sqrt(3) from
    # each vertex; a probe there is on the axis (e = 0), and one moved 1 mm towards ball A is
    # L / sqrt(3) - 1 from A and, by the law of cosines (120 degrees), sqrt(R0^2 + 1 + R0) from B and C.
    L = 70.0
    R0 = L / math.sqrt(3)
    on_axis = load_profile(_write(tmp_path, GOOD.replace("ball_diameter = 6.35", f"ball_diameter = 6.35\n"
                                                          f"probe_distances = [{R0!r}, {R0!r}, {R0!r}]")))
    assert on_axis.spherometer.probe_offset_mm() == pytest.approx(0.0, abs=1e-9)
    other = math.sqrt(R0**2 + 1.0 + R0)
    moved = load_profile(_write(tmp_path, GOOD.replace("ball_diameter = 6.35", f"ball_diameter = 6.35\n"
                                                       f"probe_distances = [{R0 - 1!r}, {other!r}, {other!r}]"
                                                       ) + "[uncertainty]\nprobe_distance = 0.03\n", "m.toml"))
    assert moved.spherometer.probe_offset_mm() == pytest.approx(1.0, rel=1e-12)
    assert moved.spherometer.u_mm["probe_a"] == 0.03
    assert DEFAULT_U_MM["probe_distance"] == on_axis.spherometer.u_mm["probe_b"]
    assert f"probe to balls A, B, C {R0 - 1:g} mm, {other:g} mm" in moved.spherometer.describe()  # as the report says it
