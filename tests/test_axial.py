"""Axial capacity: bad input, conventions, properties, integration convergence, strata met.

Published worked values are in tests/validation/test_axial_references.py; here the behaviour.
"""

import json
import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from design_core import (
    GroundModel, Layer, Rules, axial_capacity, capacity_curve, ground_from_strata,
    required_toe_level, tension_capacity, unit_shaft_friction,
)
from design_core.inputs import StratumMet


def clay(cu=60.0, water=8.0):
    """Uniform clay from +10 to -40 m."""
    return GroundModel([Layer(10.0, -40.0, "cohesive", 19.0, cu=cu)], water)


def mixed():
    """Fill, sand, clay with a strength gradient, sand, rock; water at +5 m."""
    return GroundModel([
        Layer(10.0, 7.0, "ignore", 17.0),
        Layer(7.0, 2.0, "cohesionless", 19.0, phi=32.0),
        Layer(2.0, -20.0, "cohesive", 19.0, cu=50.0, cu_bottom=180.0),
        Layer(-20.0, -35.0, "cohesionless", 20.0, phi=36.0),
        Layer(-35.0, -55.0, "rock", 23.0, shaft_friction=250.0, base_pressure=6000.0),
    ], 5.0)


# ---- bad input -------------------------------------------------------------------------------

def test_toe_above_top_is_refused():
    with pytest.raises(ValueError, match="toe_level.*below top_level"):
        axial_capacity(clay(), 0.6, 5.0, 6.0)


def test_toe_at_top_is_refused():
    with pytest.raises(ValueError, match="toe_level"):
        axial_capacity(clay(), 0.6, 5.0, 5.0)


def test_toe_below_ground_model_is_refused():
    with pytest.raises(ValueError, match=r"toe_level \(-41 m\).*bottom of the ground model \(-40 m\)"):
        axial_capacity(clay(), 0.6, 10.0, -41.0)


def test_toe_above_ground_surface_is_refused():
    with pytest.raises(ValueError, match="toe_level.*top of the ground model"):
        axial_capacity(clay(), 0.6, 14.0, 12.0)


@pytest.mark.parametrize("d", [0.0, -0.6])
def test_diameter_must_be_positive(d):
    with pytest.raises(ValueError, match="diameter must be greater than 0 m"):
        axial_capacity(clay(), d, 10.0, 0.0)


def test_import_rejects_non_contiguous_layers():
    with pytest.raises(ValueError, match=r"layers\[1\]\.top \(4 m\) differs from layers\[0\]\.bottom \(5 m\)"):
        GroundModel([Layer(10.0, 5.0, "cohesive", 19.0, cu=50.0),
                     Layer(4.0, 0.0, "cohesive", 19.0, cu=50.0)], 0.0)


def test_layers_must_run_top_down():
    with pytest.raises(ValueError, match="top-down and contiguous"):
        GroundModel([Layer(5.0, 0.0, "cohesive", 19.0, cu=50.0),
                     Layer(10.0, 5.0, "cohesive", 19.0, cu=50.0)], 0.0)


def test_empty_ground_model_is_refused():
    with pytest.raises(ValueError, match="layers"):
        GroundModel([], 0.0)


def test_cohesive_layer_needs_cu():
    with pytest.raises(ValueError, match="cu .*required in the cohesive layer 10 to 5 m"):
        Layer(10.0, 5.0, "cohesive", 19.0)


def test_cohesionless_layer_needs_phi():
    with pytest.raises(ValueError, match="phi .*required in the cohesionless layer"):
        Layer(10.0, 5.0, "cohesionless", 19.0)


@pytest.mark.parametrize("missing", ["shaft_friction", "base_pressure"])
def test_rock_needs_report_values(missing):
    values = {"shaft_friction": 200.0, "base_pressure": 4000.0}
    values.pop(missing)
    with pytest.raises(ValueError, match=f"{missing} .*geotechnical report.*rock layer"):
        Layer(10.0, 5.0, "rock", 23.0, **values)


def test_ignored_layer_takes_no_report_values():
    with pytest.raises(ValueError, match="ignored layer takes no"):
        Layer(10.0, 5.0, "ignore", 17.0, shaft_friction=20.0)


