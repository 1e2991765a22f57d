"""Lateral resistance against Broms's equations and Hetenyi's closed forms.

Sources: Broms, B. B. (1964a) "Lateral resistance of piles in cohesive soils", J. Soil Mech.
Found. Div. ASCE 90(SM2) 27-63 (found: title and abstract) and (1964b) "...in cohesionless
soils", 90(SM3) 123-156 (from memory); equations as in Reese, L. C. & Van Impe, W. F. (2001)
Single Piles and Pile Groups under Lateral Loading, Appendix A, Eqs A.1-A.5, and the open
textbook Fundamentals of Foundation Engineering (CAUL OER), 6.24, Eqs 6.104-6.105 (cohesive free
head found; fixed head, long and cohesionless cases from memory). Hetenyi, M. (1946) Beams on
Elastic Foundation, University of Michigan Press: closed forms for a semi-infinite beam (from
memory; checked numerically against an independent boundary-value solution). Every expected value
is published (the posted hand check below) or a hand calculation from these, with the arithmetic
in the comment (docs/validation.md section 4).

Printed versions of the cohesionless equations round sqrt(2/3) to 0.82 and 2/3 to 0.67; the code
uses the exact constants, so those values are held to 1 %.
"""

import math

import numpy as np
import pytest

from design_core.lateral import broms_lateral, winkler_pile


# ---- Broms, cohesive --------------------------------------------------------------------------

def test_clay_short_free_head_external_hand_check():
    # Published: a publicly posted hand-calculation sheet using Broms's free-head equations (Broms
    # 1964a; Reese & Van Impe A.1-A.5): cu 50, D 0.75, e 7.5, H 13.6 kN -> f 0.0403 m, Mmax
    # 13.6 x (7.5 + 1.125 + 0.0202) = 117.57 kNm, L 2.3457 m (recomputed, agrees to 4 figures);
    # the inverse for L = 2.3462 m is H 13.610 kN (hand calculation, same equations)
    r = broms_lateral("cohesive", 0.75, 2.3462, eccentricity=7.5, cu=50.0)
    assert r.ultimate == pytest.approx(13.610, rel=1e-3)
    assert r.max_moment == pytest.approx(117.57, rel=2e-3)
    assert r.mode == "short"


def test_clay_short_free_head():
    # Hand calculation from f = H/(9 cu D), Mmax = H (e + 1.5D + f/2) = 2.25 cu D g^2, L = 1.5D + f + g
    # (Broms 1964a; Reese & Van Impe A.1-A.5), cu 50, D 0.6, L 6, e 0.5: 9 cu D = 270 kN/m,
    # L' = 5.1, e' = 1.4; u = H/270 from u^2 + (4 x 1.4 + 2 x 5.1) u - 5.1^2 = 0 -> u = 1.5032 m,
    # H = 405.86 kN; Mmax = 405.86 x (1.4 + 0.7516) = 873.25 kNm
    r = broms_lateral("cohesive", 0.6, 6.0, eccentricity=0.5, cu=50.0)
    assert r.ultimate == pytest.approx(405.86, rel=1e-4)
    assert r.max_moment == pytest.approx(873.25, rel=1e-4)
    assert (r.mode, r.hinges) == ("short", 0)


def test_clay_short_fixed_head():
    # Hand calculation from H = 9 cu D (L - 1.5 D), Mmax = H (L/2 + 0.75 D) (Broms 1964a, fixed
    # head, from memory): 270 x 5.1 = 1377.0 kN; 1377.0 x (3 + 0.45) = 4750.65 kNm
    r = broms_lateral("cohesive", 0.6, 6.0, head="fixed", cu=50.0)
    assert r.ultimate == pytest.approx(1377.0, rel=1e-6)
    assert r.max_moment == pytest.approx(4750.65, rel=1e-6)
    # short only while My exceeds the head moment (Broms 1964a: otherwise a hinge forms)
    assert broms_lateral("cohesive", 0.6, 6.0, head="fixed", cu=50.0,
                         yield_moment=5000.0).mode == "short"


