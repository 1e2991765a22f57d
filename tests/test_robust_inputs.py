"""Bad input to design_core is refused with a message naming the field and its range (issue 14)."""

import math

import pytest

from design_core import CapGroup, CapPile, GroundModel, Layer, PileDesign, Rules
from design_core.axial import axial_capacity, capacity_curve
from design_core.group import group_shares
from design_core.section import section_interaction
from design_core.soil_factors import beta_factor, earth_pressure_k, n_q

CLAY = GroundModel([Layer(10.0, -20.0, "cohesive", 19.0, cu=60.0)], 8.0)


@pytest.mark.parametrize("gauss_points", [0, 9, 40, 2.5, True, "5"])
def test_gauss_points_outside_the_exact_orders_are_refused(gauss_points):
    for call in (lambda: axial_capacity(CLAY, 0.6, 9.0, 0.0, gauss_points=gauss_points),
                 lambda: capacity_curve(CLAY, 0.6, 9.0, [0.0], gauss_points=gauss_points)):
        with pytest.raises(ValueError, match=r"gauss_points must be a whole number from 1 to 8"):
            call()


@pytest.mark.parametrize("max_step", [0.0, -0.5, math.nan, math.inf, 1e-9])
def test_max_step_not_positive_or_not_finite_is_refused(max_step):
    for call in (lambda: axial_capacity(CLAY, 0.6, 9.0, 0.0, max_step=max_step),
                 lambda: capacity_curve(CLAY, 0.6, 9.0, [0.0], max_step=max_step)):
        with pytest.raises(ValueError, match=r"max_step must be a number from 0.001 to 100 m"):
            call()


def test_a_fraction_of_a_bar_is_refused():
    with pytest.raises(ValueError, match=r"n_bars must be a whole number"):
        PileDesign("P1", 0.6, 9.0, 0.0, n_bars=7.5, bar_mm=20.0)
    with pytest.raises(ValueError, match=r"n_bars must be a whole number"):
        section_interaction(0.6, 75.0, 7.5, 20.0, 32.0, 500.0)
    assert PileDesign("P1", 0.6, 9.0, 0.0, n_bars=8, bar_mm=20.0).n_bars == 8


def test_a_load_point_that_is_not_a_number_is_refused():
    piles = (CapPile("A", (0.0, 0.0)), CapPile("B", (2.0, 0.0)))
    with pytest.raises(ValueError, match=r"load_point easting must be a finite number"):
        CapGroup("C1", piles, n=100.0, load_point=(math.nan, 0.0))
    with pytest.raises(ValueError, match=r"load_point must be finite"):
        group_shares([(0.0, 0.0), (2.0, 0.0)], 100.0, load_point=(1.0, math.nan))


@pytest.mark.parametrize("phi", [9.9, 50.1, -5.0, math.nan])
def test_phi_outside_10_to_50_degrees_is_refused(phi):
    for f in (beta_factor, n_q, earth_pressure_k):
        with pytest.raises(ValueError, match=r"phi must be between 10 and 50 degrees"):
            f(phi, Rules())
    assert n_q(30.0) > 0 and beta_factor(50.0) > 0   # the ends of the range are allowed
