"""Axial capacity of a single pile straight from a cone penetration test (CPT) sounding.

Units: depths in m below the sounding's ground level, levels in m (higher is up), q_c and q_E in
MPa, f_s (sleeve friction and unit shaft resistance) and u_2 in kPa, forces in kN, D in m.

Methods (the rules' ``cpt_method``)
-----------------------------------
* **LCPC** (Bustamante & Gianeselli 1982, "Pile bearing capacity prediction by means of static
  penetrometer CPT", Proc. 2nd European Symposium on Penetration Testing, Amsterdam):

  - base q_b = k_c q_ca, q_ca the mean of the readings from 1.5 D above to 1.5 D below the
    toe after the readings outside 0.7-1.3 times that first mean are dropped and the rest
    averaged again (``lcpc_base_average``); k_c by pile group and the category of the soil
    nature at the toe in the q_c band of q_ca;
  - shaft f_s = min(q_c / alpha, f_max) at every reading, alpha and f_max by soil category and
    pile category. The table (``LCPC_TABLE``) is from memory; check it against the paper.

* **Eslami & Fellenius** (1997, "Pile capacity by direct CPT and CPTu methods applied to 102
  case histories", Can. Geotech. J. 34: 886-904):

  - corrected cone resistance q_t = q_c + u_2 (1 - a) (a = ``cone_area_ratio``) and the
    effective cone resistance q_E = q_t - u_2 (u_2 required);
  - toe r_t = C_t q_Eg, q_Eg the geometric mean of q_E from 8 D above to 4 D below the toe;
    C_t = 1, and 1/(3 D) (D in m) above ``ef_ct_diameter_m`` (from memory);
  - shaft f = C_s q_E with C_s by the soil zone of each reading. The zone is given by layer or
    read from the ratio f_s/q_E, a simplification of the paper's profiling chart to lines of
    constant ratio (thresholds in the rules, from memory; zone 1 is never assigned from it).

Both: the shaft counts from ``exclusion_diameters`` x D below ``top_level`` (as
``design_core.axial``), nothing above the first reading, the unit resistance linear between
readings (an exact integral held as cumulative sums); window averages are over the readings in
the window; design resistance by the rules' design approach, as ``design_core.axial``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any, Sequence

import numpy as np
from numpy.lib.stride_tricks import sliding_window_view

from design_core.axial import CapacityCurve, _approach_text, _design, pile_area
from design_core.inputs import LEVEL_LIMIT_M, PILE_TYPES
from design_core.rules import Rules
from design_core.validate import number

CPT_METHODS = ("lcpc", "eslami_fellenius")
NATURES = ("clay", "silt", "sand", "gravel", "chalk", "sensitive")
# LCPC pile group II (displacement, driven). Bored, CFA and screw piles are group I: the paper
# lists cast screwed piles with the bored ones (from memory), which is also the lower value.
LCPC_GROUP_II = ("driven",)
DIAMETER_RANGE_M = (0.1, 5.0)
DEPTH_MAX_M = 200.0
QC_RANGE_MPA = (0.0, 150.0)
FS_RANGE_KPA = (0.0, 5_000.0)
U2_RANGE_KPA = (-1_000.0, 20_000.0)
QE_FLOOR_MPA = 0.01  # q_E at or below 0 is taken as this in the geometric mean (errs low)
DEPTH_TOL_M = 1e-6


@dataclass(frozen=True)
class LcpcCategory:
    """One soil category of the LCPC table.

    ``kc_i``/``kc_ii``: base factor k_c for pile group I (bored, CFA, screw) and II (driven);
    ``alpha_i``/``alpha_ii``: shaft divisor alpha (q_c / alpha); ``fmax_i_kpa``/``fmax_ii_kpa``:
    the shaft limit f_max (kPa). Pile categories IA and IIA of the paper's shaft table.
    """

    name: str
    kc_i: float
    kc_ii: float
    alpha_i: float
    alpha_ii: float
    fmax_i_kpa: float
    fmax_ii_kpa: float


LCPC_SOURCE = (
    "Bustamante & Gianeselli (1982), tables of k_c, alpha and f_max, as reproduced in textbooks "
    "(values from memory; check against the paper). Pile group I / category IA: bored, CFA, "
    "screw; group II / category IIA: driven.")

# The index order is the one of _BANDS below.
LCPC_TABLE = (
    LcpcCategory("soft clay and mud (q_c < 1 MPa)", 0.40, 0.50, 30, 30, 15, 15),
    LcpcCategory("moderately compact clay (q_c 1-5 MPa)", 0.35, 0.45, 40, 40, 35, 35),
    LcpcCategory("silt and loose sand (q_c <= 5 MPa)", 0.40, 0.50, 60, 60, 35, 35),
    LcpcCategory("compact to stiff clay and compact silt (q_c > 5 MPa)", 0.45, 0.55, 60, 60, 35, 35),
    LcpcCategory("soft chalk (q_c <= 5 MPa)", 0.20, 0.30, 100, 100, 35, 35),
    LcpcCategory("moderately compact sand and gravel (q_c 5-12 MPa)", 0.40, 0.50, 100, 100, 80, 80),
    LcpcCategory("weathered to fragmented chalk (q_c > 5 MPa)", 0.20, 0.40, 60, 60, 120, 120),
    LcpcCategory("compact to very compact sand, gravel (q_c > 12 MPa)", 0.30, 0.40, 150, 150, 120, 120),
)

EF_ZONES = {1: "sensitive and collapsible clay and silt", 2: "clay", 3: "silty clay, stiff clay and "
            "silt", 4: "sandy silt and silt", 5: "fine to coarse sand"}


# --------------------------------------------------------------------------------------------
# Input
# --------------------------------------------------------------------------------------------

def _readings(name: str, values: Any, n: int | None, lo: float, hi: float,
              ref: str = "depths_m") -> np.ndarray:
    """A read-only 1-D float array of ``n`` finite readings in [lo, hi] (``n`` the length of the
    array named ``ref``); ValueError naming the field, the value and the range."""
    try:
        arr = np.array(values, dtype=float)
    except (TypeError, ValueError):
        raise ValueError(f"{name} must be a list of numbers") from None
    if arr.ndim != 1 or arr.size == 0:
        raise ValueError(f"{name} must be a non-empty list of numbers")
    if n is not None and arr.size != n:
        raise ValueError(f"{name} has {arr.size} values, {ref} has {n}")
    bad = np.flatnonzero(~np.isfinite(arr) | (arr < lo) | (arr > hi))
    if bad.size:
        k = int(bad[0])
        raise ValueError(f"{name}[{k}] must be between {lo:g} and {hi:g}, got {arr[k]:g}")
    arr.setflags(write=False)
    return arr


@dataclass(frozen=True, eq=False)
class Sounding:
    """One CPT sounding: its name, plan position (m), ground level (m) and readings.

    ``depths_m`` (m below ``ground_level``, 0-200, strictly increasing), ``qc_mpa`` cone
    resistance (MPa, 0-150), ``fs_kpa`` sleeve friction (kPa, 0-5000), ``u2_kpa`` pore pressure
    behind the cone (kPa, -1000 to 20000) or None when not measured. Stored as read-only arrays.
    """

    name: str
    easting: float
    northing: float
    ground_level: float
    depths_m: Any
    qc_mpa: Any
    fs_kpa: Any
    u2_kpa: Any = None

    def __post_init__(self):
        if not isinstance(self.name, str) or not 1 <= len(self.name.strip()) <= 60:
            raise ValueError(f"name must be 1-60 characters, got {self.name!r}")
        set_ = object.__setattr__
        set_(self, "easting", number("easting", self.easting, -1e8, 1e8))
        set_(self, "northing", number("northing", self.northing, -1e8, 1e8))
        set_(self, "ground_level", number("ground_level", self.ground_level, -LEVEL_LIMIT_M,
                                          LEVEL_LIMIT_M))
        depths = _readings("depths_m", self.depths_m, None, 0.0, DEPTH_MAX_M)
        if depths.size < 2:
            raise ValueError("depths_m must hold at least 2 readings")
        steps = np.diff(depths)
        if np.any(steps <= 0.0):
            k = int(np.flatnonzero(steps <= 0.0)[0]) + 1
            raise ValueError(f"depths_m must increase: depths_m[{k}] ({depths[k]:g} m) is not "
                             f"below depths_m[{k - 1}] ({depths[k - 1]:g} m)")
        set_(self, "depths_m", depths)
        set_(self, "qc_mpa", _readings("qc_mpa", self.qc_mpa, depths.size, *QC_RANGE_MPA))
        set_(self, "fs_kpa", _readings("fs_kpa", self.fs_kpa, depths.size, *FS_RANGE_KPA))
        if self.u2_kpa is not None:
            set_(self, "u2_kpa", _readings("u2_kpa", self.u2_kpa, depths.size, *U2_RANGE_KPA))

    @property
    def levels(self) -> np.ndarray:
        """Levels of the readings (m), top down."""
        return self.ground_level - self.depths_m

    def distance_to(self, easting: float, northing: float) -> float:
        """Plan distance (m) from the sounding to a point (m)."""
        return math.hypot(self.easting - easting, self.northing - northing)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (readings as lists)."""
        return {"name": self.name, "easting": self.easting, "northing": self.northing,
                "ground_level": self.ground_level,
                "depths_m": self.depths_m.tolist(), "qc_mpa": self.qc_mpa.tolist(),
                "fs_kpa": self.fs_kpa.tolist(),
                "u2_kpa": None if self.u2_kpa is None else self.u2_kpa.tolist()}


