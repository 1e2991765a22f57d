"""Lateral resistance against REFERENCES.md sections 6 (Broms) and 7 (Hetenyi).

Broms, B. B. (1964a, b), J. Soil Mech. Found. Div. ASCE 90(SM2), 90(SM3); equations as in Reese &
Van Impe, Single Piles and Pile Groups under Lateral Loading, Appendix A. Hetenyi, Beams on
Elastic Foundation (1946): closed forms for a semi-infinite beam, REFERENCES.md section 7.

The reference sheet's cohesionless rows round sqrt(2/3) to 0.82 and 2/3 to 0.67; the code uses
the exact constants, so those rows are held to 1 %.
"""

import math

import numpy as np
import pytest

from design_core.lateral import broms_lateral, winkler_pile


# ---- Broms, cohesive --------------------------------------------------------------------------

def test_clay_short_free_head_external_hand_check():
    # REFERENCES.md section 6, external worked check: cu 50, D 0.75, e 7.5, L 2.3462 m -> H 13.610 kN,
    # Mmax 117.57 kNm (a posted hand calculation, FOUND; recomputed to 4 s.f.)
    r = broms_lateral("cohesive", 0.75, 2.3462, eccentricity=7.5, cu=50.0)
    assert r.ultimate == pytest.approx(13.610, rel=1e-3)
    assert r.max_moment == pytest.approx(117.57, rel=2e-3)
    assert r.mode == "short"


def test_clay_short_free_head():
    # REFERENCES.md section 6: cu 50, D 0.6, L 6, e 0.5 -> H 405.86 kN, Mmax 873.25 kNm
    r = broms_lateral("cohesive", 0.6, 6.0, eccentricity=0.5, cu=50.0)
    assert r.ultimate == pytest.approx(405.86, rel=1e-4)
    assert r.max_moment == pytest.approx(873.25, rel=1e-4)
    assert (r.mode, r.hinges) == ("short", 0)


def test_clay_short_fixed_head():
    # REFERENCES.md section 6: H = 9 cu D (L - 1.5 D) = 1377.0 kN, Mmax = 4750.65 kNm
    r = broms_lateral("cohesive", 0.6, 6.0, head="fixed", cu=50.0)
    assert r.ultimate == pytest.approx(1377.0, rel=1e-6)
    assert r.max_moment == pytest.approx(4750.65, rel=1e-6)
    # short only while My exceeds the head moment (REFERENCES.md section 6 note)
    assert broms_lateral("cohesive", 0.6, 6.0, head="fixed", cu=50.0,
                         yield_moment=5000.0).mode == "short"


def test_clay_long_free_head():
    # REFERENCES.md section 6: My 300, cu 50, D 0.6, e 0.5 -> H 174.16 kN
    r = broms_lateral("cohesive", 0.6, 20.0, eccentricity=0.5, cu=50.0, yield_moment=300.0)
    assert r.ultimate == pytest.approx(174.16, rel=1e-4)
    assert r.mode == "long"


def test_clay_long_fixed_head():
    # REFERENCES.md section 6: My 300, cu 50, D 0.6 -> H = 2 My/(1.5D + 0.5f) = 375.91 kN
    r = broms_lateral("cohesive", 0.6, 20.0, head="fixed", cu=50.0, yield_moment=300.0)
    assert r.ultimate == pytest.approx(375.91, rel=1e-4)
    assert (r.mode, r.hinges) == ("long", 2)


# ---- Broms, cohesionless ----------------------------------------------------------------------

def test_sand_short_free_head():
    # REFERENCES.md section 6: gamma 18, phi 30 (Kp 3), D 0.6, L 5, e 0.5 -> H 368.18 kN, Mmax 862.58
    r = broms_lateral("cohesionless", 0.6, 5.0, eccentricity=0.5, unit_weight=18.0, phi=30.0)
    assert r.ultimate == pytest.approx(368.18, rel=1e-4)
    assert r.max_moment == pytest.approx(862.58, rel=0.01)   # sheet rounds sqrt(2/3) to 0.82
    assert r.mode == "short"


def test_sand_short_fixed_head():
    # REFERENCES.md section 6: H = 1.5 gamma L^2 D Kp = 1215.0 kN, Mmax = 2/3 H L = 4050 kNm
    r = broms_lateral("cohesionless", 0.6, 5.0, head="fixed", unit_weight=18.0, phi=30.0)
    assert r.ultimate == pytest.approx(1215.0, rel=1e-6)
    assert r.max_moment == pytest.approx(4050.0, rel=1e-6)


def test_sand_long_free_head():
    # REFERENCES.md section 6: My 300, gamma 18, Kp 3, D 0.6, e 0.5 -> H 170.44 kN (0.82/0.67 rounding)
    r = broms_lateral("cohesionless", 0.6, 20.0, eccentricity=0.5, unit_weight=18.0, phi=30.0,
                      yield_moment=300.0)
    assert r.ultimate == pytest.approx(170.44, rel=0.01)
    assert r.mode == "long"