def test_unknown_material_is_refused():
    with pytest.raises(ValueError, match="material must be one of"):
        Layer(10.0, 5.0, "peat", 11.0)


def test_layer_bottom_must_be_below_top():
    with pytest.raises(ValueError, match="bottom .* must be below top"):
        Layer(5.0, 5.0, "cohesive", 19.0, cu=50.0)


@pytest.mark.parametrize("field, value, limit", [
    ("unit_weight", 40.0, "at most 30"), ("cu", 0.0, "at least 0.5"), ("phi", 60.0, "at most 50"),
    ("cu_bottom", -1.0, "at least 0.5"),
])
def test_layer_values_out_of_range_name_the_field(field, value, limit):
    kwargs = {"top": 10.0, "bottom": 5.0, "material": "cohesive", "unit_weight": 19.0, "cu": 50.0}
    kwargs[field] = value
    with pytest.raises(ValueError, match=f"{field} must be {limit}"):
        Layer(**kwargs)


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_nan_and_inf_are_refused_everywhere(bad):
    with pytest.raises(ValueError, match="diameter must be a finite number"):
        axial_capacity(clay(), bad, 10.0, 0.0)
    with pytest.raises(ValueError, match="top_level must be a finite number"):
        axial_capacity(clay(), 0.6, bad, 0.0)
    with pytest.raises(ValueError, match="toe_level must be a finite number"):
        axial_capacity(clay(), 0.6, 10.0, bad)
    with pytest.raises(ValueError, match="toe_levels must be finite"):
        capacity_curve(clay(), 0.6, 10.0, [0.0, bad])
    with pytest.raises(ValueError, match="cu must be a finite number"):
        Layer(10.0, 5.0, "cohesive", 19.0, cu=bad)
    with pytest.raises(ValueError, match="top must be a finite number"):
        Layer(bad, 5.0, "cohesive", 19.0, cu=50.0)
    with pytest.raises(ValueError, match="water_level must be a finite number"):
        GroundModel([Layer(10.0, 5.0, "cohesive", 19.0, cu=50.0)], bad)
    with pytest.raises(ValueError, match="load must be a finite number"):
        required_toe_level(capacity_curve(clay(), 0.6, 10.0, [0.0]), bad)


def test_unit_weight_below_water_must_exceed_gamma_w():
    g = GroundModel([Layer(10.0, 0.0, "cohesive", 10.0, cu=30.0)], 12.0)
    with pytest.raises(ValueError, match=r"layers\[0\]\.unit_weight .*below gamma_w"):
        axial_capacity(g, 0.6, 10.0, 2.0, rules=Rules(gamma_w=10.1))


def test_bad_pile_type_is_refused():
    with pytest.raises(ValueError, match="pile_type must be one of bored, cfa, driven, screw"):
        axial_capacity(clay(), 0.6, 10.0, 0.0, pile_type="jacked")


def test_toe_levels_must_be_a_non_empty_1d_array():
    with pytest.raises(ValueError, match="non-empty 1-D"):
        capacity_curve(clay(), 0.6, 10.0, [])
    with pytest.raises(ValueError, match="non-empty 1-D"):
        capacity_curve(clay(), 0.6, 10.0, [[0.0, 1.0]])
    with pytest.raises(ValueError, match="toe_levels .* below top_level"):
        capacity_curve(clay(), 0.6, 5.0, [0.0, 6.0])


def test_negative_load_is_refused():
    with pytest.raises(ValueError, match="load must be at least 0"):
        required_toe_level(capacity_curve(clay(), 0.6, 10.0, [0.0]), -5.0)


# ---- conventions -------------------------------------------------------------------------------

def test_top_one_and_a_half_diameters_give_no_shaft():
    # common practice (rule exclusion_diameters = 1.5): nothing from 10.0 to 9.1 m for D 0.6
    res = axial_capacity(clay(), 0.6, 10.0, 0.0)
    assert res.layers[0].method == "excluded"
    assert (res.layers[0].from_level, res.layers[0].to_level) == (10.0, pytest.approx(9.1))
    assert res.layers[0].force == 0.0
    f = unit_shaft_friction(clay(), 0.6, 10.0, [9.2, 9.0])
    assert f[0] == 0.0 and f[1] > 0.0
    full = axial_capacity(clay(), 0.6, 10.0, 0.0, rules=Rules(exclusion_diameters=0.0))
    assert full.shaft > res.shaft