def nearest_sounding(soundings: Sequence[Sounding], easting: float, northing: float,
                     rules: Rules | None = None) -> tuple[Sounding | None, float | None]:
    """The sounding nearest in plan to (easting, northing) (m) within ``sounding_distance_m``.

    Returns (sounding, distance in m), or (None, distance to the nearest) when none lies within
    the rules' distance, or (None, None) when there are no soundings. Ties: the first listed.
    """
    rules = rules or Rules()
    easting, northing = number("easting", easting), number("northing", northing)
    best, best_d = None, None
    for s in soundings:
        d = s.distance_to(easting, northing)
        if best_d is None or d < best_d:
            best, best_d = s, d
    if best is None or best_d > rules.sounding_distance_m:
        return None, best_d
    return best, best_d


# --------------------------------------------------------------------------------------------
# Piecewise-linear profiles: exact integrals from cumulative sums
# --------------------------------------------------------------------------------------------

def cumulative_integral(depths: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Integral of the piecewise-linear profile from ``depths[0]`` to each depth (trapezoids)."""
    return np.concatenate([[0.0], np.cumsum(0.5 * (values[1:] + values[:-1]) * np.diff(depths))])


def integral_to(depths: np.ndarray, values: np.ndarray, cum: np.ndarray,
                d: np.ndarray) -> np.ndarray:
    """Integral of the piecewise-linear profile from ``depths[0]`` to depths ``d`` (exact).

    Zero above the first depth; held at the last depth's total below it (callers keep ``d``
    within the profile).
    """
    d = np.clip(d, depths[0], depths[-1])
    i = np.clip(np.searchsorted(depths, d, side="right") - 1, 0, depths.size - 2)
    t = d - depths[i]
    slope = (values[i + 1] - values[i]) / (depths[i + 1] - depths[i])
    return cum[i] + values[i] * t + 0.5 * slope * t * t


def _window_bounds(depths: np.ndarray, lo: np.ndarray, hi: np.ndarray):
    """Index bounds [a, b) of the readings with lo <= depth <= hi (tolerant to rounding)."""
    a = np.searchsorted(depths, lo - DEPTH_TOL_M, side="left")
    b = np.searchsorted(depths, hi + DEPTH_TOL_M, side="right")
    return a, b


# --------------------------------------------------------------------------------------------
# LCPC
# --------------------------------------------------------------------------------------------

def _lcpc_qca(depths: np.ndarray, qc: np.ndarray, toes: np.ndarray, half: float,
              lo_frac: float, hi_frac: float) -> np.ndarray:
    """LCPC clipped mean q_ca (MPa) at each toe depth, window +-``half`` (m), vectorised.

    The first mean from cumulative sums; then one row of readings per toe (a strided view of
    the readings, zero-padded past the last; every column past a row's own window is cut from
    the mask) and the kept readings summed row by row, so there is no Python loop per toe.
    """
    a, b = _window_bounds(depths, toes - half, toes + half)
    n = b - a
    if np.any(n <= 0):
        raise ValueError("a toe window holds no reading: the sounding is too sparse there")
    cum = np.concatenate([[0.0], np.cumsum(qc)])
    first = (cum[b] - cum[a]) / n
    short, width = int(n.min()), int(n.max())
    rows = sliding_window_view(np.concatenate([qc, np.zeros(width)]), width)[a]
    keep = rows >= (lo_frac * first)[:, None]
    keep &= rows <= (hi_frac * first)[:, None]
    if short < width:  # every column past a row's own window is masked (padding included)
        keep[:, short:] &= np.arange(short, width)[None, :] < n[:, None]
    kept = keep.view(np.uint8)
    count = kept.sum(axis=1, dtype=np.int64)
    qca = np.einsum("ij,ij->i", rows, kept) / np.maximum(count, 1)
    empty = count == 0
    if np.any(empty):  # every reading dropped (a sharply layered window): the lowest, errs low
        inside = np.arange(width)[None, :] < n[empty][:, None]
        qca[empty] = np.where(inside, rows[empty], np.inf).min(axis=1)
    return qca


def lcpc_base_average(depths_m: Any, qc_mpa: Any, toe_depth_m: float, diameter_m: float,
                      rules: Rules | None = None) -> float:
    """The LCPC equivalent cone resistance q_ca (MPa) at the toe (Bustamante & Gianeselli 1982).

    q'_ca = mean of the readings q_c from a = 1.5 D above to 1.5 D below the toe; the readings
    below 0.7 q'_ca or above 1.3 q'_ca are dropped and the rest averaged again: q_ca. When every
    reading is dropped (a window straddling a sharp change) the lowest reading is used (errs
    low). Window and band from the rules (``lcpc_window_diameters``, ``lcpc_clip_low``,
    ``lcpc_clip_high``).

    depths_m: increasing depths (m); qc_mpa: cone resistance (MPa) at them; toe_depth_m: toe
    depth (m) on the same datum; diameter_m: D (m, 0.1-5). The whole window must lie within the
    readings (ValueError naming the depth otherwise).
    """
    rules = rules or Rules()
    depths = _readings("depths_m", depths_m, None, 0.0, DEPTH_MAX_M)
    if depths.size < 2 or np.any(np.diff(depths) <= 0.0):
        raise ValueError("depths_m must hold at least 2 increasing depths")
    qc = _readings("qc_mpa", qc_mpa, depths.size, *QC_RANGE_MPA)
    toe = number("toe_depth_m", toe_depth_m, 0.0, DEPTH_MAX_M)
    d = number("diameter_m", diameter_m, *DIAMETER_RANGE_M)
    half = rules.lcpc_window_diameters * d
    if toe - half < depths[0] - DEPTH_TOL_M or toe + half > depths[-1] + DEPTH_TOL_M:
        raise ValueError(
            f"toe_depth_m ({toe:g} m) needs readings from {toe - half:g} to {toe + half:g} m; "
            f"the sounding covers {depths[0]:g} to {depths[-1]:g} m")
    return float(_lcpc_qca(depths, qc, np.array([toe]), half, rules.lcpc_clip_low,
                           rules.lcpc_clip_high)[0])


# (k_c, alpha, f_max in kPa) per category, for pile groups "i" and "ii"
_LCPC_ARRAYS = {
    group: (np.array([getattr(c, f"kc_{group}") for c in LCPC_TABLE], dtype=float),
            np.array([getattr(c, f"alpha_{group}") for c in LCPC_TABLE], dtype=float),
            np.array([getattr(c, f"fmax_{group}_kpa") for c in LCPC_TABLE], dtype=float))
    for group in ("i", "ii")
}


# --------------------------------------------------------------------------------------------
# Eslami & Fellenius
# --------------------------------------------------------------------------------------------

def effective_cone_resistance(qc_mpa: Any, u2_kpa: Any, area_ratio: float = 0.8) -> np.ndarray:
    """q_E = q_t - u_2 (MPa), q_t = q_c + u_2 (1 - a) (Eslami & Fellenius 1997; Lunne et al. 1997).

    qc_mpa in MPa, u2_kpa in kPa, a the cone's net area ratio (0.5-1).
    """
    a = number("area_ratio", area_ratio, 0.5, 1.0)
    qc = np.asarray(qc_mpa, dtype=float)
    u2 = np.asarray(u2_kpa, dtype=float) / 1000.0
    return qc + u2 * (1.0 - a) - u2


def ef_zone(qe_mpa: Any, fs_kpa: Any, rules: Rules | None = None) -> np.ndarray:
    """Eslami & Fellenius soil zone (2-5) of each reading from f_s / q_E (%).

    A simplification of the paper's profiling chart to lines of constant ratio: zone 5 (sand)
    up to ``ef_rf_sand_pct``, 4 (sandy silt) up to ``ef_rf_sandy_silt_pct``, 3 (silty clay) up to
    ``ef_rf_silty_clay_pct``, 2 (clay) above. Thresholds from memory; zone 1 (sensitive) only by
    layer. A reading with q_E <= 0 is clay.
    """
    rules = rules or Rules()
    qe = np.asarray(qe_mpa, dtype=float)
    fs = np.asarray(fs_kpa, dtype=float)
    rf = np.where(qe > 0.0, fs / np.maximum(qe, 1e-12) / 10.0, np.inf)  # % = fs/(qE*1000)*100
    return np.select([rf <= rules.ef_rf_sand_pct, rf <= rules.ef_rf_sandy_silt_pct,
                      rf <= rules.ef_rf_silty_clay_pct], [5, 4, 3], 2)


def ef_toe_coefficient(diameter_m: float, rules: Rules | None = None) -> float:
    """Toe coefficient C_t: 1, or 1/(3 D) (D in m) above ``ef_ct_diameter_m`` (from memory)."""
    rules = rules or Rules()
    d = number("diameter_m", diameter_m, *DIAMETER_RANGE_M)
    return 1.0 if d <= rules.ef_ct_diameter_m else 1.0 / (3.0 * d)


def _ef_cs(zones: np.ndarray, rules: Rules) -> np.ndarray:
    """C_s of each zone (1-5) from the rules."""
    table = np.array([0.0, rules.ef_cs_sensitive, rules.ef_cs_clay, rules.ef_cs_silty_clay,
                      rules.ef_cs_sandy_silt, rules.ef_cs_sand])
    return table[zones]


# --------------------------------------------------------------------------------------------
# Capacity from a sounding
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class CptResult:
    """Compression resistance of one pile from one sounding (kN), with its make-up.

    ``q_base_mpa`` is q_ca (LCPC) or q_Eg (Eslami & Fellenius), ``base_coefficient`` k_c or C_t,
    ``base_pressure`` the unit base resistance (kPa). ``reason`` says how ``design`` was found.
    """

    sounding: str
    method: str
    diameter: float
    top_level: float
    toe_level: float
    pile_type: str
    shaft: float
    base: float
    ultimate: float
    design: float
    q_base_mpa: float
    base_coefficient: float
    base_pressure: float
    design_approach: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def _natures(sounding: Sounding, soil: Any) -> np.ndarray | None:
    """Soil nature code (index into NATURES) of each reading from ``soil``: None, one nature,
    or (bottom_level, nature) pairs top down (readings below the last bottom take the last
    nature; a reading on a boundary belongs to the layer below it)."""
    if soil is None:
        return None
    if isinstance(soil, str):
        if soil not in NATURES:
            raise ValueError(f"soil must be one of {', '.join(NATURES)}, got {soil!r}")
        return np.full(sounding.depths_m.size, NATURES.index(soil))
    pairs = list(soil)
    if not pairs:
        raise ValueError("soil must name at least one layer")
    bottoms, codes = [], []
    for k, pair in enumerate(pairs):
        try:
            bottom, nature = pair
        except (TypeError, ValueError):
            raise ValueError(f"soil[{k}] must be a (bottom_level, nature) pair") from None
        bottoms.append(number(f"soil[{k}] bottom_level", bottom, -LEVEL_LIMIT_M, LEVEL_LIMIT_M))
        if nature not in NATURES:
            raise ValueError(f"soil[{k}] nature must be one of {', '.join(NATURES)}, got {nature!r}")
        codes.append(NATURES.index(nature))
        if k and bottoms[k] >= bottoms[k - 1]:
            raise ValueError(f"soil[{k}] bottom_level must be below soil[{k - 1}]'s (top down)")
    idx = np.searchsorted(-np.array(bottoms), -sounding.levels, side="right")
    return np.array(codes)[np.minimum(idx, len(pairs) - 1)]


# LCPC category (index into LCPC_TABLE) by nature family and q_c band: family rows are
# clay/sensitive, silt, sand/gravel, chalk; columns the bands q_c < 1, <= 5, <= 12, > 12 MPa.
_FAMILY = np.array([0, 1, 2, 2, 3, 0])  # by NATURES index
_BANDS = np.array([[0, 1, 3, 3], [0, 2, 3, 3], [2, 2, 5, 7], [4, 4, 6, 6]])
# Eslami & Fellenius zone (0-5) -> NATURES index (clay, silt, sand, sensitive), and back
_ZONE_NATURE = np.array([0, 5, 0, 0, 1, 2])
_NATURE_ZONE = np.array([2, 4, 5, 5, -1, 1])  # chalk (-1) has no zone


def _lcpc_categories(codes: np.ndarray, qc: np.ndarray) -> np.ndarray:
    """LCPC category of each reading from its nature code and q_c (MPa), vectorised."""
    band = np.where(qc < 1.0, 0, np.where(qc <= 5.0, 1, np.where(qc <= 12.0, 2, 3)))
    return _BANDS[_FAMILY[codes], band]


class _Profile:
    """Unit shaft resistance at every reading and the base at any toe, for one method."""

    def __init__(self, s: Sounding, diameter: float, pile_type: str, rules: Rules, method: str,
                 soil: Any):
        self.method = method
        natures = _natures(s, soil)
        self.depths = s.depths_m
        if method == "lcpc":
            group = "ii" if pile_type in LCPC_GROUP_II else "i"
            kc, alpha, fmax = _LCPC_ARRAYS[group]
            qc = s.qc_mpa
            if natures is None:  # natures from the Eslami & Fellenius zones of the readings
                qe = qc if s.u2_kpa is None else effective_cone_resistance(
                    qc, s.u2_kpa, rules.cone_area_ratio)
                natures = _ZONE_NATURE[ef_zone(qe, s.fs_kpa, rules)]
                self.soil_note = "soil categories from f_s/q_E"
            else:
                self.soil_note = "soil categories by layer"
            cat = _lcpc_categories(natures, qc)
            self.unit = np.minimum(qc * (1000.0 / alpha[cat]), fmax[cat])  # kPa
            self.kc, self.natures = kc, natures
            self.q = qc
        else:
            if s.u2_kpa is None:
                raise ValueError(
                    f"u2_kpa is required by the Eslami & Fellenius method (sounding {s.name})")
            qe = effective_cone_resistance(s.qc_mpa, s.u2_kpa, rules.cone_area_ratio)
            if natures is None:
                zones = ef_zone(qe, s.fs_kpa, rules)
                self.soil_note = "soil zones from f_s/q_E"
            else:
                zones = _NATURE_ZONE[natures]
                if np.any(zones < 0):
                    raise ValueError("the Eslami & Fellenius method has no zone for chalk")
                self.soil_note = "soil zones by layer"
            self.unit = _ef_cs(zones, rules) * np.maximum(qe, 0.0) * 1000.0  # kPa
            self.q = qe
            self.logq = np.concatenate([[0.0], np.cumsum(np.log(np.maximum(qe, QE_FLOOR_MPA)))])
            self.ct = ef_toe_coefficient(diameter, rules)
        self.cum = cumulative_integral(self.depths, self.unit)

    def shaft_unit_integral(self, top_depth: float, toes: np.ndarray) -> np.ndarray:
        """Integral of the unit shaft resistance (kN/m) from ``top_depth`` to each toe depth."""
        top = np.array([top_depth])
        i_top = integral_to(self.depths, self.unit, self.cum, top)[0]
        return np.maximum(integral_to(self.depths, self.unit, self.cum, toes) - i_top, 0.0)

    def base(self, toes: np.ndarray, diameter: float, rules: Rules):
        """(q at the base in MPa, coefficient, unit base resistance in kPa) at each toe depth."""
        if self.method == "lcpc":
            half = rules.lcpc_window_diameters * diameter
            qca = _lcpc_qca(self.depths, self.q, toes, half, rules.lcpc_clip_low,
                            rules.lcpc_clip_high)
            i = np.clip(np.searchsorted(self.depths, toes, side="right") - 1, 0, self.depths.size - 1)
            kc = self.kc[_lcpc_categories(self.natures[i], qca)]  # nature at the toe, band of q_ca
            return qca, kc, kc * qca * 1000.0
        a, b = _window_bounds(self.depths, toes - rules.ef_above_diameters * diameter,
                              toes + rules.ef_below_diameters * diameter)
        qeg = np.exp((self.logq[b] - self.logq[a]) / np.maximum(b - a, 1))  # mean of ln q_E
        return qeg, np.full_like(qeg, self.ct), self.ct * qeg * 1000.0


def cpt_toe_limits(sounding: Sounding, diameter: float, rules: Rules | None = None,
                   method: str | None = None) -> tuple[float, float]:
    """Highest and lowest toe levels (m) the sounding supports for a pile of diameter D (m).

    The base window must lie within the readings: LCPC needs ``lcpc_window_diameters`` x D below
    the toe, Eslami & Fellenius ``ef_below_diameters`` x D.
    """
    rules = rules or Rules()
    method = method or rules.cpt_method
    below = (rules.lcpc_window_diameters if method == "lcpc" else rules.ef_below_diameters)
    d, g = sounding.depths_m, sounding.ground_level
    return float(g - d[0]), float(g - d[-1] + below * diameter)


def _check(sounding: Any, diameter: Any, top_level: Any, pile_type: Any, rules: Any,
           method: Any):
    """Validate the common inputs; ValueError naming the field and the limit."""
    if not isinstance(sounding, Sounding):
        raise ValueError(f"sounding must be a Sounding, got {type(sounding).__name__}")
    diameter = number("diameter", diameter, *DIAMETER_RANGE_M)
    top_level = number("top_level", top_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    if pile_type not in PILE_TYPES:
        raise ValueError(f"pile_type must be one of {', '.join(PILE_TYPES)}, got {pile_type!r}")
    if rules is None:
        rules = Rules()
    elif not isinstance(rules, Rules):
        raise ValueError(f"rules must be a Rules, got {type(rules).__name__}")
    method = method or rules.cpt_method
    if method not in CPT_METHODS:
        raise ValueError(f"method must be one of {', '.join(CPT_METHODS)}, got {method!r}")
    return diameter, top_level, rules, method


def cpt_capacity_curve(sounding: Sounding, diameter: float, top_level: float, toe_levels: Any,
                       pile_type: str = "bored", rules: Rules | None = None, *,
                       method: str | None = None, soil: Any = None) -> CapacityCurve:
    """Shaft, base, ultimate and design resistance (kN) against toe level (m) from a sounding.

    The same ``design_core.axial.CapacityCurve`` as the soil-parameter methods, so the required
    toe (``required_toe_level``) and the tablet's curve work unchanged. Vectorised: cumulative
    sums of the unit shaft and of the readings, no Python loop per level.

    sounding: the CPT; diameter D (m, 0.1-5); top_level (m): the cut-off or dig level, the shaft
    counts from ``exclusion_diameters`` x D below it and nothing above the first reading;
    toe_levels (m): non-empty, below ``top_level``, within ``cpt_toe_limits``; pile_type: one of
    PILE_TYPES (LCPC group II for driven piles); method: "lcpc" or "eslami_fellenius" (default
    the rules' ``cpt_method``); soil: None (from f_s/q_E), one nature, or (bottom_level, nature)
    pairs top down, natures from NATURES. Equations and sources: the module docstring.
    """
    diameter, top_level, rules, method = _check(sounding, diameter, top_level, pile_type, rules,
                                                method)
    try:
        toes = np.array(toe_levels, dtype=float)
    except (TypeError, ValueError):
        raise ValueError("toe_levels must be numbers") from None
    if toes.ndim != 1 or toes.size == 0:
        raise ValueError("toe_levels must be a non-empty 1-D array of levels (m)")
    if np.any(~np.isfinite(toes)):
        raise ValueError("toe_levels must be finite numbers (no NaN or inf)")
    hi_ok, lo_ok = cpt_toe_limits(sounding, diameter, rules, method)
    hi, lo = float(toes.max()), float(toes.min())
    if hi >= top_level:
        raise ValueError(f"toe_levels ({hi:g} m) must be below top_level ({top_level:g} m)")
    if hi > hi_ok + DEPTH_TOL_M:
        raise ValueError(f"toe_levels ({hi:g} m) must be at or below the first reading "
                         f"({hi_ok:g} m) of sounding {sounding.name}")
    if lo < lo_ok - DEPTH_TOL_M:
        raise ValueError(f"toe_levels ({lo:g} m) must be at or above {lo_ok:g} m: sounding "
                         f"{sounding.name} must reach below the toe's base window")
    prof = _Profile(sounding, diameter, pile_type, rules, method, soil)
    toe_depths = sounding.ground_level - toes
    top_depth = sounding.ground_level - top_level + rules.exclusion_diameters * diameter
    shaft = math.pi * diameter * prof.shaft_unit_integral(top_depth, toe_depths)
    _, _, qb = prof.base(toe_depths, diameter, rules)
    base = qb * pile_area(diameter)
    ultimate = shaft + base
    design = np.asarray(_design(shaft, base, rules), dtype=float)
    for arr in (toes, shaft, base, ultimate, design):
        arr.setflags(write=False)
    label = "LCPC" if method == "lcpc" else "Eslami & Fellenius"
    reason = (f"Design resistance against toe level from CPT {sounding.name} ({label}, "
              f"{prof.soil_note}) for D {diameter:g} m from top level {top_level:g} m "
              f"({_approach_text(rules)}).")
    return CapacityCurve(toes, shaft, base, ultimate, design, diameter, top_level, pile_type,
                         rules.design_approach, reason)


def cpt_capacity(sounding: Sounding, diameter: float, top_level: float, toe_level: float,
                 pile_type: str = "bored", rules: Rules | None = None, *,
                 method: str | None = None, soil: Any = None) -> CptResult:
    """Compression resistance of one pile at one toe level (m) from a sounding (kN).

    Same inputs, equations and grid as ``cpt_capacity_curve`` (which it matches exactly).
    """
    diameter, top_level, rules, method = _check(sounding, diameter, top_level, pile_type, rules,
                                                method)
    toe_level = number("toe_level", toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    curve = cpt_capacity_curve(sounding, diameter, top_level, [toe_level], pile_type, rules,
                               method=method, soil=soil)
    prof = _Profile(sounding, diameter, pile_type, rules, method, soil)
    q, coef, qb = (float(x[0]) for x in prof.base(
        np.array([sounding.ground_level - toe_level]), diameter, rules))
    shaft, base, design = float(curve.shaft[0]), float(curve.base[0]), float(curve.design[0])
    how = (f"LCPC, q_ca {q:.2f} MPa x k_c" if method == "lcpc"
           else f"Eslami & Fellenius, q_Eg {q:.2f} MPa x C_t") + f" {coef:.2f}"
    reason = (f"Design {design:.0f} kN ({_approach_text(rules)}) from shaft {shaft:.0f} kN and "
              f"base {base:.0f} kN ({how} = {qb:.0f} kPa) from CPT {sounding.name}, "
              f"{prof.soil_note}, for D {diameter:g} m, toe {toe_level:.2f} m.")
    return CptResult(sounding.name, method, diameter, top_level, toe_level, pile_type, shaft, base,
                     shaft + base, design, q, coef, qb, rules.design_approach, reason)
