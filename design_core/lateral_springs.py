"""The lateral analysis of one pile in its ground: geometry, Winkler spring segments and the
kept Winkler solves (beside ``design_core.lateral``, which holds the methods).

``lateral_geometry`` picks the soil layer Broms takes and rounds the lengths on the safe side;
``spring_segments`` gives the springs layer by layer down to the toe; ``winkler_inputs`` is
everything the solve uses, as a key; ``winkler_solve`` solves one system (kept in
``MEMO.winkler``) and ``solve_together`` solves many distinct systems at once into the same
store (the same numbers as one by one). Depths in m below the pile head, levels in m, springs
in kN/m per m of pile, EI in kNm2.
"""

from __future__ import annotations

import math

import numpy as np

from design_core.ground import LEVEL_TOL_M
from design_core.lateral import (
    SOLVE_TOGETHER_MIN, winkler_unit_responses, winkler_unit_responses_many,
)
from design_core.memo import MEMO

LATERAL_STEP_M = 0.05      # lateral geometry rounded to this, on the safe side
WINKLER_NODES = 50         # the first mesh; halved until the head deflection settles
WINKLER_MAX_NODES = 1600
WINKLER_SETTLED = 0.005    # the head deflection changes by less than 0.5 % on halving the mesh


class NoLateralSoil(ValueError):
    """The lateral check cannot be made in this ground; the message says why."""


def lateral_geometry(pile):
    """Soil layer and lengths of the lateral check, rounded on the safe side.

    ``pile`` carries ``ground``, ``cutoff`` (m) and ``toe`` (m) (an ``AsBuiltPile``). The soil
    is the first cohesive or cohesionless layer at or below the top of the pile (layers of
    material "ignore" above it are free length). Its top of resistance z_top is rounded up,
    the free length (cut-off down to z_top) up and the embedded length (z_top down to the toe)
    down, each to ``LATERAL_STEP_M``: a longer lever and a shorter embedment give less
    resistance, and piles within 50 mm of each other share one analysis. Returns (layer index,
    z_top, free, embedded); raises NoLateralSoil.
    """
    g = pile.ground
    top = min(pile.cutoff, g.top)
    layers = g.layers
    i = 0
    while i < len(layers) - 1 and layers[i].bottom >= top:   # the layer holding top
        i += 1
    while i < len(layers) and layers[i].material == "ignore":
        i += 1
    if i >= len(g.layers) or g.layers[i].bottom >= top:
        raise NoLateralSoil("No cohesive or cohesionless layer below the top of the pile for the "
                            "lateral check")
    layer = g.layers[i]
    if layer.material == "rock":
        raise NoLateralSoil("Rock at the top of the pile: Broms and the soil springs do not "
                            "apply; the engineer assesses the lateral check")
    step = LATERAL_STEP_M
    z_top = min(layer.top, math.ceil(min(top, layer.top) / step - 1e-9) * step)
    free = max(0.0, math.ceil((pile.cutoff - z_top) / step - 1e-9) * step)
    embedded = math.floor((z_top - pile.toe) / step + 1e-9) * step
    if embedded <= 0.0:
        raise NoLateralSoil("The as-built toe is above the soil that resists lateral load")
    return i, round(z_top, 6), round(free, 6), round(embedded, 6)


def spring_segments(pile, geometry) -> tuple:
    """The Winkler springs along the embedded length, layer by layer, as a tuple of
    (start m, end m, k at start kN/m per m, slope kN/m per m per m, layer index), depths below
    the pile head.

    From the top of the resisting soil (``z_top``) down to the rounded toe, each layer gives
    springs by its own material: cohesive k = spring_per_cu x c_u(z) (c_u linear within the
    layer, Davisson 1970); cohesionless k = n_h x (depth below z_top) (Terzaghi 1955); rock and
    ignored layers none, which can only make the head deflection larger (a softer support never
    stiffens a linear beam on springs): the engineer judges a rock socket. ``pile`` carries
    ``ground`` and ``rules``.
    """
    rules = pile.rules
    i, z_top, free, embedded = geometry
    toe = z_top - embedded
    segments = []
    for index, layer in enumerate(pile.ground.layers[i:], start=i):
        top, bottom = min(layer.top, z_top), max(layer.bottom, toe)
        if top - bottom > LEVEL_TOL_M and layer.material in ("cohesive", "cohesionless"):
            start, end = round(free + z_top - top, 6), round(free + z_top - bottom, 6)
            if layer.material == "cohesive":
                k_top = rules.spring_per_cu * layer.cu_at(top)
                k_bottom = rules.spring_per_cu * layer.cu_at(bottom)
                segments.append((start, end, k_top, (k_bottom - k_top) / (end - start), index))
            else:
                nh = rules.spring_nh_sand
                segments.append((start, end, nh * (start - free), nh, index))
        if layer.bottom <= toe + LEVEL_TOL_M:
            break
    return tuple(segments)