def test_sand_long_fixed_head():
    # REFERENCES.md section 6: My 300, e 0 -> H 338.08 kN (0.82/0.67 rounding)
    r = broms_lateral("cohesionless", 0.6, 20.0, head="fixed", unit_weight=18.0, phi=30.0,
                      yield_moment=300.0)
    assert r.ultimate == pytest.approx(338.08, rel=0.01)
    assert (r.mode, r.hinges) == ("long", 2)


@pytest.mark.parametrize("soil, params", [("cohesive", {"cu": 50.0}),
                                          ("cohesionless", {"unit_weight": 18.0, "phi": 30.0})])
def test_fixed_head_mechanisms_meet_at_their_boundaries(soil, params):
    # Consistency of the rigid-plastic solution (statics, not a published number): as My falls
    # from above the short-pile head moment, the load falls continuously through the short,
    # intermediate (1 hinge) and long (2 hinges) mechanisms.
    short = broms_lateral(soil, 0.6, 6.0, head="fixed", **params)
    results = [broms_lateral(soil, 0.6, 6.0, head="fixed", yield_moment=my, **params)
               for my in np.linspace(short.max_moment * 1.2, short.max_moment * 0.02, 3000)]
    loads = np.array([r.ultimate for r in results])
    assert {r.hinges for r in results} == {0, 1, 2}
    assert np.all(np.diff(loads) <= 1e-6)
    assert np.max(np.abs(np.diff(loads))) < 0.005 * short.ultimate
    assert loads[0] == pytest.approx(short.ultimate)


def test_broms_rejects_missing_soil_parameter():
    with pytest.raises(ValueError, match="cu"):
        broms_lateral("cohesive", 0.6, 6.0)
    with pytest.raises(ValueError, match="phi"):
        broms_lateral("cohesionless", 0.6, 6.0, unit_weight=18.0, phi=75.0)


# ---- Winkler against Hetenyi ------------------------------------------------------------------

EI = 30e6 * math.pi * 0.6 ** 4 / 64      # REFERENCES.md section 7: 190 852 kNm2
K = 20_000.0                             # kN/m2 per m of pile; lambda = 0.40232 1/m


def test_case_inputs():
    assert EI == pytest.approx(190_852, rel=1e-5)
    assert (K / (4 * EI)) ** 0.25 == pytest.approx(0.40232, rel=1e-4)


