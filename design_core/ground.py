"""The ground model: layers from the top down, a water level, and the effective stress in it.

Levels are reduced levels in metres, higher is up. Unit weights in kN/m3, strengths and
pressures in kPa, angles in degrees.

Vertical effective stress (Terzaghi's principle of effective stress, Terzaghi 1943,
*Theoretical Soil Mechanics*) is measured from the top of the ground
model::

    sigma'_v(z) = sum over the soil above z of gamma_i * h_i  -  gamma_w * max(0, z_w - z)

which is the same as summing the bulk unit weight above the water level and the buoyant unit
weight (gamma - gamma_w) below it. Between layer boundaries and the water level it is linear
in level, so it is held exactly as a piecewise-linear profile.

Also here: ``ground_from_strata``, which rebuilds the ground under one pile from the strata the
inspector logged at the rig.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any, Sequence

import numpy as np

from design_core.inputs import LEVEL_LIMIT_M, MATERIALS, StratumMet
from design_core.validate import number

GAMMA_W = 9.81  # kN/m3, the default of Rules.gamma_w
LEVEL_TOL_M = 1e-6  # levels closer than this (1 micrometre) are the same level

# Ranges accepted for layer properties (broad on purpose: they catch typing slips, not design).
UNIT_WEIGHT_RANGE = (10.0, 30.0)  # kN/m3, bulk (peat ~10-12, dense rock ~27)
CU_RANGE = (0.5, 5_000.0)  # kPa
PHI_RANGE = (10.0, 50.0)  # degrees
SHAFT_FRICTION_RANGE = (0.0, 5_000.0)  # kPa, ultimate
BASE_PRESSURE_RANGE = (0.0, 100_000.0)  # kPa, ultimate


def cu_linear(cu_top, cu_bottom, top, bottom, level):
    """c_u (kPa) at ``level`` (m) in a layer from ``top`` to ``bottom`` (m) whose c_u runs
    linearly from ``cu_top`` to ``cu_bottom``; levels outside the layer take the value at the
    nearer end. Vectorised over every argument (numpy broadcasting). The one c_u interpolation
    of design_core: the shaft, the base, the lateral springs and Broms all read c_u here."""
    frac = (top - level) / (top - bottom)
    frac = min(1.0, max(0.0, frac)) if isinstance(frac, float) else np.clip(frac, 0.0, 1.0)
    return cu_top + (cu_bottom - cu_top) * frac


@dataclass(frozen=True)
class Layer:
    """One layer of a ground model.

    Parameters
    ----------
    top, bottom:
        Levels of the top and bottom of the layer (m, higher is up; ``top > bottom``).
    material:
        ``"cohesive"`` (alpha method, c_u required), ``"cohesionless"`` (beta method, phi'
        required), ``"rock"`` (report values ``shaft_friction`` and ``base_pressure`` required)
        or ``"ignore"`` (fill or soft ground that gives no shaft and no base; it still weighs on
        the layers below).
    unit_weight:
        Bulk unit weight gamma (kN/m3), 10-30; below the water level the method uses
        gamma - gamma_w.
    cu, cu_bottom:
        Undrained shear strength c_u at the top and at the bottom of the layer (kPa, 0.5-5000);
        c_u varies linearly between them. ``cu_bottom=None`` means c_u is constant.
    phi:
        Effective friction angle phi' (degrees, 10-50).
    shaft_friction, base_pressure:
        Ultimate unit shaft friction and ultimate base pressure from the geotechnical report
        (kPa). When given they replace the method for this layer.
    """

    top: float
    bottom: float
    material: str
    unit_weight: float
    cu: float | None = None
    cu_bottom: float | None = None
    phi: float | None = None
    shaft_friction: float | None = None
    base_pressure: float | None = None

    def __post_init__(self):
        set_ = object.__setattr__
        set_(self, "top", number("top", self.top, -LEVEL_LIMIT_M, LEVEL_LIMIT_M))
        set_(self, "bottom", number("bottom", self.bottom, -LEVEL_LIMIT_M, LEVEL_LIMIT_M))
        if self.bottom >= self.top:
            raise ValueError(
                f"bottom ({self.bottom:g} m) must be below top ({self.top:g} m) in a layer")
        if self.material not in MATERIALS:
            raise ValueError(f"material must be one of {', '.join(MATERIALS)}, got {self.material!r}")
        set_(self, "unit_weight", number("unit_weight", self.unit_weight, *UNIT_WEIGHT_RANGE))
        for name, limits in (("cu", CU_RANGE), ("cu_bottom", CU_RANGE), ("phi", PHI_RANGE),
                             ("shaft_friction", SHAFT_FRICTION_RANGE),
                             ("base_pressure", BASE_PRESSURE_RANGE)):
            value = getattr(self, name)
            if value is not None:
                set_(self, name, number(name, value, *limits))
        where = f"{self.material} layer {self.top:g} to {self.bottom:g} m"
        if self.cu_bottom is not None and self.cu is None:
            raise ValueError(f"cu_bottom needs cu (c_u at the top) in the {where}")
        if self.material == "cohesive" and self.cu is None:
            raise ValueError(f"cu (undrained strength, kPa) is required in the {where}")
        if self.material == "cohesionless" and self.phi is None:
            raise ValueError(f"phi (effective friction angle, degrees) is required in the {where}")
        if self.material == "rock":
            for name in ("shaft_friction", "base_pressure"):
                if getattr(self, name) is None:
                    raise ValueError(
                        f"{name} (ultimate, kPa, from the geotechnical report) is required in "
                        f"the {where}")
        if self.material == "ignore" and (self.shaft_friction is not None
                                          or self.base_pressure is not None):
            raise ValueError(
                f"an ignored layer takes no shaft_friction or base_pressure ({where}); "
                "give it a material instead")

    @property
    def thickness(self) -> float:
        """Thickness of the layer (m)."""
        return self.top - self.bottom

    def cu_at(self, level: float | np.ndarray) -> float | np.ndarray:
        """Undrained strength c_u (kPa) at ``level`` (m), linear between top and bottom.

        Levels outside the layer take the value at the nearer end (no extrapolation).
        Returns NaN when the layer has no c_u.
        """
        if self.cu is None:
            return np.full_like(np.asarray(level, dtype=float), np.nan) if np.ndim(level) else math.nan
        cu_bot = self.cu if self.cu_bottom is None else self.cu_bottom
        if np.ndim(level) == 0:
            return float(cu_linear(self.cu, cu_bot, self.top, self.bottom, float(level)))
        return cu_linear(self.cu, cu_bot, self.top, self.bottom, np.asarray(level, dtype=float))

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict of the layer."""
        return asdict(self)


