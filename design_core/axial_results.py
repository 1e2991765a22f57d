"""Result objects of the axial analyses (``design_core.axial``): shaft rows, compression and
uplift resistance, and the capacity curve. Forces in kN, levels in m, pressures in kPa.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np

from design_core.ground import LEVEL_TOL_M
from design_core.validate import number

@dataclass(frozen=True)
class ShaftRow:
    """Shaft resistance over one stretch of one layer.

    ``from_level``/``to_level`` (m) bound the stretch; ``method`` is one of "alpha", "beta",
    "report", "ignored", "excluded"; ``mean_fs`` the mean ultimate unit friction (kPa) and
    ``force`` the ultimate shaft force (kN) of the stretch.
    """

    from_level: float
    to_level: float
    layer_index: int
    material: str
    method: str
    mean_fs: float
    force: float

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True)
class AxialResult:
    """Compression resistance of one pile (kN) with its make-up.

    ``shaft``, ``base``, ``ultimate`` (= shaft + base) and ``design`` in kN; ``base_pressure``
    the ultimate unit base resistance q_b (kPa) from ``base_method`` in layer
    ``base_layer_index``; ``layers`` the shaft rows top down (their forces sum to ``shaft``);
    ``reason`` one line saying how ``design`` was found.
    """

    diameter: float
    top_level: float
    toe_level: float
    pile_type: str
    shaft: float
    base: float
    ultimate: float
    design: float
    base_pressure: float
    base_method: str
    base_layer_index: int
    design_approach: str
    layers: tuple[ShaftRow, ...]
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (rows as a list of dicts)."""
        out = asdict(self)
        out["layers"] = [row.to_dict() for row in self.layers]
        return out


@dataclass(frozen=True)
class TensionResult:
    """Uplift resistance of one pile (kN).

    ``shaft_compression`` is the compression shaft Q_s, ``shaft_tension`` = ``tension_fraction``
    x Q_s, ``weight`` the pile's effective weight W' (buoyant below water), ``ultimate`` =
    shaft_tension + weight, and ``design`` the factored resistance (see ``tension_capacity``).
    """

    diameter: float
    top_level: float
    toe_level: float
    pile_type: str
    shaft_compression: float
    tension_fraction: float
    shaft_tension: float
    weight: float
    ultimate: float
    design: float
    design_approach: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True, eq=False)
class CapacityCurve:
    """Resistance against toe level for one pile (arrays in kN, read-only, toe levels in m).

    ``toe_levels`` in the order given; ``shaft``, ``base``, ``ultimate`` and ``design`` match
    them element by element.
    """

    toe_levels: np.ndarray
    shaft: np.ndarray
    base: np.ndarray
    ultimate: np.ndarray
    design: np.ndarray
    diameter: float
    top_level: float
    pile_type: str
    design_approach: str
    reason: str = field(default="")
    steps: tuple[float, ...] = field(default=())

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict with the arrays as lists (for the tablet's cache).

        ``steps`` lists the levels (m) where the base resistance may jump (layer boundaries):
        a reader never interpolates across one (see ``required_toe_level``).
        """
        out: dict[str, Any] = {}
        for name in ("toe_levels", "shaft", "base", "ultimate", "design"):
            out[name] = [float(x) for x in getattr(self, name)]
        out.update(diameter=self.diameter, top_level=self.top_level, pile_type=self.pile_type,
                   design_approach=self.design_approach, reason=self.reason,
                   steps=[float(x) for x in self.steps])
        return out

    def design_at(self, level: float) -> float:
        """Design resistance (kN) at ``level`` (m), linear between curve points.

        ValueError when ``level`` lies outside the curve's toe levels.
        """
        level = number("level", level)
        order = np.argsort(self.toe_levels)
        z = self.toe_levels[order]
        if not z[0] - LEVEL_TOL_M <= level <= z[-1] + LEVEL_TOL_M:
            raise ValueError(f"level ({level:g} m) is outside the curve ({z[0]:g} to {z[-1]:g} m)")
        return float(np.interp(level, z, self.design[order]))


