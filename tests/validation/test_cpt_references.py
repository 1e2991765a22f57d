"""CPT methods against their published definitions, by hand calculation.

Sources:
  LCPC: Bustamante, M. & Gianeselli, L. (1982), "Pile bearing capacity prediction by means of
        static penetrometer CPT", Proc. 2nd European Symposium on Penetration Testing
        (ESOPT II), Amsterdam: q_b = k_c q_ca; q_ca the mean q_c over 1.5 D above and below the
        toe after the readings outside 0.7-1.3 of the first mean are dropped; f_s =
        min(q_c / alpha, f_max). The k_c, alpha and f_max values used below are the table as
        reproduced in textbooks, FROM MEMORY (design_core.cpt.LCPC_TABLE says so too).
  E&F:  Eslami, A. & Fellenius, B.H. (1997), "Pile capacity by direct CPT and CPTu methods
        applied to 102 case histories", Can. Geotech. J. 34: 886-904: q_E = q_t - u_2; toe
        r_t = C_t q_Eg, q_Eg the geometric mean of q_E from 8 D above to 4 D below the toe;
        shaft C_s q_E. C_s values FROM MEMORY (the rules say so).

No published worked example with its numbers was found for either method: every expected value
here is a HAND CALCULATION from the published formula, with the arithmetic in the comment.
"""

import math

import numpy as np
import pytest

from design_core import Rules
from design_core.cpt import (
    Sounding, cpt_capacity, effective_cone_resistance, ef_toe_coefficient, lcpc_base_average,
)

NO_EXCLUSION = Rules(exclusion_diameters=0.0)


def uniform(qc_mpa, fs_kpa, depth_to=20.0, step=0.1, u2=None):
    """A sounding at ground level +10.0 m with the same readings at every depth."""
    d = np.round(np.arange(0.0, depth_to + step / 2, step), 6)
    u = None if u2 is None else np.full(d.size, u2)
    return Sounding("CPT-H", 0.0, 0.0, 10.0, d, np.full(d.size, qc_mpa), np.full(d.size, fs_kpa), u)


def test_lcpc_qca_drops_readings_outside_the_band():
    # Hand calculation. D = 0.4 m, window 1.5 D = 0.6 m: readings 4.4 to 5.6 m (13 at 0.1 m).
    # Eleven at 10 MPa, one spike of 30 MPa, one low of 2 MPa.
    # First mean = (11 x 10 + 30 + 2) / 13 = 142 / 13 = 10.923 MPa; band 0.7-1.3 x 10.923 =
    # 7.646-14.200 MPa: 30 and 2 are dropped; the second mean q_ca = 10.000 MPa.
    d = np.round(np.arange(4.0, 6.01, 0.1), 6)
    qc = np.full(d.size, 10.0)
    qc[np.isclose(d, 5.0)] = 30.0
    qc[np.isclose(d, 4.7)] = 2.0
    assert lcpc_base_average(d, qc, 5.0, 0.4) == pytest.approx(10.0, abs=1e-12)


def test_lcpc_qca_keeps_readings_within_the_band():
    # Hand calculation: readings 8, 10, 12 MPa repeating over the window 4.4-5.6 m (13 readings:
    # 8,10,12,8,10,12,8,10,12,8,10,12,8 -> sum 128, mean 9.846). Band 6.892-12.800: all kept,
    # q_ca = 9.846 MPa (128 / 13).
    d = np.round(np.arange(4.4, 5.61, 0.1), 6)
    qc = np.array([8.0, 10.0, 12.0] * 4 + [8.0])
    assert lcpc_base_average(d, qc, 5.0, 0.4) == pytest.approx(128.0 / 13.0, rel=1e-12)


def test_lcpc_bored_pile_in_moderately_compact_sand():
    # Hand calculation. q_c = 10 MPa sand: "moderately compact sand and gravel" (5-12 MPa).
    # Group I (bored): k_c = 0.40 -> q_b = 4.0 MPa = 4000 kPa; A_b = pi 0.6^2 / 4 = 0.282743 m2
    # -> Q_b = 1130.97 kN. Shaft: alpha = 100 -> q_c / alpha = 100 kPa, f_max = 80 kPa -> 80 kPa
    # over 10 m: Q_s = pi 0.6 x 10 x 80 = 1507.96 kN.
    r = cpt_capacity(uniform(10.0, 30.0), 0.6, 10.0, 0.0, "bored", NO_EXCLUSION, soil="sand")
    assert r.base == pytest.approx(1130.97, abs=0.01)
    assert r.shaft == pytest.approx(1507.96, abs=0.01)
    assert r.base_coefficient == pytest.approx(0.40)


def test_lcpc_driven_pile_takes_group_two_kc():
    # Hand calculation: as above with k_c = 0.50 (group II): q_b = 5000 kPa, Q_b = 1413.72 kN.
    r = cpt_capacity(uniform(10.0, 30.0), 0.6, 10.0, 0.0, "driven", NO_EXCLUSION, soil="sand")
    assert r.base == pytest.approx(1413.72, abs=0.01)