def test_rows_carry_every_method_and_sum_to_the_shaft():
    res = axial_capacity(mixed(), 0.6, 9.0, -40.0)
    methods = [row.method for row in res.layers]
    assert methods == ["ignored", "ignored", "beta", "alpha", "beta", "report"]
    assert sum(row.force for row in res.layers) == pytest.approx(res.shaft, rel=1e-12)
    for row in res.layers:
        assert row.from_level > row.to_level
        assert row.mean_fs == pytest.approx(row.force / (math.pi * 0.6 * (row.from_level - row.to_level)))
    assert res.layers[0].force == 0.0 and res.layers[1].force == 0.0


def test_base_at_a_boundary_takes_the_layer_below():
    # toe exactly at the sand/rock boundary bears on the rock
    res = axial_capacity(mixed(), 0.6, 9.0, -35.0)
    assert res.base_method == "report" and res.base_layer_index == 4
    assert res.base_pressure == 6000.0
    # and just above it on the sand
    res = axial_capacity(mixed(), 0.6, 9.0, -34.99)
    assert res.base_layer_index == 3 and res.base_method == "Nq sigma'v"


def test_toe_in_ignored_fill_has_no_base():
    res = axial_capacity(mixed(), 0.6, 10.0, 8.0)
    assert res.base == 0.0 and res.shaft == 0.0 and res.base_method == "ignored"


def test_shaft_above_the_ground_surface_counts_nothing():
    # a cut-off 2 m above the ground: the exclusion zone (1.5 D) lies in the air
    above = axial_capacity(clay(), 0.6, 12.0, 0.0)
    at = axial_capacity(clay(), 0.6, 10.0, 0.0, rules=Rules(exclusion_diameters=0.0))
    assert above.shaft == pytest.approx(at.shaft, rel=1e-12)


def test_toe_at_the_ground_surface_below_a_raised_cut_off():
    res = axial_capacity(clay(), 0.6, 12.0, 10.0)
    assert res.shaft == 0.0 and res.layers == ()
    assert res.base == pytest.approx(9 * 60.0 * math.pi * 0.09)
    curve = capacity_curve(clay(), 0.6, 12.0, [10.0, 9.0])
    assert curve.shaft[0] == 0.0 and curve.base[0] == pytest.approx(res.base)


def test_sand_base_is_held_below_the_critical_depth_and_limited():
    g = GroundModel([Layer(10.0, -40.0, "cohesionless", 20.0, phi=36.0)], 10.0)
    deep = capacity_curve(g, 0.5, 10.0, [5.0, -5.0, -30.0])  # zc = 10 m below the surface
    assert deep.base[1] == pytest.approx(deep.base[2], rel=1e-12)
    assert deep.base[0] < deep.base[1]
    limited = axial_capacity(g, 0.5, 10.0, -30.0, rules=Rules(base_pressure_limit_kpa=1000.0))
    assert limited.base_pressure == 1000.0


def test_critical_depth_zero_switches_the_cap_off():
    g = GroundModel([Layer(10.0, -40.0, "cohesionless", 20.0, phi=36.0)], 10.0)
    on = axial_capacity(g, 0.5, 10.0, -30.0)
    off = axial_capacity(g, 0.5, 10.0, -30.0, rules=Rules(critical_depth_diameters=0.0))
    assert off.shaft > on.shaft and off.base > on.base


def test_report_values_override_the_method():
    g = GroundModel([Layer(10.0, -20.0, "cohesive", 19.0, cu=60.0, shaft_friction=35.0,
                           base_pressure=700.0)], 8.0)
    res = axial_capacity(g, 0.6, 10.0, 0.0, rules=Rules(exclusion_diameters=0.0))
    assert res.layers[0].method == "report"
    assert res.shaft == pytest.approx(math.pi * 0.6 * 10.0 * 35.0, rel=1e-12)
    assert res.base == pytest.approx(700.0 * math.pi * 0.09, rel=1e-12)


def test_linear_cu_profile_sets_the_base():
    g = GroundModel([Layer(10.0, -10.0, "cohesive", 19.0, cu=40.0, cu_bottom=140.0)], 8.0)
    res = axial_capacity(g, 0.6, 10.0, 0.0)  # halfway: c_u 90 kPa
    assert res.base_pressure == pytest.approx(9 * 90.0, rel=1e-12)