def winkler_inputs(pile, geometry) -> tuple:
    """Everything ``winkler_solve`` uses, as a key: (springs, free, embedded, diameter m,
    f'_c MPa, EI factor, head)."""
    rules = pile.rules
    _, _, free, embedded = geometry
    return (spring_segments(pile, geometry), free, embedded, pile.diameter, pile.fc_mpa,
            rules.ei_cracked_factor, pile.design.head)


def winkler_case(springs: tuple, free: float, embedded: float, diameter: float,
                 fc_mpa: float, ei_factor: float, head: str, nodes: int = WINKLER_NODES) -> tuple:
    """(ei, length, spring, head, nodes) for ``winkler_unit_responses`` from the inputs of
    ``winkler_inputs``: ``springs`` the segments of ``spring_segments`` (none outside them; at
    a boundary the segment below), EI = factor x E_c I_g (kNm2), E_c = 4700 sqrt(f'_c) MPa
    (ACI 318-19 19.2.2.1(b))."""
    starts = np.array([seg[0] for seg in springs], dtype=float)
    ends = np.array([seg[1] for seg in springs], dtype=float)
    k_start = np.array([seg[2] for seg in springs], dtype=float)
    slope = np.array([seg[3] for seg in springs], dtype=float)

    def spring(z):
        z = np.asarray(z, dtype=float)
        j = np.searchsorted(starts, z + 1e-9, side="right") - 1
        jj = np.clip(j, 0, max(len(starts) - 1, 0))
        if not len(starts):
            return np.zeros_like(z)
        k = k_start[jj] + slope[jj] * (z - starts[jj])
        inside = (j >= 0) & (z <= ends[jj] + 1e-9)
        return np.where(inside, np.maximum(k, 0.0), 0.0)

    ec = 4700.0 * math.sqrt(fc_mpa) * 1000.0          # kPa
    ei = ei_factor * ec * math.pi * diameter ** 4 / 64.0
    return ei, free + embedded, spring, head, nodes


def _frozen(depth, unit, ei):
    depth.setflags(write=False)
    unit.setflags(write=False)
    return depth, unit, ei


def _settled(coarse, fine) -> bool:
    """True when the head deflections per unit H and per unit M (m) of two meshes differ by
    less than ``WINKLER_SETTLED`` of the finer one's."""
    a, b = coarse[1][0], fine[1][0]
    for j in range(b.size):
        if abs(b[j]) > 0.0 and abs(a[j] - b[j]) > WINKLER_SETTLED * abs(b[j]):
            return False
    return True


def winkler_solve(key: tuple):
    """(depth m, head deflections per unit H and M in m, EI kNm2) of the system ``key``
    (``winkler_inputs``), kept in ``MEMO.winkler``; the arrays are read-only.

    The mesh starts at ``WINKLER_NODES`` intervals and is halved until the head deflection
    changes by less than ``WINKLER_SETTLED`` (0.5 %), up to ``WINKLER_MAX_NODES``; the finer
    mesh's result is kept (finite differences converge as h^2, so it is the nearer).
    """
    def solve(nodes):
        case = winkler_case(*key, nodes=nodes)
        depth, unit = winkler_unit_responses(*case)
        return depth, unit, case[0]

    def make():
        nodes = WINKLER_NODES
        prev = solve(nodes)
        while True:
            nodes *= 2
            cur = solve(nodes)
            if nodes >= WINKLER_MAX_NODES or _settled(prev, cur):
                return _frozen(*cur)
            prev = cur
    return MEMO.winkler.get(key, make)


def solve_together(keys) -> None:
    """Solve the distinct systems ``keys`` not yet kept, together
    (``winkler_unit_responses_many``), into ``MEMO.winkler``, refining each mesh as
    ``winkler_solve`` does: the same numbers as one by one. Fewer than ``SOLVE_TOGETHER_MIN``
    are left to ``winkler_solve``; a batch the solver refuses is left for each check to solve
    and report."""
    pending = [k for k in dict.fromkeys(keys) if MEMO.winkler.find(k) is None]
    if len(pending) < SOLVE_TOGETHER_MIN:
        return

    def batch(which, nodes):
        cases = [winkler_case(*key, nodes=nodes) for key in which]
        solved = winkler_unit_responses_many(cases)
        return {key: (depth, unit, case[0])
                for key, case, (depth, unit) in zip(which, cases, solved, strict=True)}

    try:
        nodes = WINKLER_NODES
        prev = batch(pending, nodes)
        while pending:
            nodes *= 2
            cur = batch(pending, nodes)
            done = [k for k in pending if nodes >= WINKLER_MAX_NODES or _settled(prev[k], cur[k])]
            for k in done:
                MEMO.winkler.put(k, _frozen(*cur[k]))
            pending = [k for k in pending if k not in set(done)]
            prev = cur
    except ValueError:
        return
