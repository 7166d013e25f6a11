"""The probe off the circumcentre, by exact construction: R reads long by about R e^2 / r^2.

Construction (written here, not logger's): a concave sphere of radius R with its vertex at the
origin and its centre at (0, 0, R); three balls of radius rho touching it, their centres on the
sphere of radius R - rho at a distance r from the axis; the probe's tip a distance e off the
axis, touching the surface at height R - sqrt(R^2 - e^2).  On a flat the tip stands at the balls'
bottoms; the reading is how far the tip rose from there.  The balls' bottoms stand rho below
their centres, which stand at R - sqrt((R - rho)^2 - r^2).  (Textbook sphere geometry.)
"""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from logger.analysis import geometry
from logger.analysis.uncertainty import radius_budget
from logger.config.profile import parse_profile
from tests.helpers.exact_construction import reading_off_axis


@settings(max_examples=60, deadline=None)
@given(R=st.floats(800, 20000), e=st.floats(0.05, 3.0))
def test_offset_probe_reads_R_long_by_R_e2_over_r2(R, e):
    r, rho = 40.4, 3.175
    s = reading_off_axis(R, r, rho, e)
    R_read = geometry.radius_from_sagitta_mm(s, r, rho, "concave")
    bias = R_read - R
    assert bias > 0  # one-sided: always long
    assert bias == pytest.approx(R * e * e / (r * r), rel=0.02 + 2 * e * e / (r * r))


def test_the_budget_term_covers_the_offset_at_its_stated_bound():
    # On the example legs (from the shipped profile's numbers) at R = 2400 and e = 1 mm the bias is
    # about 1.5 mm (the figure); the budget carries a rectangle of half-width R e^2 / r^2.
    legs = [70.02, 69.98, 70.01]
    sph = parse_profile({"unit": "mm", "spherometer": {"kind": "three-ball", "leg_spacings": legs,
                                                       "ball_diameter": 6.35}, "indicator": {"resolution": 0.001},
                         "uncertainty": {"leg_spacing": 0, "ball_diameter": 0, "flat_flatness": 0,
                                         "indicator_error": 0, "caliper_common": 0, "probe_offset": 1.0}},
                        "t").spherometer
    r = geometry.circumradius_mm(*legs)
    s = reading_off_axis(2400.0, r, 3.175, 1.0)
    R_read = geometry.radius_from_sagitta_mm(s, r, 3.175, "concave")
    assert R_read - 2400.0 == pytest.approx(1.47, abs=0.05)
    b = radius_budget(sph, "concave", s, [])
    half_width = b.u_c * math.sqrt(3)
    assert R_read - 2400.0 <= half_width * 1.001
    assert half_width == pytest.approx(R_read * 1.0 / r**2, rel=1e-9)