def test_power_alpha_rule_is_used_when_chosen():
    # alpha = C (sigma'_v / c_u)^n; with n = 0, alpha = C everywhere: f_s = 0.45 c_u
    r = Rules(alpha_rule="power", alpha_c=0.45, alpha_n=0.0, exclusion_diameters=0.0)
    res = axial_capacity(clay(cu=80.0), 0.6, 10.0, 0.0, rules=r)
    assert res.shaft == pytest.approx(math.pi * 0.6 * 10.0 * 0.45 * 80.0, rel=1e-9)


def test_design_resistance_working_stress_and_limit_state():
    res = axial_capacity(clay(), 0.6, 10.0, -10.0)
    ws = Rules()
    assert res.design == pytest.approx(min(res.ultimate / ws.fs_global,
                                           res.shaft / ws.fs_shaft + res.base / ws.fs_base))
    ls = axial_capacity(clay(), 0.6, 10.0, -10.0, rules=Rules(design_approach="limit_state", phi_g=0.6))
    assert ls.design == pytest.approx(0.6 * ls.ultimate)
    assert "limit state" in ls.reason and "working stress" in res.reason


def test_tension_design_by_the_rules():
    t = tension_capacity(clay(), 0.6, 10.0, -10.0)
    r = Rules()
    assert t.shaft_tension == pytest.approx(0.75 * t.shaft_compression)
    assert t.design == pytest.approx(t.shaft_tension / r.fs_tension + r.pile_weight_factor * t.weight)
    ls = tension_capacity(clay(), 0.6, 10.0, -10.0, rules=Rules(design_approach="limit_state"))
    assert ls.design == pytest.approx(0.55 * ls.shaft_tension + 0.9 * ls.weight)
    # weight counted from the cut-off when the shaft starts lower (dig level)
    longer = tension_capacity(clay(), 0.6, 10.0, -10.0, cutoff_level=11.0)
    assert longer.weight == pytest.approx(t.weight + 24.0 * math.pi * 0.09, rel=1e-9)


def test_pile_type_is_recorded_and_uses_the_same_method():
    bored = axial_capacity(clay(), 0.6, 10.0, -10.0)
    driven = axial_capacity(clay(), 0.6, 10.0, -10.0, pile_type="driven")
    assert driven.pile_type == "driven" and driven.ultimate == bored.ultimate


def test_results_are_json_ready():
    res = axial_capacity(mixed(), 0.6, 9.0, -40.0)
    data = json.loads(json.dumps(res.to_dict()))
    assert data["layers"][2]["method"] == "beta"
    assert json.loads(json.dumps(tension_capacity(mixed(), 0.6, 9.0, -40.0).to_dict()))["weight"] > 0
    curve = capacity_curve(mixed(), 0.6, 9.0, np.linspace(8.0, -50.0, 30))
    assert len(json.loads(json.dumps(curve.to_dict()))["design"]) == 30
    assert json.loads(json.dumps(mixed().to_dict())) == mixed().to_dict()
    assert GroundModel.from_dict(mixed().to_dict()) == mixed()


def test_curve_arrays_are_read_only():
    curve = capacity_curve(clay(), 0.6, 10.0, [0.0, -5.0])
    with pytest.raises(ValueError):
        curve.design[0] = 1.0


# ---- required toe level ------------------------------------------------------------------------

def test_required_toe_level_interpolates_between_points():
    curve = capacity_curve(clay(), 0.6, 10.0, np.arange(9.0, -30.0, -1.0))
    load = 0.5 * (curve.design[10] + curve.design[11])
    z = required_toe_level(curve, load)
    assert curve.toe_levels[11] < z < curve.toe_levels[10]
    assert z == pytest.approx(np.interp(load, curve.design, curve.toe_levels), abs=1e-12)
    assert curve.design_at(z) == pytest.approx(load, rel=1e-12)


def test_required_toe_level_none_when_never_reached():
    curve = capacity_curve(clay(), 0.6, 10.0, np.arange(9.0, -30.0, -1.0))
    assert required_toe_level(curve, curve.design.max() * 1.01) is None