def test_clay_long_free_head():
    # Hand calculation from My = H (e + 1.5D + f/2), f = H/(9 cu D) (Broms 1964a): 300 = H (1.4 +
    # H/540) -> H = 270 x (-1.4 + sqrt(1.96 + 600/270)) = 174.16 kN
    r = broms_lateral("cohesive", 0.6, 20.0, eccentricity=0.5, cu=50.0, yield_moment=300.0)
    assert r.ultimate == pytest.approx(174.16, rel=1e-4)
    assert r.mode == "long"


def test_clay_long_fixed_head():
    # Hand calculation from 2 My = H (1.5D + f/2), f = H/(9 cu D) (Broms 1964a, from memory):
    # 600 = H (0.9 + H/540) -> H = 270 x (-0.9 + sqrt(0.81 + 1200/270)) = 375.91 kN
    r = broms_lateral("cohesive", 0.6, 20.0, head="fixed", cu=50.0, yield_moment=300.0)
    assert r.ultimate == pytest.approx(375.91, rel=1e-4)
    assert (r.mode, r.hinges) == ("long", 2)


# ---- Broms, cohesionless ----------------------------------------------------------------------

def test_sand_short_free_head():
    # Hand calculation from H = 0.5 gamma D L^3 Kp/(e + L), Mmax = H (e + 2f/3), f = 0.82
    # sqrt(H/(D Kp gamma)) (Broms 1964b, from memory), gamma 18, Kp = tan^2 60 = 3, D 0.6, L 5,
    # e 0.5: 0.5 x 18 x 0.6 x 125 x 3/5.5 = 368.18 kN; f = 0.82 sqrt(368.18/32.4) = 2.764 m;
    # Mmax = 368.18 x (0.5 + 2 x 2.764/3) = 862.58 kNm
    r = broms_lateral("cohesionless", 0.6, 5.0, eccentricity=0.5, unit_weight=18.0, phi=30.0)
    assert r.ultimate == pytest.approx(368.18, rel=1e-4)
    assert r.max_moment == pytest.approx(862.58, rel=0.01)   # sheet rounds sqrt(2/3) to 0.82
    assert r.mode == "short"


def test_sand_short_fixed_head():
    # Hand calculation from H = 1.5 gamma L^2 D Kp, Mmax = 2/3 H L (Broms 1964b, from memory):
    # 1.5 x 18 x 25 x 0.6 x 3 = 1215.0 kN; 2/3 x 1215 x 5 = 4050 kNm
    r = broms_lateral("cohesionless", 0.6, 5.0, head="fixed", unit_weight=18.0, phi=30.0)
    assert r.ultimate == pytest.approx(1215.0, rel=1e-6)
    assert r.max_moment == pytest.approx(4050.0, rel=1e-6)


def test_sand_long_free_head():
    # Hand calculation from My = H (e + 0.67 f), f = 0.82 sqrt(H/(gamma D Kp)) (Broms 1964b, from
    # memory): 300 = H (0.5 + 0.5494 sqrt(H/32.4)), by trial H = 170.44 kN (0.82/0.67 rounding)
    r = broms_lateral("cohesionless", 0.6, 20.0, eccentricity=0.5, unit_weight=18.0, phi=30.0,
                      yield_moment=300.0)
    assert r.ultimate == pytest.approx(170.44, rel=0.01)
    assert r.mode == "long"


def test_sand_long_fixed_head():
    # Hand calculation from 2 My = H x 0.67 f (Broms 1964b, from memory), e 0: 600 = 0.5494 H
    # sqrt(H/32.4), by trial H = 338.08 kN (0.82/0.67 rounding)
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

EI = 30e6 * math.pi * 0.6 ** 4 / 64      # E 30 GPa, D 0.6 m: I = 6.3617e-3 m4, EI = 190 852 kNm2
K = 20_000.0                             # kN/m2 per m of pile; lambda = 0.40232 1/m


