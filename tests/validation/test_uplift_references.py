"""Uplift from swelling ground and the cone pull-out from the toe.

Sources: swelling ground, AS 2159-2009 (piles in reactive clay: uplift on the shaft in the zone
of moisture change resisted below it; from memory); the cone of ground lifted from the toe,
Tomlinson, *Pile Design and Construction Practice* (uplift of piles in rock; from memory). The
cone's volume is geometry: a frustum of height h between radii r_1 and r_2 holds
pi h (r_1^2 + r_1 r_2 + r_2^2) / 3. The expected values are hand calculations with the
arithmetic in the comments. Cone: D 0.6 m (r_0 0.3 m), toe 3 m below the surface, 30 degrees
(tan 30 = 0.57735), r_top = 0.3 + 3 x 0.57735 = 2.03205 m.
"""

import math

import pytest

from design_core import checks
from design_core.ground import GroundModel, Layer
from design_core.rules import Rules
from design_core.uplift import (
    CODES, ConeInput, SwellingInput, cone_pullout, shallow_uplift_check, swelling_check,
    swelling_uplift,
)


@pytest.fixture(autouse=True)
def _new_codes(monkeypatch):
    """The lead adds the new codes to CHECK_CODES at merge; until then the tests extend it."""
    extra = tuple(c for c in CODES if c not in checks.CHECK_CODES)
    monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + extra)


DRY = GroundModel((Layer(0.0, -10.0, "cohesive", 20.0, cu=100.0),), -100.0)
WET = GroundModel((Layer(0.0, -10.0, "cohesive", 20.0, cu=100.0),), -1.0)


def test_swelling_uplift_from_unit_friction():
    # Hand calculation: U = pi x 0.45 x 3 x 40 = 169.65 kN; resistance 600/3 + 0.9 x (50 + 20)
    # = 263 kN; 169.65/263 = 0.645
    inp = SwellingInput(0.45, 3.0, 600.0, 50.0, 20.0, unit_uplift_kpa=40.0)
    res = swelling_uplift(inp)
    assert res.uplift == pytest.approx(169.65, abs=0.01)
    assert res.resistance == pytest.approx(263.0)
    chk = swelling_check(inp)
    assert chk.utilisation == pytest.approx(0.6450, abs=1e-4) and chk.ok is True


def test_swelling_uplift_from_swell_pressure():
    # Hand calculation: f = 0.5 x 100 = 50 kPa; U = pi x 0.45 x 3 x 50 = 212.06 kN
    res = swelling_uplift(SwellingInput(0.45, 3.0, 600.0, swell_pressure_kpa=100.0))
    assert res.uplift == pytest.approx(212.06, abs=0.01)


def test_swelling_uplift_short_without_anchorage():
    # 169.65 kN against 0.9 x 50 = 45 kN: short
    chk = swelling_check(SwellingInput(0.45, 3.0, 0.0, 50.0, unit_uplift_kpa=40.0))
    assert chk.ok is False


def test_cone_weight_dry():
    # Geometry: pi 3 (0.09 + 0.3 x 2.03205 + 2.03205^2)/3 - pi 0.09 x 3 = 15.1703 - 0.8482 =
    # 14.3220 m3 x 20 kN/m3 = 286.44 kN
    res = cone_pullout(ConeInput(DRY, 0.6, -3.0, 0.0))
    assert res.ground_weight == pytest.approx(286.44, abs=0.01)
    assert res.top_radius == pytest.approx(2.03205, abs=1e-5)


def test_cone_weight_buoyant_below_water():
    # Geometry: water at -1 m; the frustum from the toe up 2 m at 20 - 9.81 = 10.19 kN/m3 and the
    # top 1 m at 20 kN/m3 -> 237.69 kN
    res = cone_pullout(ConeInput(WET, 0.6, -3.0, 0.0))
    assert res.ground_weight == pytest.approx(237.69, abs=0.01)


def test_cone_shear_on_its_surface():
    # tau x slant area x cos theta = tau pi (r_0 + r_top) h = 50 x pi x 2.33205 x 3 = 1098.95 kN;
    # design 0.9 x (286.44 + 30) + 1098.95/3 = 284.80 + 366.32 = 651.11 kN
    res = cone_pullout(ConeInput(DRY, 0.6, -3.0, 0.0, pile_weight=30.0, cone_shear_kpa=50.0))
    assert res.shear == pytest.approx(1098.95, abs=0.01)
    assert res.resistance == pytest.approx(651.11, abs=0.02)


def test_lesser_of_cone_and_shaft_governs():
    # cone 0.9 x 286.44 = 257.80 kN against a shaft mode of 400 kN: the cone governs
    chk = shallow_uplift_check(200.0, 400.0, ConeInput(DRY, 0.6, -3.0, 0.0))
    assert chk.limit == pytest.approx(257.80, abs=0.01) and "cone governs" in chk.reason
    chk = shallow_uplift_check(200.0, 150.0, ConeInput(DRY, 0.6, -3.0, 0.0))
    assert chk.limit == 150.0 and chk.ok is False


def test_a_wider_cone_weighs_more():
    # Geometry: the frustum grows with the angle; 0 degrees lifts no ground outside the pile
    narrow = cone_pullout(ConeInput(DRY, 0.6, -3.0, 0.0, half_angle_deg=0.0))
    assert narrow.ground_weight == pytest.approx(0.0, abs=1e-9)
    wide = cone_pullout(ConeInput(DRY, 0.6, -3.0, 0.0), Rules(cone_half_angle_deg=45.0))
    assert wide.ground_weight > 286.44
    assert math.isfinite(wide.resistance)