def test_required_toe_level_is_the_top_when_the_first_point_suffices():
    curve = capacity_curve(clay(), 0.6, 10.0, np.arange(-30.0, 9.5, 1.0))  # any order
    assert required_toe_level(curve, 0.0) == 9.0


def test_required_toe_level_takes_the_highest_level_when_a_weak_layer_lies_below():
    # sand over soft clay: the design resistance drops when the toe enters the clay; the
    # highest level that carries the load is still the answer, and the dip is visible
    g = GroundModel([Layer(10.0, -5.0, "cohesionless", 20.0, phi=38.0),
                     Layer(-5.0, -30.0, "cohesive", 17.0, cu=15.0)], 10.0)
    curve = capacity_curve(g, 0.6, 10.0, np.arange(9.0, -30.0, -0.25))
    at_boundary = curve.design[curve.toe_levels == -5.0][0]
    just_above = curve.design[curve.toe_levels == -4.75][0]
    assert at_boundary < just_above
    load = 0.5 * (at_boundary + just_above)
    z = required_toe_level(curve, load)
    assert z > -5.0
    assert curve.design_at(z) >= load - 1e-6


# ---- properties --------------------------------------------------------------------------------

MATERIAL = st.sampled_from(["cohesive", "cohesionless", "rock", "ignore"])


@st.composite
def grounds(draw, materials=MATERIAL):
    """Random contiguous ground models of 1-4 layers with a water level anywhere."""
    n = draw(st.integers(1, 4))
    top = draw(st.floats(-20.0, 50.0))
    layers = []
    for _ in range(n):
        h = draw(st.floats(0.5, 15.0))
        m = draw(materials)
        kw = {"unit_weight": draw(st.floats(16.0, 22.0))}
        if m == "cohesive":
            kw["cu"] = draw(st.floats(10.0, 300.0))
            if draw(st.booleans()):
                kw["cu_bottom"] = draw(st.floats(10.0, 300.0))
        elif m == "cohesionless":
            kw["phi"] = draw(st.floats(25.0, 40.0))
        elif m == "rock":
            kw["shaft_friction"] = draw(st.floats(50.0, 500.0))
            kw["base_pressure"] = draw(st.floats(1000.0, 10000.0))
        layers.append(Layer(top, top - h, m, **kw))
        top -= h
    water = draw(st.floats(top - 5.0, layers[0].top + 2.0))
    return GroundModel(layers, water)


@st.composite
def strengthening_grounds(draw):
    """Ground whose base resistance never falls with depth: clay with c_u rising, or one sand."""
    if draw(st.booleans()):
        phi = draw(st.floats(25.0, 40.0))
        return GroundModel([Layer(10.0, -30.0, "cohesionless", draw(st.floats(17.0, 21.0)), phi=phi)],
                           draw(st.floats(-35.0, 12.0)))
    n = draw(st.integers(1, 3))
    top, cu = 10.0, draw(st.floats(10.0, 100.0))
    layers = []
    for _ in range(n):
        h = draw(st.floats(2.0, 15.0))
        cu_bot = cu + draw(st.floats(0.0, 80.0))
        layers.append(Layer(top, top - h, "cohesive", draw(st.floats(16.0, 22.0)), cu=cu, cu_bottom=cu_bot))
        top -= h
        cu = cu_bot + draw(st.floats(0.0, 50.0))
    return GroundModel(layers, draw(st.floats(top - 5.0, 12.0)))


def _geometry(draw, g):
    d = draw(st.floats(0.3, 1.5))
    top_level = draw(st.floats(g.bottom + 0.5, g.top + 2.0))
    return d, top_level


PROPS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@PROPS
@given(st.data())
def test_shaft_never_decreases_as_the_toe_goes_deeper(data):
    g = data.draw(grounds())
    d, top = _geometry(data.draw, g)
    toes = np.linspace(min(top, g.top) - 1e-3, g.bottom, 80)
    curve = capacity_curve(g, d, top, toes, rules=Rules(alpha_rule=data.draw(st.sampled_from(["api", "power"]))))
    assert np.all(np.diff(curve.shaft) >= -1e-9 * max(1.0, curve.shaft.max()))