def test_case_inputs():
    assert EI == pytest.approx(190_852, rel=1e-5)
    assert (K / (4 * EI)) ** 0.25 == pytest.approx(0.40232, rel=1e-4)


def test_long_free_head_shear_only():
    # Hand calculation from Hetenyi (1946), case A, H 100 kN: y0 = 2 H lambda/k = 2 x 100 x
    # 0.40232/20,000 = 4.0232 mm; theta0 = 2 H lambda^2/k = 1.6186e-3; z_m = pi/(4 lambda) =
    # 1.9522 m; Mmax = 0.3224 H/lambda = 80.135 kNm
    r = winkler_pile(EI, 30.0, K, shear=100.0, nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(4.0232, rel=0.01)
    assert abs(r.head_rotation) == pytest.approx(1.6186e-3, rel=0.01)
    assert r.max_moment == pytest.approx(80.135, rel=0.01)
    assert r.max_moment_depth == pytest.approx(1.9522, abs=0.1)


def test_long_free_head_shear_and_moment():
    # Hand calculation from Hetenyi (1946), case B, H 100, M 50: y0 = 4.0232 + 2 M lambda^2/k
    # (0.8093) = 4.8325 mm; theta0 = 1.6186e-3 + 4 M lambda^3/k = 2.2698e-3; tan(lambda z_m) =
    # H/(H + 2 lambda M) = 100/140.23 -> z_m = 1.5397 m; M(z_m) = 115.21 kNm
    r = winkler_pile(EI, 30.0, K, shear=100.0, moment=50.0, nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(4.8325, rel=0.01)
    assert abs(r.head_rotation) == pytest.approx(2.2698e-3, rel=0.01)
    assert r.max_moment == pytest.approx(115.21, rel=0.01)
    assert r.max_moment_depth == pytest.approx(1.5397, abs=0.1)


def test_long_free_head_moment_only():
    # Hand calculation from Hetenyi (1946), case C, M 50: y0 = 2 M lambda^2/k = 0.809 mm;
    # theta0 = 4 M lambda^3/k = 6.51e-4 rad; Mmax 50 kNm at the head
    r = winkler_pile(EI, 30.0, K, shear=0.0, moment=50.0, nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(0.809, rel=0.01)
    assert abs(r.head_rotation) == pytest.approx(6.51e-4, rel=0.01)
    assert r.moment[0] == pytest.approx(50.0, rel=1e-9)


def test_long_fixed_head():
    # Hand calculation from Hetenyi (1946), case A with a fixed head: y0 = H lambda/k = 2.0116 mm,
    # M_head = H/(2 lambda) = 100/0.80463 = 124.28 kNm
    r = winkler_pile(EI, 30.0, K, shear=100.0, head="fixed", nodes=400)
    assert r.head_deflection * 1000 == pytest.approx(2.0116, rel=0.01)
    assert abs(r.moment[0]) == pytest.approx(124.28, rel=0.01)
    assert r.head_rotation == pytest.approx(0.0, abs=1e-12)


def test_moment_profile_follows_hetenyi():
    # Hetenyi (1946): M(z) = (H/lambda) e^-lz sin lz + M e^-lz (cos lz + sin lz)
    lam = (K / (4 * EI)) ** 0.25
    r = winkler_pile(EI, 30.0, K, shear=100.0, moment=50.0, nodes=600)
    z = r.depth
    exact = (100 / lam) * np.exp(-lam * z) * np.sin(lam * z) + 50 * np.exp(-lam * z) * (
        np.cos(lam * z) + np.sin(lam * z))
    assert np.max(np.abs(r.moment - exact)) < 0.01 * 115.21


def test_converges_as_nodes_grow():
    # Hetenyi (1946) case A (4.0232 mm, above): the error in y0 falls as the mesh is refined (second order)
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