def test_lcpc_soft_clay_shaft_is_capped_at_f_max():
    # Hand calculation: q_c = 0.8 MPa clay = "soft clay and mud": alpha 30 -> 800 / 30 = 26.7 kPa,
    # f_max 15 kPa governs. D 0.5 m over 10 m: Q_s = pi 0.5 x 10 x 15 = 235.62 kN.
    # Base: k_c 0.40 x 0.8 MPa = 320 kPa x pi 0.25 / 4 (0.196350) = 62.83 kN.
    r = cpt_capacity(uniform(0.8, 20.0), 0.5, 10.0, 0.0, "bored", NO_EXCLUSION, soil="clay")
    assert r.shaft == pytest.approx(235.62, abs=0.01)
    assert r.base == pytest.approx(62.83, abs=0.01)


def test_eslami_fellenius_effective_cone_resistance():
    # Hand calculation: q_t = q_c + u_2 (1 - a) = 5 + 0.2 x 0.2 = 5.04 MPa; q_E = 5.04 - 0.2 = 4.84 MPa.
    assert float(effective_cone_resistance(5.0, 200.0, 0.8)) == pytest.approx(4.84, abs=1e-12)


def test_eslami_fellenius_toe_is_the_geometric_mean():
    # Hand calculation. D = 0.25 m: zone 8 D = 2.0 m above to 4 D = 1.0 m below a toe at 10 m
    # depth: readings 8.0, 8.5, ..., 11.0 m (7 at 0.5 m) alternating 4, 9, 4, 9, 4, 9, 4 MPa,
    # u_2 = 0 so q_E = q_c. q_Eg = exp((4 ln 4 + 3 ln 9) / 7) = exp(12.136851 / 7) = exp(1.733836) = 5.6623 MPa.
    # C_t = 1 (D <= 0.4 m): r_t = 5662.3 kPa.
    d = np.round(np.arange(0.0, 12.01, 0.5), 6)
    qc = np.where(np.round(d / 0.5).astype(int) % 2 == 0, 4.0, 9.0)
    s = Sounding("CPT-G", 0.0, 0.0, 10.0, d, qc, np.zeros(d.size), np.zeros(d.size))
    r = cpt_capacity(s, 0.25, 10.0, 0.0, "bored", NO_EXCLUSION, method="eslami_fellenius",
                     soil="sand")
    expected = math.exp((4 * math.log(4.0) + 3 * math.log(9.0)) / 7)
    assert r.q_base_mpa == pytest.approx(expected, rel=1e-12)
    assert r.q_base_mpa == pytest.approx(5.6623, abs=1e-4)
    assert r.base_pressure == pytest.approx(1000.0 * expected, rel=1e-12)


def test_eslami_fellenius_shaft_in_sand():
    # Hand calculation: sand zone, C_s = 0.004 (from memory); q_E = 10 MPa (u_2 = 0) -> f = 40 kPa.
    # D 0.4 m over 10 m: Q_s = pi 0.4 x 10 x 40 = 502.65 kN.
    r = cpt_capacity(uniform(10.0, 30.0, u2=0.0), 0.4, 10.0, 0.0, "bored", NO_EXCLUSION,
                     method="eslami_fellenius", soil="sand")
    assert r.shaft == pytest.approx(502.65, abs=0.01)


def test_eslami_fellenius_toe_coefficient_for_large_piles():
    # C_t = 1/(3 b), b in m, above 0.4 m (from memory): b = 0.9 m -> 0.3704.
    assert ef_toe_coefficient(0.3) == 1.0
    assert ef_toe_coefficient(0.9) == pytest.approx(1 / 2.7, rel=1e-12)


def test_lcpc_kc_band_is_read_from_q_ca_not_the_single_reading():
    # Hand calculation. Sand at 11 MPa with one reading of 13 MPa at the toe (10 m), D 0.4 m,
    # window 9.4-10.6 m (13 readings): first mean (12 x 11 + 13) / 13 = 11.1538, band
    # 7.81-14.50, all kept: q_ca = 11.1538 MPa, "moderately compact sand" (5-12 MPa), k_c 0.40
    # (the lone 13 MPa reading alone would say "compact", k_c 0.30).
    s = uniform(11.0, 30.0)
    qc = s.qc_mpa.copy()
    qc[np.isclose(s.depths_m, 10.0)] = 13.0
    s = Sounding("CPT-K", 0.0, 0.0, 10.0, s.depths_m, qc, s.fs_kpa)
    r = cpt_capacity(s, 0.4, 10.0, 0.0, "bored", NO_EXCLUSION, soil="sand")
    assert r.q_base_mpa == pytest.approx(145.0 / 13.0, rel=1e-12)
    assert r.base_coefficient == pytest.approx(0.40)
