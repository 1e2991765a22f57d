"""Group capacity of the piles of one cap: the lesser of the single piles and block failure in clay.

Block failure (the group and the clay between its piles pushed down as one block):

    Q_block = 2 D_b (B + L) c_u,avg + N_c c_u,base B L
    N_c     = 5 (1 + 0.2 D_b/B) (1 + 0.2 B/L),  D_b/B taken at most 2.5, N_c <= block_nc_max (9)

with B <= L the plan sides of the block to the outer edges of the piles, D_b the depth of the
block (from the underside of the cap, or the top of the clay that counts, to the toe),
c_u,avg the mean undrained strength along the block's sides and c_u,base the strength at the
base of the block. Source: Skempton (1951) for N_c, as given in course notes (found,
secondary); the block formula is the one in Tomlinson, *Pile Design and Construction Practice*
and Das, *Principles of Foundation Engineering* (from memory). The D_b/B cap at 2.5 is
Skempton's (from memory) and only lowers N_c, so it errs safe.

On as-built positions the block is the smallest rectangle (in capacity) that encloses the pile
circles: the rectangle is tried square to every direction between two piles and the lowest
capacity kept, which is no higher than that of the rectangle square to the grid.

Group efficiency eta = Q_block / sum of the single ultimate capacities (<= 1 when the block
governs). The group check: the cap's load against min(sum of the single piles' design
resistances, Q_block / block_fs) (working stress) or min(sum, phi_g Q_block) (limit state).

Units: positions and lengths m, c_u kPa, forces kN.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from design_core.checks import Check
from design_core.rules import Rules
from design_core.validate import number

CODES = ("group_capacity",)


def skempton_nc(depth: float, b: float, l: float, nc_max: float = 9.0) -> float:
    """Skempton's (1951) N_c = 5 (1 + 0.2 D/B)(1 + 0.2 B/L), D/B <= 2.5, N_c <= nc_max.

    depth D (m, >= 0), b and l the plan sides (m, > 0; swapped so that B <= L).
    """
    number("depth", depth, 0.0, 1000.0)
    number("b", b, 1e-6, 1000.0)
    number("l", l, 1e-6, 1000.0)
    b, l = min(b, l), max(b, l)
    return min(nc_max, 5.0 * (1.0 + 0.2 * min(depth / b, 2.5)) * (1.0 + 0.2 * b / l))


def block_capacity(b: float, l: float, depth: float, cu_avg: float, cu_base: float,
                   nc_max: float = 9.0) -> float:
    """Ultimate block capacity Q_block (kN) = 2 D (B + L) c_u,avg + N_c c_u,base B L.

    b, l plan sides (m); depth D_b (m, 0-500); cu_avg, cu_base (kPa, 0.5-5000).
    """
    number("cu_avg", cu_avg, 0.5, 5000.0)
    number("cu_base", cu_base, 0.5, 5000.0)
    nc = skempton_nc(depth, b, l, nc_max)
    return 2.0 * depth * (b + l) * cu_avg + nc * cu_base * b * l


@dataclass(frozen=True)
class GroupInput:
    """One cap for the group check.

    xy: pile positions as built (m, k x 2, at least 2 piles); diameter (m, 0.1-5); depth of the
    block D_b (m, > 0); cu_avg along the sides and cu_base at the toe (kPa); cap_load: the
    cap's vertical load (kN, as the rules' ``loads_are``); single_design: sum of the single
    piles' design resistances (kN); single_ultimate: sum of their ultimate capacities (kN, for
    the efficiency; None to leave it out).
    """

    xy: tuple[tuple[float, float], ...]
    diameter: float
    depth: float
    cu_avg: float
    cu_base: float
    cap_load: float
    single_design: float
    single_ultimate: float | None = None

    def __post_init__(self):
        pts = np.asarray(self.xy, dtype=float)
        if pts.ndim != 2 or pts.shape[1] != 2 or pts.shape[0] < 2:
            raise ValueError(f"xy must hold at least 2 (x, y) positions, got shape {pts.shape}")
        if not np.all(np.isfinite(pts)):
            raise ValueError("xy must hold finite positions")
        object.__setattr__(self, "xy", tuple((float(x), float(y)) for x, y in pts))
        number("diameter", self.diameter, 0.1, 5.0)
        number("depth", self.depth, 0.01, 500.0)
        number("cu_avg", self.cu_avg, 0.5, 5000.0)
        number("cu_base", self.cu_base, 0.5, 5000.0)
        number("cap_load", self.cap_load, 0.0, 1e7)
        number("single_design", self.single_design, 0.0, 1e7)
        number("single_ultimate", self.single_ultimate, 0.0, 1e8, optional=True)


@dataclass(frozen=True)
class GroupResult:
    """Block sides B <= L (m), its direction (degrees from the x axis), N_c, Q_block and its
    design value (kN), the governing design resistance (kN), efficiency (None without the
    single ultimate) and the reason."""

    b: float
    l: float
    angle_deg: float
    nc: float
    block_ultimate: float
    block_design: float
    group_design: float
    efficiency: float | None
    block_governs: bool
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def _directions(pts: np.ndarray) -> list[float]:
    """Candidate block directions (radians): the grid axes and every pile-to-pile direction."""
    out = [0.0]
    for i in range(len(pts)):
        for j in range(i + 1, len(pts)):
            d = pts[j] - pts[i]
            if math.hypot(*d) > 1e-9:
                out.append(math.atan2(d[1], d[0]) % (math.pi / 2.0))
    return sorted(set(round(a, 12) for a in out))


def group_capacity(inp: GroupInput, rules: Rules | None = None) -> GroupResult:
    """Block failure and the group's design resistance (module docstring)."""
    rules = rules or Rules()
    pts = np.asarray(inp.xy, dtype=float)
    best = None
    for a in _directions(pts):
        u = np.array([math.cos(a), math.sin(a)])
        v = np.array([-u[1], u[0]])
        su, sv = pts @ u, pts @ v
        s1 = float(su.max() - su.min()) + inp.diameter
        s2 = float(sv.max() - sv.min()) + inp.diameter
        q = block_capacity(s1, s2, inp.depth, inp.cu_avg, inp.cu_base, rules.block_nc_max)
        if best is None or q < best[0] - 1e-9:
            best = (q, min(s1, s2), max(s1, s2), a)
    q, b, l, a = best
    nc = skempton_nc(inp.depth, b, l, rules.block_nc_max)
    if rules.design_approach == "limit_state":
        block_design, how = rules.phi_g * q, f"phi_g {rules.phi_g:g}"
    else:
        block_design, how = q / rules.block_fs, f"FS {rules.block_fs:g}"
    governs = block_design < inp.single_design
    design = min(block_design, inp.single_design)
    eff = None if not inp.single_ultimate else q / inp.single_ultimate
    reason = (f"block {b:.2f} x {l:.2f} m x {inp.depth:.1f} m deep, N_c {nc:.2f}, Q_block {q:.0f} "
              f"kN ({how}: {block_design:.0f} kN) against the single piles {inp.single_design:.0f}"
              f" kN: {'block' if governs else 'single piles'} govern"
              + (f"; efficiency {eff:.2f}" if eff is not None else ""))
    return GroupResult(b, l, math.degrees(a), nc, q, block_design, design, eff, governs, reason)


def group_capacity_check(inp: GroupInput | None, rules: Rules | None = None,
                         missing: str = "") -> Check:
    """The ``group_capacity`` check: the cap's load against the group's design resistance (kN).

    ``inp=None``: not checked (``missing`` says why, e.g. "no cohesive ground at the block").
    """
    if inp is None:
        return Check.not_checked("group_capacity", "kN", missing or "group inputs not given")
    res = group_capacity(inp, rules)
    util = inp.cap_load / res.group_design if res.group_design > 0 else math.inf
    return Check("group_capacity", inp.cap_load, res.group_design, "kN", util, util <= 1.0,
                 f"cap load {inp.cap_load:.0f} kN against {res.group_design:.0f} kN: {res.reason}")
