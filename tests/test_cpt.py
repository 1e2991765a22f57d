"""design_core.cpt: the sounding input, the capacity curve and its use by the required toe."""

import json

import numpy as np
import pytest

from design_core import CapacityCurve, Rules, required_toe_level
from design_core.cpt import (
    Sounding, cpt_capacity, cpt_capacity_curve, cpt_toe_limits, ef_zone, lcpc_base_average,
    nearest_sounding,
)


def sounding(name="CPT-1", e=0.0, n=0.0, u2=True):
    """Invented: sand over clay over dense sand, 0.02 m readings to 30 m, ground at +10.0 m."""
    d = np.round(np.arange(0.02, 30.0001, 0.02), 6)
    qc = np.where(d < 8, 6.0 + 0.5 * d, np.where(d < 16, 1.5 + 0.05 * d, 18.0 + 0.2 * (d - 16)))
    fs = np.where((d >= 8) & (d < 16), 45.0, 0.005 * qc * 1000)
    u = 9.81 * np.maximum(d - 2.0, 0.0) if u2 else None
    return Sounding(name, e, n, 10.0, d, qc, fs, u)


@pytest.mark.parametrize("kwargs, field", [
    ({"depths_m": [0.1, 0.1]}, "depths_m"),
    ({"qc_mpa": [1.0, -2.0]}, "qc_mpa\\[1\\]"),
    ({"fs_kpa": [1.0]}, "fs_kpa has 1 values"),
    ({"u2_kpa": [0.0, float("nan")]}, "u2_kpa\\[1\\]"),
    ({"ground_level": float("inf")}, "ground_level"),
    ({"name": ""}, "name"),
])
def test_sounding_refuses_bad_input_naming_the_field(kwargs, field):
    args = dict(name="C", easting=0.0, northing=0.0, ground_level=5.0, depths_m=[0.1, 0.2],
                qc_mpa=[1.0, 2.0], fs_kpa=[10.0, 20.0], u2_kpa=None)
    args.update(kwargs)
    with pytest.raises(ValueError, match=field):
        Sounding(**args)


def test_sounding_arrays_are_read_only():
    s = sounding()
    with pytest.raises(ValueError):
        s.qc_mpa[0] = 99.0
    assert json.loads(json.dumps(s.to_dict()))["name"] == "CPT-1"


@pytest.mark.parametrize("method", ["lcpc", "eslami_fellenius"])
def test_curve_is_a_capacity_curve_matching_single_toes(method):
    s = sounding()
    toes = np.linspace(8.0, -17.0, 60)
    curve = cpt_capacity_curve(s, 0.6, 9.5, toes, "bored", method=method)
    assert isinstance(curve, CapacityCurve)
    for k in (0, 17, 59):
        one = cpt_capacity(s, 0.6, 9.5, float(toes[k]), "bored", method=method)
        assert curve.design[k] == pytest.approx(one.design, rel=1e-12)
        assert curve.ultimate[k] == pytest.approx(one.shaft + one.base, rel=1e-12)
    json.dumps(curve.to_dict())


def test_required_toe_works_on_a_cpt_curve():
    s = sounding()
    toes = np.arange(8.0, -17.0, -0.05)
    curve = cpt_capacity_curve(s, 0.6, 9.5, toes)
    need = 0.5 * float(curve.design.max())
    level = required_toe_level(curve, need)
    assert level is not None
    # the design resistance at the level found is the load asked for (interpolated)
    assert curve.design_at(level) == pytest.approx(need, rel=1e-6)


def test_shaft_excludes_the_top_diameters_below_top_level():
    s = sounding()
    no_excl = cpt_capacity(s, 0.6, 9.5, 0.0, rules=Rules(exclusion_diameters=0.0))
    excl = cpt_capacity(s, 0.6, 9.5, 0.0, rules=Rules(exclusion_diameters=3.0))
    assert excl.shaft < no_excl.shaft
    assert excl.base == no_excl.base


def test_toe_outside_the_sounding_is_refused():
    s = sounding()
    hi, lo = cpt_toe_limits(s, 0.6)
    assert lo == pytest.approx(10.0 - 30.0 + 0.9)
    with pytest.raises(ValueError, match="must reach below the toe's base window"):
        cpt_capacity_curve(s, 0.6, 9.5, [lo - 0.1])
    with pytest.raises(ValueError, match="must be below top_level"):
        cpt_capacity_curve(s, 0.6, 5.0, [6.0])