@PROPS
@given(st.data())
def test_capacity_never_decreases_as_the_toe_goes_deeper(data):
    # in ground whose strength does not fall with depth (a weaker layer below can lower the base;
    # see test_required_toe_level_takes_the_highest_level_when_a_weak_layer_lies_below)
    g = data.draw(strengthening_grounds())
    d, top = _geometry(data.draw, g)
    approach = data.draw(st.sampled_from(["working_stress", "limit_state"]))
    toes = np.linspace(min(top, g.top) - 1e-3, g.bottom, 120)
    curve = capacity_curve(g, d, top, toes, rules=Rules(design_approach=approach))
    tol = 1e-9 * max(1.0, curve.ultimate.max())
    assert np.all(np.diff(curve.ultimate) >= -tol)
    assert np.all(np.diff(curve.design) >= -tol)


@PROPS
@given(st.data())
def test_shaft_equals_the_sum_of_the_layer_rows(data):
    g = data.draw(grounds())
    d, top = _geometry(data.draw, g)
    toe = data.draw(st.floats(g.bottom, min(top, g.top) - 1e-3))
    res = axial_capacity(g, d, top, toe)
    assert sum(row.force for row in res.layers) == pytest.approx(res.shaft, rel=1e-9, abs=1e-9)
    assert all(row.method in ("alpha", "beta", "report", "ignored", "excluded") for row in res.layers)
    assert res.ultimate == pytest.approx(res.shaft + res.base, rel=1e-12, abs=1e-12)
    levels = [res.layers[0].from_level] + [row.to_level for row in res.layers] if res.layers else []
    if levels:
        assert levels[-1] == toe and all(a > b for a, b in zip(levels[:-1], levels[1:], strict=True))


@PROPS
@given(st.data())
def test_capacity_curve_agrees_with_axial_capacity_at_every_level(data):
    g = data.draw(grounds())
    d, top = _geometry(data.draw, g)
    rules = Rules(design_approach=data.draw(st.sampled_from(["working_stress", "limit_state"])),
                  alpha_rule=data.draw(st.sampled_from(["api", "power"])))
    toes = np.linspace(min(top, g.top) - 1e-3, g.bottom, 25)
    curve = capacity_curve(g, d, top, toes, rules=rules)
    for k, toe in enumerate(toes):
        one = axial_capacity(g, d, top, float(toe), rules=rules)
        assert curve.design[k] == pytest.approx(one.design, rel=1e-3, abs=1e-6)
        assert curve.ultimate[k] == pytest.approx(one.ultimate, rel=1e-3, abs=1e-6)
        assert curve.shaft[k] == pytest.approx(one.shaft, rel=1e-3, abs=1e-6)


# ---- integration converges ---------------------------------------------------------------------

def _w2_reference() -> float:
    """W2 shaft (docs/validation.md s.1 geometry; API RP 2A-WSD 6.4.2 alpha rule) by an independent
    trapezoid rule on 4,000,001 points."""
    z = np.linspace(0.0, 15.0, 4_000_001)
    sig = 8.19 * z
    cu = np.where(z < 6.0, 40.0, 80.0)
    f = np.where(cu <= sig, 0.5 * np.sqrt(cu * sig), 0.5 * cu ** 0.75 * sig ** 0.25)
    f = np.minimum(f, cu)
    return math.pi * 0.6 * float(np.sum((f[1:] + f[:-1]) * np.diff(z)) / 2)


def test_alpha_integration_converges_to_an_independent_reference():
    # W2 (water at the surface, f ~ sigma'_v^0.25 next to it): the error falls as the pieces
    # shrink and the Gauss order rises, and the defaults are within 1e-6 of the reference.
    g = GroundModel([Layer(0.0, -6.0, "cohesive", 18.0, cu=40.0),
                     Layer(-6.0, -15.0, "cohesive", 18.0, cu=80.0)], 0.0)
    r = Rules(exclusion_diameters=0.0)
    ref = _w2_reference()
    errors = []
    for step, gp in [(4.0, 2), (2.0, 3), (1.0, 4), (0.5, 5), (0.25, 6)]:
        q = axial_capacity(g, 0.6, 0.0, -15.0, rules=r, max_step=step, gauss_points=gp).shaft
        errors.append(abs(q / ref - 1.0))
    assert errors[0] > errors[1] > errors[3]
    assert errors[0] > 1e-5            # a coarse grid is visibly off
    assert errors[3] < 1e-6            # the defaults (0.5 m, 5 points)
    assert errors[4] < 1e-6
    default = axial_capacity(g, 0.6, 0.0, -15.0, rules=r).shaft
    assert default == pytest.approx(ref, rel=1e-6)


