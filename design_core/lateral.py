"""Lateral resistance of a single pile: Broms ultimate load and a beam on Winkler springs.

``broms_lateral``: Broms, B. B. (1964a) "Lateral resistance of piles in cohesive soils", J. Soil
Mech. Found. Div. ASCE 90(SM2) 27-63, and (1964b) "...in cohesionless soils", 90(SM3) 123-156;
equations as restated in Reese & Van Impe, Single Piles and Pile Groups under Lateral Loading,
Appendix A.

* Cohesive soil: no resistance over the top 1.5 D, then 9 c_u D per metre.
* Cohesionless soil: 3 K_p gamma' z D per metre, K_p = tan^2(45 + phi/2).

Each pile fails by the weakest rigid-plastic mechanism: "short" (the soil fails along the whole
length, the section does not yield) or "long" (a plastic hinge forms where the moment peaks; a
fixed head adds a hinge at the head). For a fixed head the intermediate mechanism (hinge at the
head only) is reported as "long" with ``hinges`` = 1. The intermediate equations used here are
written from statics so that they meet the short and the long mechanisms at their boundaries.
(A restatement from memory with the opposite sign on one term was not used.)

``winkler_pile``: E I y'''' + k(z) y = 0 on 0 <= z <= L (z down from the head), solved by central
finite differences with two ghost nodes at each end (second-order accurate). Head: free
(E I y'' = M, E I y''' = H) or fixed (y' = 0, E I y''' = H); toe free (y'' = y''' = 0). The
closed form for a long pile on uniform springs is Hetenyi (1946), Beams on Elastic Foundation.
Sign: H, M and the deflection are positive in the same sense; the bending moment is E I y''.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

HEADS = ("free", "fixed")
MIN_STIFFNESS_RATIO = 1e-10   # smallest k h^4 / EI kept in the finite-difference system
MIN_NODES = 16
SOILS = ("cohesive", "cohesionless")


def _positive(name: str, value, allow_zero: bool = False) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise ValueError(f"{name} must be a number, got {value!r}")
    value = float(value)
    if not math.isfinite(value) or value < 0.0 or (value == 0.0 and not allow_zero):
        limit = "zero or more" if allow_zero else "more than zero"
        raise ValueError(f"{name} must be {limit}, got {value!r}")
    return value


def _cubic_root(a: float, b: float, c: float) -> float:
    """The positive root s of a s^3 + b s^2 = c (a > 0, b >= 0, c >= 0), by Newton's method.

    The left side is increasing and convex for s > 0, so Newton from s0 = (c/a)^(1/3) >= root
    falls monotonically onto the root.
    """
    if c <= 0.0:
        return 0.0
    s = (c / a) ** (1.0 / 3.0)
    for _ in range(60):
        step = (a * s ** 3 + b * s * s - c) / (3.0 * a * s * s + 2.0 * b * s)
        s -= step
        if abs(step) <= 1e-13 * s:
            break
    return s


@dataclass(frozen=True)
class BromsResult:
    """Broms ultimate lateral resistance.

    ``ultimate`` (kN) is the smallest mechanism load; ``mode`` is "short" or "long";
    ``hinges`` the number of plastic hinges (0 short; 1 free-head long or fixed-head
    intermediate; 2 fixed-head long); ``short`` (kN) the load of the short mechanism and
    ``long`` (kN) that of the free-head long or fixed-head two-hinge mechanism (inf without a
    yield moment); ``max_moment`` (kNm) the largest moment in the
    pile at the ultimate load; ``soil``, ``head`` as given.
    """

    ultimate: float
    mode: str
    hinges: int
    short: float
    long: float
    max_moment: float
    soil: str
    head: str

    @property
    def reason(self) -> str:
        """One line: the load and the mechanism."""
        how = "soil fails along the pile" if self.mode == "short" else (
            f"{self.hinges} plastic hinge{'s' if self.hinges > 1 else ''} in the pile")
        return (f"Broms ultimate lateral load {self.ultimate:.0f} kN ({self.mode} pile, {self.head} "
                f"head, {self.soil}: {how})")


def _broms_cohesive(cu, d, length, head, e, my):
    k = 9.0 * cu * d                      # kN per m of pile below 1.5 D
    lp = max(length - 1.5 * d, 0.0)       # length that resists
    if head == "free":
        # short: L - 1.5D = f + g, M_max = H (e + 1.5D + f/2) = 2.25 c_u D g^2 = (k/4) g^2.
        # With u = H/k: u^2 + (4 e' + 2 L') u - L'^2 = 0, e' = e + 1.5 D.
        ep = e + 1.5 * d
        b = 4.0 * ep + 2.0 * lp
        u = (-b + math.sqrt(b * b + 4.0 * lp * lp)) / 2.0
        h_short = k * u
        m_short = h_short * (ep + 0.5 * u)
        if my is None:
            return h_short, "short", 0, h_short, math.inf, m_short
        # long: M_y = H (e + 1.5 D + f/2), f = H/k  ->  H^2/(2k) + e' H - M_y = 0
        h_long = (-ep + math.sqrt(ep * ep + 2.0 * my / k)) * k
        if h_short <= h_long:
            return h_short, "short", 0, h_short, h_long, m_short
        return h_long, "long", 1, h_short, h_long, my
    # fixed head (the cap is at the ground: e is not used)
    e = 0.0
    h_short = k * lp
    m_head = h_short * (0.5 * length + 0.75 * d)
    if my is None:
        return h_short, "short", 0, h_short, math.inf, m_head
    ep = 1.5 * d
    # long: hinges at the head and at depth: 2 M_y = H (1.5D + f/2)
    h_long = (-ep + math.sqrt(ep * ep + 4.0 * my / k)) * k
    if m_head <= my:
        return h_short, "short", 0, h_short, h_long, m_head
    # intermediate: hinge at the head; zero shear at 1.5D + f, f = H/k, g = L' - f:
    # H (1.5D + f/2) - M_y = 2.25 c_u D g^2  (moment at zero shear = moment of the lower part)
    # k f (1.5D + f/2) - (k/4)(L' - f)^2 = M_y  ->  (k/4) f^2 + k (1.5D + L'/2) f - (k L'^2/4 + M_y) = 0
    qa, qb, qc = 0.25 * k, k * (1.5 * d + 0.5 * lp), -(0.25 * k * lp * lp + my)
    f_i = min((-qb + math.sqrt(qb * qb - 4.0 * qa * qc)) / (2.0 * qa), lp)
    h_int = k * f_i
    m_depth = 0.25 * k * (lp - f_i) ** 2
    if m_depth <= my:
        return h_int, "long", 1, h_short, h_long, my
    return h_long, "long", 2, h_short, h_long, my


def _broms_cohesionless(gamma, phi, d, length, head, e, my):
    kp = math.tan(math.radians(45.0 + phi / 2.0)) ** 2
    g = gamma * d * kp                    # resistance 3 g z per m of pile

    def f_of(h):                          # depth of zero shear: 1.5 g f^2 = H
        return math.sqrt(h / (1.5 * g))

    def h_yield(moment, lever):
        # H (lever + (2/3) f(H)) = moment; with s = sqrt(H): a s^3 + lever s^2 = moment
        return _cubic_root(2.0 / 3.0 / math.sqrt(1.5 * g), lever, moment) ** 2

    if head == "free":
        h_short = 0.5 * g * length ** 3 / (e + length)
        m_short = h_short * (e + 2.0 / 3.0 * f_of(h_short))
        if my is None:
            return h_short, "short", 0, h_short, math.inf, m_short
        h_long = h_yield(my, e)
        if h_short <= h_long:
            return h_short, "short", 0, h_short, h_long, m_short
        return h_long, "long", 1, h_short, h_long, my
    # fixed head (the cap is at the ground: e is not used)
    h_short = 1.5 * g * length ** 2
    m_head = 2.0 / 3.0 * h_short * length
    if my is None:
        return h_short, "short", 0, h_short, math.inf, m_head
    # long: hinges at the head and at the depth of zero shear: 2 M_y = H (2/3) f
    h_long = h_yield(2.0 * my, 0.0)
    if m_head <= my:
        return h_short, "short", 0, h_short, h_long, m_head
    # intermediate: rotation about the toe with a hinge at the head: H L = 0.5 g L^3 + M_y
    h_int = (0.5 * g * length ** 3 + my) / length
    m_depth = 2.0 / 3.0 * h_int * f_of(h_int) - my if f_of(h_int) < length else 0.0
    if m_depth <= my:
        return h_int, "long", 1, h_short, h_long, my
    return h_long, "long", 2, h_short, h_long, my


def broms_lateral(soil: str, diameter: float, length: float, head: str = "free",
                  eccentricity: float = 0.0, cu: float | None = None,
                  unit_weight: float | None = None, phi: float | None = None,
                  yield_moment: float | None = None) -> BromsResult:
    """Broms (1964) ultimate lateral load (kN) of a single pile.

    soil "cohesive" (``cu`` undrained strength, kPa) or "cohesionless" (``unit_weight`` the
    effective unit weight gamma', kN/m3, and ``phi`` degrees); diameter and embedded length (m);
    head "free" or "fixed"; eccentricity e (m) the height of the load above the ground (free
    head only: Broms' fixed head is a cap at the ground);
    yield_moment M_y (kNm) of the section (None: the section never yields, short mode only).
    """
    if soil not in SOILS:
        raise ValueError(f"soil must be cohesive or cohesionless, got {soil!r}")
    if head not in HEADS:
        raise ValueError(f"head must be free or fixed, got {head!r}")
    d = _positive("diameter", diameter)
    length = _positive("length", length)
    e = _positive("eccentricity", eccentricity, allow_zero=True)
    my = None if yield_moment is None else _positive("yield_moment", yield_moment, allow_zero=True)
    if soil == "cohesive":
        if cu is None:
            raise ValueError("cu is required for cohesive soil")
        out = _broms_cohesive(_positive("cu", cu), d, length, head, e, my)
    else:
        if unit_weight is None or phi is None:
            raise ValueError("unit_weight and phi are required for cohesionless soil")
        phi = _positive("phi", phi)
        if phi >= 60.0:
            raise ValueError(f"phi must be below 60 degrees, got {phi:g}")
        out = _broms_cohesionless(_positive("unit_weight", unit_weight), phi, d, length, head, e, my)
    ultimate, mode, hinges, short, long_, mmax = out
    return BromsResult(ultimate=float(ultimate), mode=mode, hinges=hinges, short=float(short),
                       long=float(long_), max_moment=float(mmax), soil=soil, head=head)


# ------------------------------------------------------------------------------------------
# Beam on Winkler springs
# ------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class WinklerResult:
    """Deflected shape of a laterally loaded pile on linear springs.

    ``depth`` (m below the head), ``deflection`` (m), ``moment`` (kNm, E I y''), ``rotation``
    (rad) arrays at the nodes; ``head_deflection`` (m), ``head_rotation`` (rad), ``max_moment``
    (kNm, largest absolute) and ``max_moment_depth`` (m).
    """

    depth: np.ndarray
    deflection: np.ndarray
    moment: np.ndarray
    rotation: np.ndarray

    @property
    def head_deflection(self) -> float:
        """Deflection at the head (m)."""
        return float(self.deflection[0])

    @property
    def head_rotation(self) -> float:
        """Rotation at the head (rad)."""
        return float(self.rotation[0])

    @property
    def max_moment(self) -> float:
        """Largest absolute bending moment (kNm)."""
        return float(np.max(np.abs(self.moment)))

    @property
    def max_moment_depth(self) -> float:
        """Depth of the largest absolute moment (m)."""
        return float(self.depth[int(np.argmax(np.abs(self.moment)))])


def _spring_array(spring, depth: np.ndarray) -> np.ndarray:
    if callable(spring):
        k = np.asarray(spring(depth), dtype=float) * np.ones_like(depth)
    elif np.ndim(spring) == 0:
        k = np.full_like(depth, _positive("spring", spring, allow_zero=True))
    else:
        k = np.asarray(spring, dtype=float)
        if k.shape != depth.shape:
            raise ValueError(f"spring array must have nodes + 1 = {depth.size} values, got {k.size}")
    if not np.all(np.isfinite(k)) or np.any(k < 0.0):
        raise ValueError("spring must be finite and not negative at every depth")
    if not np.any(k > 0.0):
        raise ValueError("spring must be more than zero somewhere along the pile")
    return k


def _winkler_bands(c: np.ndarray, head: str):
    """Symmetric pentadiagonal FD system (times h^4/EI) for y_0..y_n, ghosts eliminated.

    Interior rows read y_(i-2) - 4 y_(i-1) + (6 + c_i) y_i - 4 y_(i+1) + y_(i+2) = 0 with
    c = k h^4 / EI. Free head: y_-1 = 2y0 - y1 + h^2 M/EI, y_-2 = 4y0 - 4y1 + y2 + 2h^2 M/EI -
    2h^3 H/EI; fixed head: y_-1 = y1, y_-2 = y2 - 2h^3 H/EI; toe: y_(n+1) = 2yn - y_(n-1),
    y_(n+2) = 4yn - 4y_(n-1) + y_(n-2). The first and last rows are halved, which makes the
    system symmetric (it is then the stiffness of a beam on springs: positive definite).
    Returns the diagonal d, first and second off-diagonals e and f.
    """
    n1 = c.size
    d = 6.0 + c
    e = np.full(n1 - 1, -4.0)
    f = np.ones(n1 - 2)
    if head == "free":
        d[0] = 1.0 + c[0] / 2.0
        e[0] = -2.0
        d[1] = 5.0 + c[1]
    else:
        d[0] = 3.0 + c[0] / 2.0
        d[1] = 7.0 + c[1]
    d[-2] = 5.0 + c[-2]
    e[-1] = -2.0
    d[-1] = 1.0 + c[-1] / 2.0
    return d, e, f


def solve_pentadiagonal(d, e, f, rhs):
    """Solve A x = rhs for symmetric positive-definite pentadiagonal A (diagonal d, first and
    second off-diagonals e, f) by LDL^T factorisation without pivoting (stable for SPD).

    rhs is (n,) or (n, k); pure Python loops over the rows: O(n) work, no BLAS threads. The
    loops carry the previous rows in local names (the same operations in the same order as
    ``solve_pentadiagonal_many``, so both give identical numbers).
    """
    d = [float(x) for x in d]
    e = [float(x) for x in e]
    f = [float(x) for x in f]
    r = np.asarray(rhs, dtype=float)
    cols = r.reshape(r.shape[0], -1).T.tolist()
    n = len(d)
    if not (len(e) == n - 1 and len(f) == n - 2 and len(cols[0]) == n):
        raise ValueError("band and right-hand side sizes do not match")
    dd = [0.0] * n
    a = [0.0] * n          # L[i+1, i]
    b = [0.0] * n          # L[i+2, i]
    a1 = b1 = b2 = dd1 = dd2 = 0.0   # a, b of the row before (1) and two before (2), and dd
    for i in range(n):
        di = d[i]
        if i >= 1:
            di -= a1 * a1 * dd1
        if i >= 2:
            di -= b2 * b2 * dd2
        if not di > 0.0:
            raise ValueError("pentadiagonal system is not positive definite")
        dd[i] = di
        ai = bi = 0.0
        if i < n - 1:
            ai = e[i]
            if i >= 1:
                ai -= b1 * a1 * dd1
            ai = a[i] = ai / di
        if i < n - 2:
            bi = b[i] = f[i] / di
        b2, dd2 = b1, dd1
        a1, b1, dd1 = ai, bi, di
    out = []
    for z in cols:
        z1 = z2 = 0.0                 # the forward values of the rows before, not yet divided
        for i in range(n):
            zi = z[i]
            if i >= 1:
                zi -= a[i - 1] * z1
            if i >= 2:
                zi -= b[i - 2] * z2
            z2, z1 = z1, zi
            z[i] = zi / dd[i]
        x1 = x2 = 0.0                 # the solution at the rows after
        for i in range(n - 1, -1, -1):
            xi = z[i]
            if i <= n - 2:
                xi -= a[i] * x1
            if i <= n - 3:
                xi -= b[i] * x2
            x2, x1 = x1, xi
            z[i] = xi
        out.append(z)
    x = np.array(out).T
    return x.reshape(r.shape)


def _winkler_system(ei: float, length: float, spring, head: str, nodes: int):
    """(depth, d, e, f, rhs) of the unit-load system: see ``winkler_unit_responses``."""
    ei = _positive("ei", ei)
    length = _positive("length", length)
    if head not in HEADS:
        raise ValueError(f"head must be free or fixed, got {head!r}")
    if isinstance(nodes, bool) or not isinstance(nodes, (int, np.integer)) or not 8 <= nodes <= 5000:
        raise ValueError(f"nodes must be a whole number from 8 to 5000, got {nodes!r}")
    k = _spring_array(spring, np.linspace(0.0, length, nodes + 1))
    # A pile much stiffer than its springs makes the system nearly singular (a free body on
    # soft springs) and round-off grows as (EI / k h^4). Keep k h^4 / EI >= 1e-10 by using
    # fewer, longer intervals; such a pile is near rigid, which coarse meshes represent well.
    k_mean = float(np.mean(k))
    if k_mean > 0.0:
        h_min = (MIN_STIFFNESS_RATIO * ei / k_mean) ** 0.25
        fewer = max(MIN_NODES, int(length / h_min))
        if fewer < nodes:
            nodes = fewer
            k = _spring_array(spring, np.linspace(0.0, length, nodes + 1))
    depth = np.linspace(0.0, length, nodes + 1)
    h = length / nodes
    d, e, f = _winkler_bands(k * h ** 4 / ei, head)
    rhs = np.zeros((nodes + 1, 2))
    rhs[0, 0] = h ** 3 / ei                          # unit H (first row halved)
    if head == "free":
        rhs[0, 1] = h ** 2 / ei                      # unit M
        rhs[1, 1] = -h ** 2 / ei
    return depth, d, e, f, rhs


def winkler_unit_responses(ei: float, length: float, spring, head: str = "free",
                           nodes: int = 200):
    """Depth (m) and the deflections (m) for a unit head shear (1 kN) and a unit head moment
    (1 kNm), as two columns; the system is linear so any load is a sum of these."""
    depth, d, e, f, rhs = _winkler_system(ei, length, spring, head, nodes)
    return depth, solve_pentadiagonal(d, e, f, rhs)


def solve_pentadiagonal_many(d, e, f, rhs) -> np.ndarray:
    """Solve m systems of one size at once: d (m, n), e (m, n - 1), f (m, n - 2), rhs (m, n, k).

    The steps of ``solve_pentadiagonal`` (LDL^T without pivoting, for symmetric positive-definite
    bands), each made on all m systems together, so the Python loop runs over the n rows once
    rather than once per system. Returns x (m, n, k). ValueError if any system is not positive
    definite.
    """
    d = np.asarray(d, dtype=float).T                # (n, m): one row of every system at a time
    e = np.asarray(e, dtype=float).T
    f = np.asarray(f, dtype=float).T
    z = np.array(np.swapaxes(np.asarray(rhs, dtype=float), 0, 1))   # (n, m, k), a copy
    n = d.shape[0]
    if not (e.shape[0] == n - 1 and f.shape[0] == n - 2 and z.shape[0] == n
            and e.shape[1:] == f.shape[1:] == d.shape[1:] == z.shape[1:2]):
        raise ValueError("band and right-hand side sizes do not match")
    dd = np.empty_like(d)
    a = np.zeros_like(d)          # L[i+1, i]
    b = np.zeros_like(d)          # L[i+2, i]
    for i in range(n):
        di = d[i].copy()
        if i >= 1:
            di -= a[i - 1] * a[i - 1] * dd[i - 1]
        if i >= 2:
            di -= b[i - 2] * b[i - 2] * dd[i - 2]
        if not np.all(di > 0.0):
            raise ValueError("pentadiagonal system is not positive definite")
        dd[i] = di
        if i < n - 1:
            ai = e[i].copy()
            if i >= 1:
                ai -= b[i - 1] * a[i - 1] * dd[i - 1]
            a[i] = ai / di
        if i < n - 2:
            b[i] = f[i] / di
    for i in range(1, n):
        z[i] -= a[i - 1, :, None] * z[i - 1]
        if i >= 2:
            z[i] -= b[i - 2, :, None] * z[i - 2]
    z /= dd[:, :, None]
    for i in range(n - 2, -1, -1):
        z[i] -= a[i, :, None] * z[i + 1]
        if i <= n - 3:
            z[i] -= b[i, :, None] * z[i + 2]
    return np.swapaxes(z, 0, 1)


SOLVE_TOGETHER_MIN = 16   # measured: 12-16 systems of 101 rows take as long either way (tests/perf)


def winkler_unit_responses_many(cases) -> list:
    """``winkler_unit_responses`` of many piles: ``cases`` is a sequence of (ei, length, spring,
    head, nodes); returns [(depth, deflections)] in the same order, the same numbers as one call
    per case. Systems of one size are solved together (``solve_pentadiagonal_many``)."""
    systems = [_winkler_system(*case) for case in cases]
    by_size: dict[int, list[int]] = {}
    for j, system in enumerate(systems):
        by_size.setdefault(system[1].size, []).append(j)
    out: list = [None] * len(systems)
    for members in by_size.values():
        if len(members) < SOLVE_TOGETHER_MIN:   # fewer than this are quicker one at a time
            for j in members:
                depth, d, e, f, rhs = systems[j]
                out[j] = (depth, solve_pentadiagonal(d, e, f, rhs))
            continue
        y = solve_pentadiagonal_many(
            np.stack([systems[j][1] for j in members]), np.stack([systems[j][2] for j in members]),
            np.stack([systems[j][3] for j in members]), np.stack([systems[j][4] for j in members]))
        for row, j in enumerate(members):
            out[j] = (systems[j][0], np.ascontiguousarray(y[row]))
    return out


def winkler_pile(ei: float, length: float, spring, shear: float, moment: float = 0.0,
                 head: str = "free", nodes: int = 200) -> WinklerResult:
    """Laterally loaded pile on linear Winkler springs, by finite differences.

    ei flexural rigidity (kNm2); length (m); spring the lateral stiffness per unit length of
    pile k = k_h D (kN/m per m): a number, an array of nodes + 1 values at the nodes, or a
    function of depth below the head (m) returning them; shear H (kN) and moment M (kNm) at the
    head (M is ignored, and the head moment is a result, when head is "fixed"); nodes the number
    of equal intervals (fewer are used for a pile so stiff against its springs that the system
    would lose precision, k h^4 / EI < 1e-10; the result's ``depth`` shows the nodes used).
    The symmetric pentadiagonal system is solved by ``solve_pentadiagonal`` (LDL^T, O(n)).
    """
    if head == "fixed":
        moment = 0.0
    shear = float(shear)
    moment = float(moment)
    if not (math.isfinite(shear) and math.isfinite(moment)):
        raise ValueError("shear and moment must be finite numbers")
    depth, unit = winkler_unit_responses(ei, length, spring, head, nodes)
    y = unit[:, 0] * shear + unit[:, 1] * moment
    return winkler_result(depth, y, ei, head, shear, moment)


def winkler_result(depth: np.ndarray, y: np.ndarray, ei: float, head: str, shear: float,
                   moment: float) -> WinklerResult:
    """The WinklerResult for nodal deflections ``y`` (m) at ``depth`` (m, equal steps), with the
    head loads that produced them (moment E I y'' and rotation y' by central differences)."""
    h = depth[1] - depth[0]
    n = y.size
    ypad = np.empty(n + 2)
    ypad[1:-1] = y
    if head == "free":
        ypad[0] = 2.0 * y[0] - y[1] + h * h * moment / ei
    else:
        ypad[0] = y[1]
    ypad[-1] = 2.0 * y[-1] - y[-2]
    curvature = (ypad[:-2] - 2.0 * ypad[1:-1] + ypad[2:]) / (h * h)
    rotation = (ypad[2:] - ypad[:-2]) / (2.0 * h)
    return WinklerResult(depth=depth, deflection=y, moment=ei * curvature, rotation=rotation)