@dataclass(frozen=True)
class GroundModel:
    """Layers from the top down, contiguous, and a groundwater level (m).

    The top of the first layer is the ground surface from which sigma'_v and the critical depth
    are measured. ``layers`` may be given as any sequence; it is stored as a tuple.
    """

    layers: tuple[Layer, ...]
    water_level: float

    def __post_init__(self):
        layers = tuple(self.layers)
        object.__setattr__(self, "layers", layers)
        object.__setattr__(self, "water_level",
                           number("water_level", self.water_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M))
        if not layers:
            raise ValueError("layers: a ground model needs at least one layer")
        for i, layer in enumerate(layers):
            if not isinstance(layer, Layer):
                raise ValueError(f"layers[{i}] must be a Layer, got {type(layer).__name__}")
        for i in range(1, len(layers)):
            above, below = layers[i - 1], layers[i]
            if abs(below.top - above.bottom) > LEVEL_TOL_M:
                raise ValueError(
                    f"layers must be top-down and contiguous: layers[{i}].top ({below.top:g} m) "
                    f"differs from layers[{i - 1}].bottom ({above.bottom:g} m)")

    def __hash__(self) -> int:
        # A ground model keys the analyses kept between calls: hash it once per object.
        h = self.__dict__.get("_hash")
        if h is None:
            h = hash((self.layers, self.water_level))
            object.__setattr__(self, "_hash", h)
        return h

    @property
    def top(self) -> float:
        """Level of the ground surface, the top of the first layer (m)."""
        return self.layers[0].top

    @property
    def bottom(self) -> float:
        """Level of the bottom of the last layer (m)."""
        return self.layers[-1].bottom

    def boundaries(self) -> np.ndarray:
        """Levels of the layer boundaries, top down: the top, then each layer's bottom (m)."""
        return np.array([self.top] + [layer.bottom for layer in self.layers])

    def layer_index_at(self, level: float | np.ndarray) -> int | np.ndarray:
        """Index of the layer holding ``level``: at a boundary, the layer below it.

        The bottom of the ground model belongs to the last layer. Levels outside the model give
        the nearest end layer; callers check the range first.
        """
        bottoms = np.array([-layer.bottom for layer in self.layers])
        idx = np.searchsorted(bottoms, -np.asarray(level, dtype=float), side="right")
        idx = np.minimum(idx, len(self.layers) - 1)
        return int(idx) if np.ndim(idx) == 0 else idx

    def stress_profile(self, gamma_w: float = GAMMA_W) -> tuple[np.ndarray, np.ndarray]:
        """The piecewise-linear sigma'_v profile: (levels ascending, sigma'_v in kPa).

        Breakpoints are the layer boundaries and the water level when it lies within the
        model. Above the ground surface sigma'_v is 0. Raises ValueError when a layer below the
        water level has a unit weight below gamma_w (negative buoyant weight).
        """
        # Water over the ground surface adds equal total and pore pressure: no change to sigma'_v.
        levels = [self.top]
        sigma = [0.0]
        for i, layer in enumerate(self.layers):
            cuts = [layer.top]
            if layer.bottom < self.water_level < layer.top:
                cuts.append(self.water_level)
            cuts.append(layer.bottom)
            for a, b in zip(cuts[:-1], cuts[1:], strict=True):
                submerged = a <= self.water_level  # segments never straddle the water level
                gamma = layer.unit_weight - gamma_w if submerged else layer.unit_weight
                if gamma < 0.0:
                    raise ValueError(
                        f"layers[{i}].unit_weight ({layer.unit_weight:g} kN/m3) is below gamma_w "
                        f"({gamma_w:g} kN/m3) under the water level: effective stress would fall")
                levels.append(b)
                sigma.append(sigma[-1] + gamma * (a - b))
        return np.array(levels[::-1]), np.array(sigma[::-1])

    def sigma_v_eff(self, level: float | np.ndarray, gamma_w: float = GAMMA_W) -> float | np.ndarray:
        """Vertical effective stress sigma'_v (kPa) at ``level`` (m).

        sigma'_v = sum(gamma_i h_i) - gamma_w (z_w - z) below the water level z_w (Terzaghi;
        Terzaghi 1943). Exact (linear interpolation of a piecewise-linear profile).
        Above the ground surface it is 0; below the model it is extrapolated with the last
        layer's weight.
        """
        z, s = self.stress_profile(gamma_w)
        lv = np.asarray(level, dtype=float)
        out = np.interp(lv, z, s)
        below = lv < z[0]
        if np.any(below):
            last = self.layers[-1]
            gamma = last.unit_weight - (gamma_w if z[0] < self.water_level else 0.0)
            out = np.where(below, s[0] + gamma * (z[0] - lv), out)
        return float(out) if np.ndim(out) == 0 else out

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict: ``{"water_level": ..., "layers": [...]}``."""
        return {"water_level": self.water_level, "layers": [layer.to_dict() for layer in self.layers]}

    @classmethod
    def from_dict(cls, data: dict[str, Any]) -> "GroundModel":
        """A ground model from a dict as made by ``to_dict``."""
        return cls(tuple(Layer(**row) for row in data["layers"]), data["water_level"])


# --------------------------------------------------------------------------------------------
# Strata met at the rig
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Borrowed:
    """Which ground-model layer one stratum met took its parameters from.

    ``from_depth``/``to_depth`` are the logged depths (m below the platform); ``top_level``/
    ``bottom_level`` the levels (m) it covers in the rebuilt ground (clipped to the ground model
    and the toe; equal when nothing of it was used); ``layer_index`` the ground-model layer
    borrowed from, or None when the stratum lies wholly outside the part used.
    """

    from_depth: float
    to_depth: float
    material: str
    layer_index: int | None
    top_level: float
    bottom_level: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def _gap(a_top: float, a_bot: float, b_top: float, b_bot: float) -> float:
    """Vertical distance between two level intervals (m); 0 when they overlap or touch."""
    return max(0.0, a_bot - b_top, b_bot - a_top)


def _borrow(layer: Layer, top: float, bottom: float) -> Layer:
    """A copy of ``layer`` moved to [bottom, top]; c_u follows the layer's own profile.

    Where the new interval leaves the layer's own levels, c_u takes the value at the layer's
    nearer end (no extrapolation of a gradient).
    """
    cu = cu_bottom = None
    if layer.cu is not None:
        cu = float(layer.cu_at(top))
        cu_bottom = float(layer.cu_at(bottom)) if layer.cu_bottom is not None else None
    return Layer(top, bottom, layer.material, layer.unit_weight, cu=cu, cu_bottom=cu_bottom,
                 phi=layer.phi, shaft_friction=layer.shaft_friction,
                 base_pressure=layer.base_pressure)


def ground_from_strata(ground: GroundModel, platform_level: float, strata: Sequence[StratumMet],
                       toe_level: float) -> tuple[GroundModel, list[Borrowed]]:
    """The ground under one pile, rebuilt from the strata logged at the rig.

    Each stratum met (depths in m below ``platform_level``, m) replaces the ground model over
    its levels, down to ``toe_level`` (m). It takes its unit weight and strength parameters
    (c_u profile, phi', report values) from the ground model's layer of the same material
    nearest in level: the layer overlapping it, else the one with the smallest vertical gap
    (ties: the nearer mid-level, then the upper layer); or from ``layer_index`` when the
    inspector picked one. Gaps between logged strata, the ground above the first and below
    the last (and below the toe) keep the ground model's layers. Parts of strata above the
    ground model's top or below the toe are not used. The water level is unchanged.

    Returns the new ground model and one ``Borrowed`` per stratum, in the order logged.
    Raises ValueError naming the stratum when no layer of its material exists, when a picked
    ``layer_index`` is out of range or of another material, or when strata overlap; and naming
    the field when ``platform_level`` or ``toe_level`` is not finite or the toe lies outside
    the ground model.
    """
    platform_level = number("platform_level", platform_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    toe_level = number("toe_level", toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    if not (ground.bottom - LEVEL_TOL_M <= toe_level <= ground.top + LEVEL_TOL_M):
        raise ValueError(
            f"toe_level ({toe_level:g} m) must lie within the ground model "
            f"({ground.top:g} to {ground.bottom:g} m)")
    strata = list(strata)
    order = sorted(range(len(strata)), key=lambda k: strata[k].from_depth)
    for a, b in zip(order[:-1], order[1:], strict=True):
        if strata[b].from_depth < strata[a].to_depth - LEVEL_TOL_M:
            raise ValueError(
                f"strata[{b}] ({strata[b].from_depth:g}-{strata[b].to_depth:g} m) overlaps "
                f"strata[{a}] ({strata[a].from_depth:g}-{strata[a].to_depth:g} m)")

    borrowed: list[Borrowed] = []
    pieces: list[Layer] = []  # replacement layers, top down
    for k, s in enumerate(strata):
        name = f"strata[{k}] ({s.from_depth:g}-{s.to_depth:g} m, {s.material})"
        if not isinstance(s, StratumMet):
            raise ValueError(f"strata[{k}] must be a StratumMet")
        s_top, s_bot = platform_level - s.from_depth, platform_level - s.to_depth
        if s.layer_index is not None:
            if not 0 <= s.layer_index < len(ground.layers):
                raise ValueError(
                    f"{name}: layer_index {s.layer_index} is not a layer of the ground model "
                    f"(0 to {len(ground.layers) - 1})")
            source = ground.layers[s.layer_index]
            if source.material != s.material:
                raise ValueError(
                    f"{name}: the picked layer {s.layer_index} is {source.material}, not {s.material}")
            index = s.layer_index
            why = f"picked by the inspector: layer {index}"
        else:
            candidates = [i for i, layer in enumerate(ground.layers) if layer.material == s.material]
            if not candidates:
                raise ValueError(
                    f"{name}: the ground model has no {s.material} layer to take parameters from")
            mid = 0.5 * (s_top + s_bot)

            def key(i: int, s_top=s_top, s_bot=s_bot, mid=mid) -> tuple[float, float, int]:
                layer = ground.layers[i]
                return (_gap(s_top, s_bot, layer.top, layer.bottom),
                        abs(0.5 * (layer.top + layer.bottom) - mid), i)

            index = min(candidates, key=key)
            gap = key(index)[0]
            layer = ground.layers[index]
            why = (f"nearest {s.material} layer: layer {index} "
                   f"({layer.top:g} to {layer.bottom:g} m, "
                   + ("overlapping)" if gap <= LEVEL_TOL_M else f"{gap:.2f} m away)"))
        top = min(s_top, ground.top)
        bot = max(s_bot, toe_level)
        if bot >= top - LEVEL_TOL_M:
            where = "above the ground model" if s_bot >= ground.top else "below the toe"
            borrowed.append(Borrowed(s.from_depth, s.to_depth, s.material, None, s_top, s_top,
                                     f"not used: it lies {where}"))
            continue
        clipped = "" if (top == s_top and bot == s_bot) else "; clipped to the ground used"
        pieces.append(_borrow(ground.layers[index], top, bot))
        borrowed.append(Borrowed(s.from_depth, s.to_depth, s.material, index, top, bot, why + clipped))

    pieces.sort(key=lambda layer: -layer.top)
    # Cut the stratum intervals out of the ground model and slot the strata in.
    layers: list[Layer] = []
    for layer in ground.layers:
        segments = [(layer.top, layer.bottom)]
        for p in pieces:
            new = []
            for a, b in segments:
                if p.bottom >= a or p.top <= b:
                    new.append((a, b))
                    continue
                if a > p.top + LEVEL_TOL_M:
                    new.append((a, p.top))
                if p.bottom > b + LEVEL_TOL_M:
                    new.append((p.bottom, b))
            segments = new
        for a, b in segments:
            if a - b > LEVEL_TOL_M:
                layers.append(layer if (a, b) == (layer.top, layer.bottom) else _borrow(layer, a, b))
    layers.extend(pieces)
    layers.sort(key=lambda layer: -layer.top)
    # Snap tiny rounding gaps so the model stays exactly contiguous.
    snapped = [layers[0]]
    for layer in layers[1:]:
        prev = snapped[-1]
        if layer.top != prev.bottom:
            layer = _borrow(layer, prev.bottom, layer.bottom)
        snapped.append(layer)
    return GroundModel(tuple(snapped), ground.water_level), borrowed