def test_beta_and_report_integration_is_exact_on_a_coarse_grid():
    g = mixed()
    coarse = axial_capacity(g, 0.6, 9.0, -50.0, rules=Rules(exclusion_diameters=0.0),
                            max_step=50.0, gauss_points=2)
    fine = axial_capacity(g, 0.6, 9.0, -50.0, rules=Rules(exclusion_diameters=0.0))
    for a, b in zip(coarse.layers, fine.layers, strict=True):
        if a.method in ("beta", "report"):
            assert a.force == pytest.approx(b.force, rel=1e-12)


# ---- strata met at the rig ---------------------------------------------------------------------

def model():
    """Clay 10 to 0 (c_u 40 to 60), sand 0 to -10, clay -10 to -30 (c_u 120); water +8."""
    return GroundModel([
        Layer(10.0, 0.0, "cohesive", 18.0, cu=40.0, cu_bottom=60.0),
        Layer(0.0, -10.0, "cohesionless", 19.0, phi=33.0),
        Layer(-10.0, -30.0, "cohesive", 20.0, cu=120.0),
    ], 8.0)


def test_strata_replace_the_model_and_gaps_keep_it():
    # platform at +10: sand logged 6-9 m (levels 4 to 1), clay 14-18 m (levels -4 to -8)
    strata = [StratumMet(6.0, 9.0, "cohesionless"), StratumMet(14.0, 18.0, "cohesive")]
    g, used = ground_from_strata(model(), 10.0, strata, -20.0)
    spans = [(ly.top, ly.bottom, ly.material) for ly in g.layers]
    assert spans == [
        (10.0, 4.0, "cohesive"), (4.0, 1.0, "cohesionless"), (1.0, 0.0, "cohesive"),
        (0.0, -4.0, "cohesionless"), (-4.0, -8.0, "cohesive"), (-8.0, -10.0, "cohesionless"),
        (-10.0, -30.0, "cohesive"),
    ]
    assert g.water_level == 8.0
    # the logged sand borrows the sand layer (1, 0 to -10 m, 1.00 m away); its phi comes along
    assert used[0].layer_index == 1 and g.layers[1].phi == 33.0 and "1.00 m away" in used[0].reason
    # the logged clay at -4 to -8: nearest cohesive layer is layer 2 (2 m below) not layer 0 (4 m above)
    assert used[1].layer_index == 2 and g.layers[4].cu == 120.0
    # the clay kept above the logged sand keeps its own c_u profile (40 at 10 m, 50 at 4 m)
    assert g.layers[0].cu == 40.0 and g.layers[0].cu_bottom == pytest.approx(52.0)
    assert json.dumps([b.to_dict() for b in used])


def test_strata_change_the_capacity():
    strata = [StratumMet(0.0, 20.0, "cohesionless")]
    g, _ = ground_from_strata(model(), 10.0, strata, -10.0)
    assert axial_capacity(g, 0.6, 10.0, -10.0).shaft != axial_capacity(model(), 0.6, 10.0, -10.0).shaft
    assert [ly.material for ly in g.layers] == ["cohesionless", "cohesive"]


def test_stratum_takes_the_layer_the_inspector_picked():
    strata = [StratumMet(14.0, 18.0, "cohesive", layer_index=0)]
    g, used = ground_from_strata(model(), 10.0, strata, -20.0)
    assert used[0].layer_index == 0 and "picked" in used[0].reason
    assert g.layers[2].cu == 60.0  # layer 0's c_u at its own bottom, no extrapolation


def test_strata_are_clipped_at_the_toe():
    g, used = ground_from_strata(model(), 10.0, [StratumMet(25.0, 35.0, "cohesionless")], -18.0)
    assert (used[0].top_level, used[0].bottom_level) == (-15.0, -18.0)
    assert [(ly.top, ly.bottom, ly.material) for ly in g.layers][-3:] == [
        (-10.0, -15.0, "cohesive"), (-15.0, -18.0, "cohesionless"), (-18.0, -30.0, "cohesive")]
    _, deeper = ground_from_strata(model(), 10.0, [StratumMet(32.0, 35.0, "cohesionless")], -18.0)
    assert deeper[0].layer_index is None and "below the toe" in deeper[0].reason


