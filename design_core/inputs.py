"""Inputs of the per-pile recheck: the design of a pile, what was built, and its cap.

These are the shapes the web app fills from its stored rows and hands to ``recheck``. Units:
m for lengths and levels (higher is up), mm where the name says so, kN and kNm for loads.
Every as-built field is optional: a check whose input was not recorded is reported as not
checked, never as ok.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from datetime import datetime

from design_core.validate import number

PILE_TYPES = ("bored", "cfa", "driven", "screw")
# Displacement piles push the soil aside; bored and CFA piles remove it.
DISPLACEMENT_TYPES = ("driven", "screw")
HEAD_CONDITIONS = ("free", "fixed")
MATERIALS = ("cohesive", "cohesionless", "rock", "ignore")


LEVEL_LIMIT_M = 10_000.0


@dataclass(frozen=True)
class PileDesign:
    """The pile as designed (one row of the pile schedule).

    diameter in m; levels in m; easting/northing in m; compression and tension (uplift) in kN,
    shear in kN and moment in kNm at the pile head, all as the rules' ``loads_are`` says;
    bar_mm, cover_mm in mm; cage_length in m; fc_mpa, fy_mpa in MPa.
    """

    mark: str
    diameter: float
    cutoff_level: float
    toe_level: float
    easting: float = 0.0
    northing: float = 0.0
    pile_type: str = "bored"
    compression: float = 0.0
    tension: float = 0.0
    shear: float = 0.0
    moment: float = 0.0
    n_bars: int = 0
    bar_mm: float = 0.0
    cage_length: float = 0.0
    fc_mpa: float = 32.0
    fy_mpa: float = 500.0
    exposure_class: str = "XC2"
    cover_mm: float = 75.0
    head: str = "free"
    cap: str | None = None
    permanent_casing: bool = False   # True: concrete not cast against soil (cover rule)

    def __post_init__(self):
        if not self.mark:
            raise ValueError("mark is required")
        number("diameter", self.diameter, 0.15, 3.0)
        number("cutoff_level", self.cutoff_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        number("toe_level", self.toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        if self.toe_level >= self.cutoff_level:
            raise ValueError(
                f"toe_level ({self.toe_level:g} m) must be below cutoff_level ({self.cutoff_level:g} m)")
        number("easting", self.easting)
        number("northing", self.northing)
        if self.pile_type not in PILE_TYPES:
            raise ValueError(f"pile_type must be one of {', '.join(PILE_TYPES)}, got {self.pile_type!r}")
        for name in ("compression", "tension", "shear", "moment"):
            number(name, getattr(self, name), 0.0, 1e6)
        number("n_bars", self.n_bars, 0, 200)
        if float(self.n_bars) != int(self.n_bars):
            raise ValueError(f"n_bars must be a whole number of bars (0 to 200), got {self.n_bars!r}")
        number("bar_mm", self.bar_mm, 0.0, 63.0)
        number("cage_length", self.cage_length, 0.0, 200.0)
        number("fc_mpa", self.fc_mpa, 10.0, 120.0)
        number("fy_mpa", self.fy_mpa, 200.0, 700.0)
        number("cover_mm", self.cover_mm, 0.0, 300.0)
        if self.head not in HEAD_CONDITIONS:
            raise ValueError(f"head must be free or fixed, got {self.head!r}")

    @property
    def displacement(self) -> bool:
        """True for displacement piles (driven, screw)."""
        return self.pile_type in DISPLACEMENT_TYPES


@dataclass(frozen=True)
class Delivery:
    """One truck of concrete: volume in m3, batching and discharge times, slump in mm."""

    docket: str = ""
    volume_m3: float | None = None
    batched_at: datetime | None = None
    discharged_at: datetime | None = None
    slump_mm: float | None = None

    def __post_init__(self):
        number("volume_m3", self.volume_m3, 0.0, 100.0, optional=True)
        number("slump_mm", self.slump_mm, 0.0, 1000.0, optional=True)
        if self.batched_at and self.discharged_at and self.discharged_at < self.batched_at:
            raise ValueError("discharged_at must not be before batched_at")

    @property
    def minutes_from_batching(self) -> float | None:
        """Minutes from batching to discharge, or None if either time is missing."""
        if self.batched_at is None or self.discharged_at is None:
            return None
        return (self.discharged_at - self.batched_at).total_seconds() / 60.0


@dataclass(frozen=True)
class StratumMet:
    """A stratum logged while boring: depths in m below the platform, material as in MATERIALS.

    ``layer_index`` is the ground model layer the inspector said it matches (None: the recheck
    borrows from the nearest layer of the same material).
    """

    from_depth: float
    to_depth: float
    material: str
    description: str = ""
    layer_index: int | None = None

    def __post_init__(self):
        number("from_depth", self.from_depth, 0.0, 500.0)
        number("to_depth", self.to_depth, 0.0, 500.0)
        if self.to_depth <= self.from_depth:
            raise ValueError(
                f"to_depth ({self.to_depth:g} m) must be below from_depth ({self.from_depth:g} m)")
        if self.material not in MATERIALS:
            raise ValueError(f"material must be one of {', '.join(MATERIALS)}, got {self.material!r}")


@dataclass(frozen=True)
class AsBuilt:
    """The pile as built, from the rig record. Every field is optional.

    platform_level and measured_depth (m below platform) give the toe level; diameter_mm,
    cover_mm, debris_mm in mm; cutoff_level and casting_level (final concrete level) in m;
    easting/northing in m at cut-off; inclination horizontal over vertical (0.01 = 1 in 100);
    concrete_mpa the grade f_ck in MPa; concrete_volume_m3 the total placed.
    """

    platform_level: float | None = None
    measured_depth: float | None = None
    diameter_mm: float | None = None
    cutoff_level: float | None = None
    casting_level: float | None = None
    easting: float | None = None
    northing: float | None = None
    inclination: float | None = None
    debris_mm: float | None = None
    base_check: str | None = None
    cage_length: float | None = None
    cover_mm: float | None = None
    exposure_class: str | None = None
    concrete_mpa: float | None = None
    concrete_volume_m3: float | None = None
    deliveries: tuple[Delivery, ...] = ()
    strata: tuple[StratumMet, ...] = ()
    permanent_casing: bool | None = None   # None: as designed

    def __post_init__(self):
        limits = {
            "platform_level": (-LEVEL_LIMIT_M, LEVEL_LIMIT_M),
            "measured_depth": (0.0, 500.0),
            "diameter_mm": (150.0, 3000.0),
            "cutoff_level": (-LEVEL_LIMIT_M, LEVEL_LIMIT_M),
            "casting_level": (-LEVEL_LIMIT_M, LEVEL_LIMIT_M),
            "easting": (None, None),
            "northing": (None, None),
            "inclination": (0.0, 1.0),
            "debris_mm": (0.0, 5000.0),
            "cage_length": (0.0, 200.0),
            "cover_mm": (0.0, 300.0),
            "concrete_mpa": (5.0, 120.0),
            "concrete_volume_m3": (0.0, 2000.0),
        }
        for name, (lo, hi) in limits.items():
            number(name, getattr(self, name), lo, hi, optional=True)

    @property
    def toe_level(self) -> float | None:
        """As-built toe level (m) = platform_level - measured_depth, or None if either is missing."""
        if self.platform_level is None or self.measured_depth is None:
            return None
        return self.platform_level - self.measured_depth

    def recorded(self) -> dict:
        """The fields that hold a value (for display)."""
        return {f.name: getattr(self, f.name) for f in fields(self)
                if getattr(self, f.name) not in (None, ())}


@dataclass(frozen=True)
class CapPile:
    """One pile of a cap: design position and, once surveyed, its as-built position (m)."""

    mark: str
    design_xy: tuple[float, float]
    asbuilt_xy: tuple[float, float] | None = None

    @property
    def xy(self) -> tuple[float, float]:
        """The position to share loads on: as built when surveyed, else as designed."""
        return self.asbuilt_xy if self.asbuilt_xy is not None else self.design_xy


@dataclass(frozen=True)
class CapGroup:
    """A rigid cap: loads at the cap's load point and its piles.

    n (kN, compression +), mx (kNm, adds compression towards +y), my (kNm, towards +x),
    hx, hy (kN); load_point (easting, northing) in m where the loads act (by default the
    centroid of the design positions).
    """

    mark: str
    piles: tuple[CapPile, ...]
    n: float = 0.0
    mx: float = 0.0
    my: float = 0.0
    hx: float = 0.0
    hy: float = 0.0
    load_point: tuple[float, float] | None = None

    def __post_init__(self):
        if not self.piles:
            raise ValueError(f"cap {self.mark} has no piles")
        for name in ("n", "mx", "my", "hx", "hy"):
            number(name, getattr(self, name), -1e7, 1e7)
        if self.load_point is not None:
            if len(self.load_point) != 2:
                raise ValueError(f"load_point must be (easting, northing) in m, got {self.load_point!r}")
            number("load_point easting", self.load_point[0])
            number("load_point northing", self.load_point[1])

    @property
    def load_xy(self) -> tuple[float, float]:
        """Where the cap's loads act (easting, northing, m): ``load_point`` when given, else the
        centroid of the piles' design positions."""
        if self.load_point is not None:
            return self.load_point
        k = len(self.piles)
        return (sum(p.design_xy[0] for p in self.piles) / k,
                sum(p.design_xy[1] for p in self.piles) / k)
