"""The pile as built: the geometry and ground the checks use, with where each value came from.

``as_built_pile(design, asbuilt, ground, rules)`` works out, from the record:

* the diameter (``diameter_mm``), cut-off (``cutoff_level``), cover, concrete strength, exposure
  class and casing as built; where one was not recorded the design value stands in and a note
  says so (the check that asks for the measurement is then "not checked");
* the plan deviation (mm) from ``easting``/``northing``;
* the toe (``platform_level`` - ``measured_depth``; no stand-in);
* the ground under the pile, rebuilt from the strata logged (``ground_from_strata``) when
  ``platform_level`` and the toe were recorded; the notes say which layer each stratum
  borrowed from. The base takes the stratum met at the toe when the strata reach it
  (``strata_for_base``; ``base_stratum``).

``prepare`` also checks the inputs' types. Levels in m, lengths in mm where named so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

from design_core.ground import LEVEL_TOL_M, GroundModel, ground_from_strata
from design_core.inputs import AsBuilt, CapGroup, PileDesign, StratumMet
from design_core.rules import Rules

BASE_STRATUM_M = 0.001   # a stratum logged down to the toe is taken on this far below it


def strata_for_base(strata, depth: float) -> tuple[tuple[StratumMet, ...], StratumMet | None]:
    """The strata to rebuild the ground from for a toe ``depth`` m below the platform, and the
    stratum met at the toe (None when the strata stop above it).

    The base takes the ground just below the toe. A stratum logged across the toe (from above
    it to below it) or starting at it is that ground already. A stratum logged down to the toe
    and no further is taken on ``BASE_STRATUM_M`` below it: what the inspector saw at the base
    is the stratum the base sits on. Otherwise the ground model gives the base.
    """
    strata = tuple(strata)
    for s in strata:
        if s.from_depth <= depth + LEVEL_TOL_M and s.to_depth > depth + LEVEL_TOL_M:
            return strata, s
    for k, s in enumerate(strata):
        if abs(s.to_depth - depth) <= LEVEL_TOL_M:
            longer = replace(s, to_depth=depth + BASE_STRATUM_M)
            return strata[:k] + (longer,) + strata[k + 1:], s
    return strata, None


def fmt_m(x: float) -> str:
    """A level or length for a reason: two decimals and the unit."""
    return f"{x:.2f} m"


@dataclass
class AsBuiltPile:
    """Geometry and ground the checks use, with where each value came from.

    diameter (m), cutoff and toe (m, toe None when not recorded), cover_mm, fc_mpa, exposure
    class and casing as built or as designed (notes say which); dev_mm, dx_mm, dy_mm the plan
    deviation (mm, None when not surveyed); ground the ground used (rebuilt from the strata met
    when ``rebuilt``), ``borrowed`` one ``Borrowed`` per stratum; ``ground_error`` why the
    strata could not be placed, or None.
    """

    design: PileDesign
    asbuilt: AsBuilt
    rules: Rules
    ground: GroundModel
    diameter: float
    cutoff: float
    toe: float | None
    cover_mm: float
    fc_mpa: float
    exposure_class: str
    casing: bool
    dev_mm: float | None
    dx_mm: float | None
    dy_mm: float | None
    rebuilt: bool
    borrowed: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    ground_error: str | None = None
    base_stratum: StratumMet | None = None


def as_built_pile(design: PileDesign, asbuilt: AsBuilt, ground: GroundModel,
                  rules: Rules) -> AsBuiltPile:
    """The as-built geometry and ground of one pile (see the module docstring)."""
    notes: list[str] = []
    d = design.diameter
    if asbuilt.diameter_mm is not None:
        d = asbuilt.diameter_mm / 1000.0
    else:
        notes.append(f"Diameter not recorded: design diameter {design.diameter * 1000:.0f} mm used")
    cutoff = design.cutoff_level
    if asbuilt.cutoff_level is not None:
        cutoff = asbuilt.cutoff_level
    else:
        notes.append(f"Cut-off level not recorded: design cut-off {fmt_m(design.cutoff_level)} used")
    cover = design.cover_mm if asbuilt.cover_mm is None else asbuilt.cover_mm
    fc = design.fc_mpa if asbuilt.concrete_mpa is None else asbuilt.concrete_mpa
    exposure = asbuilt.exposure_class or design.exposure_class
    casing = design.permanent_casing if asbuilt.permanent_casing is None else asbuilt.permanent_casing
    dev = dx = dy = None
    if asbuilt.easting is not None and asbuilt.northing is not None:
        dx = (asbuilt.easting - design.easting) * 1000.0
        dy = (asbuilt.northing - design.northing) * 1000.0
        dev = math.hypot(dx, dy)
    toe = asbuilt.toe_level
    pile = AsBuiltPile(design, asbuilt, rules, ground, d, cutoff, toe, cover, fc, exposure,
                       casing, dev, dx, dy, False, [], notes)
    if asbuilt.strata:
        if asbuilt.platform_level is None or toe is None:
            missing = "platform_level" if asbuilt.platform_level is None else "measured_depth"
            notes.append(f"Strata were logged but {missing} was not recorded: the ground model "
                         "is used as it stands")
        else:
            depth = asbuilt.measured_depth
            used, at_toe = strata_for_base(asbuilt.strata, depth)
            clip = toe - BASE_STRATUM_M if at_toe is not None else toe
            try:
                new, borrowed = ground_from_strata(ground, asbuilt.platform_level, used,
                                                   max(clip, ground.bottom))
            except ValueError as exc:
                pile.ground_error = f"The strata met could not be placed in the ground model: {exc}"
                notes.append(pile.ground_error)
            else:
                # each Borrowed keeps the depths as logged
                borrowed = [replace(b, from_depth=s.from_depth, to_depth=s.to_depth)
                            for b, s in zip(borrowed, asbuilt.strata, strict=True)]
                pile.ground, pile.borrowed, pile.rebuilt = new, borrowed, True
                pile.base_stratum = at_toe
                for b in borrowed:
                    notes.append(f"Stratum {b.from_depth:g}-{b.to_depth:g} m ({b.material}): "
                                 f"{b.reason}")
    return pile


def prepare(design, asbuilt, ground, rules, group) -> AsBuiltPile:
    """Check the inputs' types (ValueError naming the argument) and work out the as-built pile;
    ``asbuilt=None`` is an empty record."""
    if not isinstance(design, PileDesign):
        raise ValueError(f"design must be a PileDesign, got {type(design).__name__}")
    if not isinstance(ground, GroundModel):
        raise ValueError(f"ground must be a GroundModel, got {type(ground).__name__}")
    if not isinstance(rules, Rules):
        raise ValueError(f"rules must be a Rules, got {type(rules).__name__}")
    asbuilt = AsBuilt() if asbuilt is None else asbuilt
    if not isinstance(asbuilt, AsBuilt):
        raise ValueError(f"asbuilt must be an AsBuilt or None, got {type(asbuilt).__name__}")
    if group is not None and not isinstance(group, CapGroup):
        raise ValueError(f"group must be a CapGroup, got {type(group).__name__}")
    return as_built_pile(design, asbuilt, ground, rules)


def unrecorded(pile: AsBuiltPile, *names: str) -> str:
    """The record fields among ``names`` that were not recorded, comma-separated."""
    return ", ".join(n for n in names if getattr(pile.asbuilt, n) is None)


def toe_problem(pile: AsBuiltPile) -> str | None:
    """Why the checks that need the toe cannot be made, or None."""
    if pile.ground_error:
        return pile.ground_error
    if pile.toe is None:
        return f"As-built toe not recorded ({unrecorded(pile, 'platform_level', 'measured_depth')})"
    g = pile.ground
    if pile.toe >= min(pile.cutoff, g.top):
        return (f"As-built toe {fmt_m(pile.toe)} is not below the cut-off {fmt_m(pile.cutoff)} and "
                f"the ground surface {fmt_m(g.top)}")
    if pile.toe < g.bottom - LEVEL_TOL_M:
        return (f"As-built toe {fmt_m(pile.toe)} is below the bottom of the ground model "
                f"{fmt_m(g.bottom)}: extend the ground model")
    return None