def test_long_free_head_shear_only():
    # REFERENCES.md section 7 case A: y0 4.0232 mm, theta0 1.6186e-3, z_m 1.9522 m, Mmax 80.135 kNm
    r = winkler_pile(EI, 30.0, K, shear=100.0, nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(4.0232, rel=0.01)
    assert abs(r.head_rotation) == pytest.approx(1.6186e-3, rel=0.01)
    assert r.max_moment == pytest.approx(80.135, rel=0.01)
    assert r.max_moment_depth == pytest.approx(1.9522, abs=0.1)


def test_long_free_head_shear_and_moment():
    # REFERENCES.md section 7 case B: y0 4.8325 mm, theta0 2.2698e-3, z_m 1.5397 m, Mmax 115.21 kNm
    r = winkler_pile(EI, 30.0, K, shear=100.0, moment=50.0, nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(4.8325, rel=0.01)
    assert abs(r.head_rotation) == pytest.approx(2.2698e-3, rel=0.01)
    assert r.max_moment == pytest.approx(115.21, rel=0.01)
    assert r.max_moment_depth == pytest.approx(1.5397, abs=0.1)


def test_long_free_head_moment_only():
    # REFERENCES.md section 7 case C: y0 0.809 mm, theta0 6.51e-4 rad, Mmax 50 kNm at the head
    r = winkler_pile(EI, 30.0, K, shear=0.0, moment=50.0, nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(0.809, rel=0.01)
    assert abs(r.head_rotation) == pytest.approx(6.51e-4, rel=0.01)
    assert r.moment[0] == pytest.approx(50.0, rel=1e-9)


def test_long_fixed_head():
    # REFERENCES.md section 7, case A fixed head: y0 = H lambda / k = 2.0116 mm, M_head = H/(2 lambda) = 124.28
    r = winkler_pile(EI, 30.0, K, shear=100.0, head="fixed", nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(2.0116, rel=0.01)
    assert abs(r.moment[0]) == pytest.approx(124.28, rel=0.01)
    assert r.head_rotation == pytest.approx(0.0, abs=1e-12)


def test_moment_profile_follows_hetenyi():
    # REFERENCES.md section 7: M(z) = (H/lambda) e^-lz sin lz + M e^-lz (cos lz + sin lz)
    lam = (K / (4 * EI)) ** 0.25
    r = winkler_pile(EI, 30.0, K, shear=100.0, moment=50.0, nodes=600)
    z = r.depth
    exact = (100 / lam) * np.exp(-lam * z) * np.sin(lam * z) + 50 * np.exp(-lam * z) * (
        np.cos(lam * z) + np.sin(lam * z))
    assert np.max(np.abs(r.moment - exact)) < 0.01 * 115.21


def test_converges_as_nodes_grow():
    # REFERENCES.md section 7 case A: the error in y0 falls as the mesh is refined (second order)
    errors = [abs(winkler_pile(EI, 30.0, K, shear=100.0, nodes=n).head_deflection * 1000 - 4.0232)
              for n in (50, 100, 200, 400)]
    assert np.all(np.diff(errors) < 0)
    assert errors[-1] < errors[0] / 10


def test_rigid_short_pile_translates_and_rotates():
    # Statics (not a published example): a rigid 2 m pile on uniform springs under shear H at the
    # head: y0 = 4H/(kL), theta = 6H/(kL^2) (rigid body on springs). Very stiff piles are solved on
    # a coarser mesh to keep precision, hence 1 %.
    for ei in (1e7, 1e9, 1e12):
        r = winkler_pile(ei, 2.0, 1000.0, shear=10.0, nodes=400)
        assert r.head_deflection == pytest.approx(4 * 10 / (1000 * 2), rel=0.01)
        assert abs(r.head_rotation) == pytest.approx(6 * 10 / (1000 * 4), rel=0.01)


def test_springs_may_vary_with_depth():
    # Equilibrium (statics): the spring forces balance the head shear, sum k y dz = H.
    r = winkler_pile(EI, 20.0, lambda z: 5000.0 * z, shear=80.0, nodes=400)
    force = np.trapezoid(5000.0 * r.depth * r.deflection, r.depth)
    assert force == pytest.approx(80.0, rel=5e-3)


def test_pentadiagonal_solver_matches_a_dense_solve():
    # Linear algebra check (not a published example): LDL^T on a random SPD pentadiagonal system.
    from design_core.lateral import solve_pentadiagonal
    rng = np.random.default_rng(7)
    n = 40
    d = 6.0 + rng.random(n)
    e = -4.0 + 0.1 * rng.random(n - 1)
    f = 1.0 + 0.1 * rng.random(n - 2)
    a = np.diag(d) + np.diag(e, 1) + np.diag(e, -1) + np.diag(f, 2) + np.diag(f, -2)
    a = a + 4.0 * np.eye(n)          # make sure it is positive definite
    rhs = rng.random((n, 2))
    x = solve_pentadiagonal(np.diag(a), e, f, rhs)
    assert np.allclose(a @ x, rhs, atol=1e-10)


def test_many_systems_solved_together_give_the_numbers_of_one_at_a_time():
    # Linear algebra check (not a published example): the batched LDL^T takes the same steps as
    # the one-system solver, so the results are identical, and it finds a system that is not SPD.
    from design_core.lateral import (
        solve_pentadiagonal, solve_pentadiagonal_many, winkler_unit_responses,
        winkler_unit_responses_many,
    )
    rng = np.random.default_rng(11)
    m, n = 6, 30
    d = 10.0 + rng.random((m, n))
    e = -4.0 + 0.1 * rng.random((m, n - 1))
    f = 1.0 + 0.1 * rng.random((m, n - 2))
    rhs = rng.random((m, n, 2))
    x = solve_pentadiagonal_many(d, e, f, rhs)
    for j in range(m):
        assert np.array_equal(x[j], solve_pentadiagonal(d[j], e[j], f[j], rhs[j]))
    d[3, 5] = -1.0
    with pytest.raises(ValueError, match="not positive definite"):
        solve_pentadiagonal_many(d, e, f, rhs)
    cases = [(EI, 12.0, 4000.0, "free", 60), (EI * 2, 20.0, lambda z: 5000.0 * z, "fixed", 100),
             (EI, 15.0, 3000.0, "fixed", 60), (1e12, 2.0, 1000.0, "free", 400)]  # the last: fewer nodes
    cases += [(EI * (1 + 0.1 * j), 12.0 + 0.05 * j, 4000.0, ("free", "fixed")[j % 2], 60)
              for j in range(20)]   # enough of one size to be solved together
    many = winkler_unit_responses_many(cases)
    for case, (depth, y) in zip(cases, many, strict=True):
        one_depth, one_y = winkler_unit_responses(*case)
        assert np.array_equal(depth, one_depth) and np.array_equal(y, one_y)


def test_long_pile_in_sand_matches_matlock_and_reese():
    # Matlock & Reese (1960), k = n_h z, long free-head pile (z_max = L/T >= 5): y0 = 2.435 H T^3/EI
    # + 1.623 M T^2/EI, M_max = 0.772 H T, T = (EI/n_h)^(1/5). Coefficients from memory (also
    # tabulated in Reese & Van Impe); held to 1 %.
    nh = 5000.0
    t = (EI / nh) ** 0.2
    assert 30.0 / t > 5
    shear = winkler_pile(EI, 30.0, lambda z: nh * z, shear=100.0, nodes=400)
    moment = winkler_pile(EI, 30.0, lambda z: nh * z, shear=0.0, moment=50.0, nodes=400)
    assert shear.head_deflection == pytest.approx(2.435 * 100.0 * t ** 3 / EI, rel=0.01)
    assert moment.head_deflection == pytest.approx(1.623 * 50.0 * t ** 2 / EI, rel=0.01)
    assert shear.max_moment == pytest.approx(0.772 * 100.0 * t, rel=0.01)