def test_stratum_of_a_material_missing_from_the_model_is_refused():
    with pytest.raises(ValueError, match=r"strata\[1\] \(3-5 m, rock\).*no rock layer"):
        ground_from_strata(model(), 10.0, [StratumMet(0.0, 2.0, "cohesive"),
                                           StratumMet(3.0, 5.0, "rock")], -20.0)


def test_picked_layer_of_another_material_is_refused():
    with pytest.raises(ValueError, match=r"strata\[0\].*picked layer 1 is cohesionless, not cohesive"):
        ground_from_strata(model(), 10.0, [StratumMet(0.0, 2.0, "cohesive", layer_index=1)], -20.0)
    with pytest.raises(ValueError, match=r"strata\[0\].*layer_index 7 is not a layer"):
        ground_from_strata(model(), 10.0, [StratumMet(0.0, 2.0, "cohesive", layer_index=7)], -20.0)


def test_overlapping_strata_are_refused():
    with pytest.raises(ValueError, match=r"strata\[1\].*overlaps strata\[0\]"):
        ground_from_strata(model(), 10.0, [StratumMet(0.0, 5.0, "cohesive"),
                                           StratumMet(4.0, 8.0, "cohesionless")], -20.0)


def test_strata_toe_outside_the_model_is_refused():
    with pytest.raises(ValueError, match="toe_level .* within the ground model"):
        ground_from_strata(model(), 10.0, [], -31.0)


def test_no_strata_leaves_the_model_unchanged():
    g, used = ground_from_strata(model(), 10.0, [], -20.0)
    assert g == model() and used == []


@PROPS
@given(st.data())
def test_a_shared_profile_gives_the_numbers_of_one_built_for_the_toe(data):
    # shaft_profile shares one grid, built to the bottom of the ground model, between calls with
    # equal inputs; the pieces above a toe do not depend on where the grid stops, so the shaft
    # read from it must equal (to rounding) the shaft from a grid that stops at that toe.
    from design_core.axial import _Profile, shaft_profile

    g = data.draw(grounds())
    d, top = _geometry(data.draw, g)
    rules = Rules(alpha_rule=data.draw(st.sampled_from(["api", "power"])))
    start = min(top, g.top)
    toe = data.draw(st.floats(g.bottom, start - 1e-3))
    shared = shaft_profile(g, d, top, rules, toe)
    own = _Profile(g, d, top, rules, toe)
    assert shaft_profile(GroundModel(list(g.layers), g.water_level), d, top, rules, toe) is shared
    deep = shaft_profile(g, d, top, rules, g.bottom)   # a deeper call builds it again, deeper
    assert deep.piece_bot[-1] == pytest.approx(g.bottom)
    assert shaft_profile(g, d, top, rules, toe) is deep  # which then serves the shallower toe
    levels = np.linspace(start, toe, 25)
    for prof in (shared, deep):
        np.testing.assert_allclose(prof.shaft_to(levels), own.shaft_to(levels), rtol=1e-12, atol=1e-9)
    assert axial_capacity(g, d, top, toe, rules=rules).shaft == pytest.approx(
        float(own.shaft_to(np.array([toe]))[0]), rel=1e-12, abs=1e-9)


def test_a_shared_profile_serves_a_toe_at_the_bottom_next_to_a_dropped_sliver():
    # Found by the property above: a water level a hair above the bottom of the ground model
    # makes a stretch shorter than the level tolerance, which the grid drops, so the grid stops
    # that hair above the bottom; a toe at the bottom must still be served by the kept profile.
    from design_core.axial import shaft_profile
    g = GroundModel([Layer(1.0, 0.0, "cohesive", 16.0, cu=10.0)], 1e-281)
    first = shaft_profile(g, 1.0, 1.0, Rules(), 0.0)
    assert shaft_profile(GroundModel(list(g.layers), g.water_level), 1.0, 1.0, Rules(), 0.0) is first