def test_eslami_fellenius_needs_u2():
    with pytest.raises(ValueError, match="u2_kpa is required"):
        cpt_capacity(sounding(u2=False), 0.6, 9.5, 0.0, method="eslami_fellenius")


def test_soil_by_layer_changes_the_categories():
    s = sounding()
    by_ratio = cpt_capacity(s, 0.6, 9.5, -5.0)
    by_layer = cpt_capacity(s, 0.6, 9.5, -5.0, soil=[(2.0, "sand"), (-6.0, "clay"), (-50, "sand")])
    assert "by layer" in by_layer.reason and "from f_s/q_E" in by_ratio.reason
    with pytest.raises(ValueError, match="soil\\[1\\] bottom_level must be below"):
        cpt_capacity(s, 0.6, 9.5, -5.0, soil=[(2.0, "sand"), (3.0, "clay")])
    with pytest.raises(ValueError, match="nature"):
        cpt_capacity(s, 0.6, 9.5, -5.0, soil=[(2.0, "peat")])


def test_ef_zone_from_the_friction_ratio():
    # f_s/q_E: 0.5 % sand, 1.0 % sandy silt, 2.0 % silty clay, 4 % clay (rules' thresholds)
    zones = ef_zone([10.0, 10.0, 10.0, 10.0], [50.0, 100.0, 200.0, 400.0])
    assert zones.tolist() == [5, 4, 3, 2]


def test_lcpc_base_average_window_must_fit():
    with pytest.raises(ValueError, match="toe_depth_m"):
        lcpc_base_average([0.0, 1.0, 2.0], [1.0, 2.0, 3.0], 1.8, 0.6)


def test_nearest_sounding_within_the_rules_distance():
    a, b = sounding("A", 0.0, 0.0), sounding("B", 100.0, 0.0)
    s, d = nearest_sounding([a, b], 80.0, 0.0)
    assert s is b and d == pytest.approx(20.0)
    s, d = nearest_sounding([a, b], 50.0, 60.0)  # 78 m from both: beyond 30 m
    assert s is None and d == pytest.approx(78.10, abs=0.01)
    assert nearest_sounding([], 0.0, 0.0) == (None, None)


def test_deeper_toe_in_uniform_sand_never_loses_resistance():
    d = np.round(np.arange(0.0, 20.0001, 0.05), 6)
    s = Sounding("U", 0, 0, 10.0, d, np.full(d.size, 12.0), np.full(d.size, 40.0))
    curve = cpt_capacity_curve(s, 0.5, 10.0, np.arange(9.0, -9.0, -0.25))
    assert np.all(np.diff(curve.ultimate) >= -1e-9)


def test_lcpc_window_with_every_reading_dropped_takes_the_lowest():
    # Half 1 MPa, half 10 MPa about the toe: first mean 5.5, band 3.85-7.15 keeps nothing, so
    # the lowest reading (1 MPa) is used: erring low, never high.
    d = np.round(np.arange(4.0, 6.01, 0.1), 6)
    qc = np.where(d < 5.0, 1.0, 10.0)
    assert lcpc_base_average(d, qc, 5.05, 0.4) == pytest.approx(1.0)


def _qca_by_definition(depths, qc, toe, half):
    """q_ca read straight off the definition, one toe at a time (independent of the code)."""
    inside = (depths >= toe - half - 1e-6) & (depths <= toe + half + 1e-6)
    window = qc[inside]
    first = window.mean()
    kept = window[(window >= 0.7 * first) & (window <= 1.3 * first)]
    return kept.mean() if kept.size else window.min()


def test_lcpc_qca_matches_the_definition_on_random_soundings():
    # Property test: irregular spacing, spikes and layering; the vectorised q_ca equals the
    # definition applied one toe at a time.
    rng = np.random.default_rng(20)
    for _ in range(100):
        d = np.unique(np.round(rng.uniform(0.0, 30.0, rng.integers(30, 400)), 4))
        qc = rng.uniform(0.2, 30.0, d.size) * rng.choice([1.0, 1.0, 1.0, 0.1, 3.0], d.size)
        half = float(rng.uniform(0.3, 2.0))
        toes = rng.uniform(d[0] + half, d[-1] - half, 20)
        for toe in toes:
            try:
                got = lcpc_base_average(d, qc, float(toe), half / 1.5)
            except ValueError:  # a window with no reading in a sparse stretch
                continue
            assert got == pytest.approx(_qca_by_definition(d, qc, toe, half), rel=1e-12)
