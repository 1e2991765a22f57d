"""Driven piles: the driving record and its acceptance (checks ``driving_set``,
``driving_resistance``, ``driving_refusal``).

Units: depths in m below the commencing surface (the platform), levels in m (higher is up),
sets in mm per 10 blows, energies in kJ (1 kJ = 1 kN m = 1000 J), forces in kN.

What each check rests on
------------------------
* ``driving_set`` (the primary acceptance): the final set, measured over the last 10 blows at
  least ``rules.driving_min_sets`` times, against the driving criterion the engineer set for the
  pile or its group (the largest set per 10 blows for a stated rated hammer energy, from a
  wave-equation analysis or a dynamic test; ``DrivingCriterion`` holds its source). The worst
  (largest) of the last sets governs, and a later redrive set when it is larger (relaxation).
  A lighter blow gives a smaller set on the same pile, so a set that meets the criterion at an
  energy below the criterion's proves nothing (not checked); a set that fails it even so is
  short. A blow at or above the criterion's energy is on the safe side.
* ``driving_resistance`` (a secondary cross-check, weaker evidence than the set criterion): the
  FHWA-modified Gates formula on the governing set, factored by ``rules.gates_phi`` (limit state)
  or divided by ``rules.gates_fs`` (working stress), against the design compression on the same
  basis as the axial check.
* ``driving_refusal``: blows per 0.25 m above ``rules.driving_refusal_blows_per_250mm`` in any
  interval that ends at or above the design toe: a possible obstruction or pile damage for the
  engineer to judge.

The toe of a driven pile follows from its elements: ``toe_from_elements``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any, Iterable, Mapping

from design_core.loads import axial_demand
from design_core.checks import Check
from design_core.rules import Rules
from design_core.validate import number

CODES = ("driving_set", "driving_resistance", "driving_refusal")
HAMMER_TYPES = ("drop", "diesel", "hydraulic")
BLOW_INTERVAL_M = 0.25     # the driving log counts blows per 0.25 m
SET_BLOWS = 10             # the final set is the penetration over this many blows
_TOL = 1e-9


# --------------------------------------------------------------------------------------------
# Formulas
# --------------------------------------------------------------------------------------------

def modified_gates(energy_kj: float, blows_per_25mm: float) -> float:
    """Ultimate resistance R_u (kN) by the FHWA-modified Gates formula, in SI units.

    R_u = 6.7 sqrt(E_r) log10(10 N_b) - 445, E_r the rated hammer energy per blow in J
    (``energy_kj`` x 1000), N_b the blows per 25 mm at final set (FHWA NHI-05-042, Hannigan et
    al. 2006; from memory, and checked by hand against the US form R_u = 1.75 sqrt(E) log10(10 N)
    - 100 kips with E in ft-lb and N in blows per inch: tests/validation). A value below zero is
    returned as 0 kN. Valid for 0 < energy_kj <= 2000 and 0 < blows_per_25mm <= 1000; the
    formula is an end-of-drive estimate only.
    """
    energy_kj = number("energy_kj", energy_kj, 0.0, 2000.0)
    blows = number("blows_per_25mm", blows_per_25mm, 0.0, 1000.0)
    if energy_kj <= 0.0:
        raise ValueError(f"energy_kj must be greater than 0, got {energy_kj:g}")
    if blows <= 0.0:
        raise ValueError(f"blows_per_25mm must be greater than 0, got {blows:g}")
    r_u = 6.7 * math.sqrt(energy_kj * 1000.0) * math.log10(10.0 * blows) - 445.0
    return max(0.0, r_u)


def blows_per_25mm(set_mm_per_10: float) -> float:
    """Blows per 25 mm N_b from a set (mm) over 10 blows: N_b = 10 / (set / 25).

    Definition (average penetration per blow). ``set_mm_per_10`` in mm, 0 < set <= 500.
    """
    s = number("set_mm_per_10", set_mm_per_10, 0.0, 500.0)
    if s <= 0.0:
        raise ValueError("set_mm_per_10 must be greater than 0 mm for blows per 25 mm")
    return SET_BLOWS / (s / 25.0)


# --------------------------------------------------------------------------------------------
# Inputs
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Hammer:
    """The hammer: type (drop, diesel, hydraulic), ram weight ``ram_kn`` (kN), drop height
    ``drop_m`` (m), rated energy per blow ``energy_kj`` (kJ) and efficiency (0-1, stated with
    its source on the record). Every value but the type is optional.
    """

    type: str
    ram_kn: float | None = None
    drop_m: float | None = None
    energy_kj: float | None = None
    efficiency: float | None = None

    def __post_init__(self):
        if self.type not in HAMMER_TYPES:
            raise ValueError(f"hammer type must be one of {', '.join(HAMMER_TYPES)}, got {self.type!r}")
        number("ram_kn", self.ram_kn, 0.1, 5000.0, optional=True)
        number("drop_m", self.drop_m, 0.01, 10.0, optional=True)
        number("energy_kj", self.energy_kj, 0.1, 2000.0, optional=True)
        number("efficiency", self.efficiency, 0.05, 1.0, optional=True)

    @property
    def rated_energy_kj(self) -> float | None:
        """Rated energy per blow (kJ): ``energy_kj`` as stated, else ram_kn x drop_m (W h), else None."""
        if self.energy_kj is not None:
            return float(self.energy_kj)
        if self.ram_kn is not None and self.drop_m is not None:
            return float(self.ram_kn) * float(self.drop_m)
        return None


@dataclass(frozen=True)
class DrivenElement:
    """One element of the pile: length ``length_m`` (m) and the splice at its head ("" none)."""

    length_m: float
    splice: str = ""

    def __post_init__(self):
        number("length_m", self.length_m, 0.1, 100.0)
        if not isinstance(self.splice, str) or len(self.splice) > 60:
            raise ValueError(f"splice must be text of at most 60 characters, got {self.splice!r}")


@dataclass(frozen=True)
class Redrive:
    """A redrive: when (``at``, ISO date or date-time text) and the set on redrive (mm per 10 blows)."""

    at: str
    set_mm_per_10: float

    def __post_init__(self):
        if not isinstance(self.at, str) or not self.at or len(self.at) > 40:
            raise ValueError(f"redrive at must be a date text of 1-40 characters, got {self.at!r}")
        number("set_mm_per_10", self.set_mm_per_10, 0.0, 500.0)


def _objects(data: Mapping[str, Any], key: str, keys: str) -> list[Mapping[str, Any]]:
    """The list of objects under ``key`` of a record body; ValueError naming it otherwise."""
    items = data.get(key) or []
    if not isinstance(items, (list, tuple)) or not all(isinstance(i, Mapping) for i in items):
        raise ValueError(f"{key} must be a list of objects with {keys}")
    return list(items)


@dataclass(frozen=True)
class DrivingRecord:
    """The driving record of one pile.

    ``blows_per_250mm``: blows in each 0.25 m of penetration from the top down, the first
    starting at ``from_depth_m`` (m below the platform). ``final_set_mm_per_10``: the sets
    measured at the end of driving, in order (mm per 10 blows). ``redrive``: redrives in order.
    ``elements``: the pile's elements from the toe up.
    """

    hammer: Hammer
    blows_per_250mm: tuple[int, ...] = ()
    from_depth_m: float = 0.0
    final_set_mm_per_10: tuple[float, ...] = ()
    redrive: tuple[Redrive, ...] = ()
    elements: tuple[DrivenElement, ...] = ()

    def __post_init__(self):
        if not isinstance(self.hammer, Hammer):
            raise ValueError(f"hammer must be a Hammer, got {type(self.hammer).__name__}")
        number("from_depth_m", self.from_depth_m, 0.0, 200.0)
        if len(self.blows_per_250mm) > 800:
            raise ValueError(f"blows_per_250mm must have at most 800 intervals, got {len(self.blows_per_250mm)}")
        for k, b in enumerate(self.blows_per_250mm):
            if isinstance(b, bool) or not isinstance(b, int) or not 0 <= b <= 10_000:
                raise ValueError(f"blows_per_250mm[{k}] must be a whole number from 0 to 10000, got {b!r}")
        for k, s in enumerate(self.final_set_mm_per_10):
            number(f"final_set_mm_per_10[{k}]", s, 0.0, 500.0)
        for name, items, kind in (("redrive", self.redrive, Redrive),
                                  ("elements", self.elements, DrivenElement)):
            for k, item in enumerate(items):
                if not isinstance(item, kind):
                    raise ValueError(f"{name}[{k}] must be a {kind.__name__}")

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> "DrivingRecord":
        """A record from the record body's keys: ``hammer`` (type, ram_kn, drop_m, energy_kj,
        efficiency), ``blows_per_250mm``, ``from_depth_m``, ``final_set_mm_per_10``, ``redrive``
        (list of at, set_mm_per_10) and ``elements`` (list of length_m, splice).
        """
        h = data.get("hammer") or {}
        if not isinstance(h, Mapping):
            raise ValueError("hammer must be an object with type, ram_kn, drop_m, energy_kj, efficiency")
        hammer = Hammer(h.get("type", ""), h.get("ram_kn"), h.get("drop_m"), h.get("energy_kj"),
                        h.get("efficiency"))
        return cls(
            hammer=hammer,
            blows_per_250mm=tuple(data.get("blows_per_250mm") or ()),
            from_depth_m=data.get("from_depth_m", 0.0) or 0.0,
            final_set_mm_per_10=tuple(data.get("final_set_mm_per_10") or ()),
            redrive=tuple(Redrive(r.get("at", ""), r.get("set_mm_per_10"))
                          for r in _objects(data, "redrive", "at, set_mm_per_10")),
            elements=tuple(DrivenElement(e.get("length_m"), e.get("splice") or "")
                           for e in _objects(data, "elements", "length_m, splice")),
        )

    @property
    def log_depth_m(self) -> float:
        """Depth (m) the driving log reaches: from_depth_m + 0.25 m per interval."""
        return self.from_depth_m + BLOW_INTERVAL_M * len(self.blows_per_250mm)

    def intervals(self) -> list[tuple[float, float, int]]:
        """The log as (top depth m, bottom depth m, blows) from the top down."""
        z0 = self.from_depth_m
        return [(z0 + k * BLOW_INTERVAL_M, z0 + (k + 1) * BLOW_INTERVAL_M, b)
                for k, b in enumerate(self.blows_per_250mm)]


@dataclass(frozen=True)
class DrivingCriterion:
    """The driving criterion of a pile or group: the largest final set ``max_set_mm_per_10``
    (mm per 10 blows) at the rated energy per blow ``energy_kj`` (kJ), with its ``source`` (the
    wave-equation analysis or dynamic test). With ``efficiency`` (0-1) the energies compared are
    the delivered ones (rated x efficiency) and the hammer's efficiency must be recorded.
    """

    max_set_mm_per_10: float
    energy_kj: float
    source: str
    efficiency: float | None = None

    def __post_init__(self):
        number("max_set_mm_per_10", self.max_set_mm_per_10, 0.1, 200.0)
        number("energy_kj", self.energy_kj, 0.1, 2000.0)
        if not isinstance(self.source, str) or len(self.source.strip()) < 3:
            raise ValueError("source of the driving criterion is required (the analysis or test)")
        number("efficiency", self.efficiency, 0.05, 1.0, optional=True)


def criterion_from_dict(data: Mapping[str, Any] | None) -> DrivingCriterion | None:
    """A criterion from a schedule or group row (max_set_mm_per_10, energy_kj, source,
    efficiency); None for an empty row. ValueError names the field for bad values."""
    if not data:
        return None
    return DrivingCriterion(data.get("max_set_mm_per_10"), data.get("energy_kj"),
                            data.get("source") or "", data.get("efficiency"))


def criterion_from_rules(rules: Rules) -> DrivingCriterion | None:
    """The project's default criterion from the rules, or None when the rules set none (0)."""
    if rules.driving_set_max_mm_per_10 <= 0.0 or rules.driving_criterion_energy_kj <= 0.0:
        return None
    return DrivingCriterion(rules.driving_set_max_mm_per_10, rules.driving_criterion_energy_kj,
                            "project rules (driving_set_max_mm_per_10, driving_criterion_energy_kj)")


# --------------------------------------------------------------------------------------------
# Toe from the elements
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class DrivenToe:
    """Toe of a driven pile (m): ``toe_level`` = head level after driving - pitched length.

    ``pitched_length_m`` sums the elements; ``trim_m`` = head level after driving - cut-off
    level (negative: the head was driven below the cut-off and needs building up);
    ``length_below_cutoff_m`` = cut-off - toe.
    """

    toe_level: float
    pitched_length_m: float
    trim_m: float
    length_below_cutoff_m: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def toe_from_elements(cutoff_level_m: float, head_level_after_driving_m: float,
                      elements: Iterable[DrivenElement]) -> DrivenToe:
    """Toe level (m) of a driven pile from its elements and the head level after driving.

    toe = head level after driving - sum of element lengths (the pile as pitched, splices
    adding no length). Levels in m (higher is up), lengths in m; ValueError for no elements.
    """
    cutoff = number("cutoff_level_m", cutoff_level_m, -10_000.0, 10_000.0)
    head = number("head_level_after_driving_m", head_level_after_driving_m, -10_000.0, 10_000.0)
    elements = tuple(elements)
    if not elements:
        raise ValueError("elements must list at least one element (length_m)")
    for k, e in enumerate(elements):
        if not isinstance(e, DrivenElement):
            raise ValueError(f"elements[{k}] must be a DrivenElement")
    length = sum(e.length_m for e in elements)
    toe = head - length
    trim = head - cutoff
    splices = sum(1 for e in elements[:-1] if e.splice) if len(elements) > 1 else 0
    text = (f"Toe {toe:.2f} m from head {head:.2f} m after driving less {length:.2f} m pitched "
            f"({len(elements)} element{'s' if len(elements) > 1 else ''}, {splices} splice"
            f"{'s' if splices != 1 else ''})")
    if trim < -_TOL:
        text += f"; head {abs(trim):.2f} m below the cut-off {cutoff:.2f} m: build-up needed"
    else:
        text += f"; trim {trim:.2f} m to the cut-off {cutoff:.2f} m"
    return DrivenToe(toe, length, trim, cutoff - toe, text)


# --------------------------------------------------------------------------------------------
# Checks
# --------------------------------------------------------------------------------------------

def _governing_set(record: DrivingRecord, rules: Rules) -> tuple[float, str] | str:
    """The set (mm per 10 blows) that governs and how it was found, or why there is none."""
    n = int(rules.driving_min_sets)
    sets = record.final_set_mm_per_10
    if len(sets) < n:
        return (f"{len(sets)} final set{'s' if len(sets) != 1 else ''} recorded, at least {n} "
                "needed (final_set_mm_per_10)")
    last = sets[-n:]
    worst = float(max(last))
    how = f"worst of the last {n} sets: {', '.join(f'{s:g}' for s in last)} mm"
    if record.redrive:
        r = record.redrive[-1]
        trend = "set-up" if r.set_mm_per_10 < worst else ("relaxation" if r.set_mm_per_10 > worst
                                                            else "no change")
        if r.set_mm_per_10 > worst:
            worst = float(r.set_mm_per_10)
            how = f"redrive {r.at} set {r.set_mm_per_10:g} mm, larger than at the end of driving ({trend})"
        else:
            how += f"; redrive {r.at} set {r.set_mm_per_10:g} mm ({trend}, not relied on)"
    return worst, how


def _energies(record: DrivingRecord, criterion: DrivingCriterion) -> tuple[float, float, str] | str:
    """(this blow's energy kJ, the criterion's energy kJ, basis) or why they cannot be compared."""
    rated = record.hammer.rated_energy_kj
    if rated is None:
        return "Hammer energy not recorded (hammer energy_kj, or ram_kn and drop_m)"
    if criterion.efficiency is None:
        return rated, criterion.energy_kj, "rated"
    if record.hammer.efficiency is None:
        return ("Hammer efficiency not recorded (hammer efficiency): the criterion states "
                f"{criterion.efficiency:g}, so delivered energies must be compared")
    return (rated * record.hammer.efficiency, criterion.energy_kj * criterion.efficiency,
            "delivered")


def check_driving_set(record: DrivingRecord, criterion: DrivingCriterion | None,
                      rules: Rules | None = None) -> Check:
    """``driving_set``: the governing final set (mm per 10 blows) against the criterion's most.

    value = governing set, limit = criterion's max set, utilisation = value / limit. Not checked
    without a criterion, with fewer than ``rules.driving_min_sets`` sets, without the hammer
    energy, or when this hammer's energy is below the criterion's and the set meets it (a
    lighter blow proves less). See the module docstring.
    """
    code, rules = "driving_set", rules or Rules()
    if criterion is None:
        criterion = criterion_from_rules(rules)
    if criterion is None:
        return Check.not_checked(code, "mm", "No driving criterion set for this pile or its group "
                                 "(most set per 10 blows at a stated hammer energy)")
    got = _governing_set(record, rules)
    if isinstance(got, str):
        return Check.not_checked(code, "mm", got)
    s, how = got
    energy = _energies(record, criterion)
    if isinstance(energy, str):
        return Check.not_checked(code, "mm", energy)
    e, e_crit, basis = energy
    limit = criterion.max_set_mm_per_10
    util = s / limit
    ok = s <= limit + _TOL
    crit = f"criterion {limit:g} mm per 10 blows at {e_crit:.0f} kJ {basis} ({criterion.source})"
    if e < e_crit - _TOL:
        if not ok:
            return Check(code, s, limit, "mm", util, False,
                         f"Set {s:g} mm per 10 blows ({how}) exceeds the {crit} even at the lower "
                         f"energy {e:.0f} kJ: short of the criterion")
        return Check.not_checked(
            code, "mm", f"Set {s:g} mm per 10 blows at {e:.0f} kJ {basis}, below the energy of the "
            f"{crit}: a lighter blow proves less; redrive at the criterion's energy")
    verb = "within" if ok else "exceeds"
    return Check(code, s, limit, "mm", util, ok,
                 f"Set {s:g} mm per 10 blows ({how}) at {e:.0f} kJ {basis} {verb} the {crit}")


@dataclass(frozen=True)
class GatesResult:
    """The dynamic formula cross-check: energy (kJ, rated), the set (mm per 10 blows) and N_b
    (blows per 25 mm) used, R_u (kN, ultimate) and the design resistance (kN) by the rules."""

    energy_kj: float
    set_mm_per_10: float
    blows_per_25mm: float
    ultimate_kn: float
    design_kn: float
    design_approach: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def gates_resistance(record: DrivingRecord, rules: Rules | None = None) -> GatesResult | str:
    """FHWA-modified Gates on the governing set of ``record``, or why it cannot be made.

    Design = ``gates_phi`` x R_u (limit state) or R_u / ``gates_fs`` (working stress).
    """
    rules = rules or Rules()
    got = _governing_set(record, rules)
    if isinstance(got, str):
        return got
    s, how = got
    energy = record.hammer.rated_energy_kj
    if energy is None:
        return "Hammer energy not recorded (hammer energy_kj, or ram_kn and drop_m)"
    if s < 0.25:  # N_b above 1000 blows per 25 mm: refusal, beyond the formula's range
        return f"Set {s:g} mm per 10 blows (refusal): the dynamic formula does not apply"
    n_b = blows_per_25mm(s)
    r_u = modified_gates(energy, n_b)
    if rules.design_approach == "limit_state":
        design, how_d = rules.gates_phi * r_u, f"phi {rules.gates_phi:g}"
    else:
        design, how_d = r_u / rules.gates_fs, f"FS {rules.gates_fs:g}"
    text = (f"FHWA-modified Gates R_u {r_u:.0f} kN ({how_d}: design {design:.0f} kN) from "
            f"{energy:.0f} kJ rated and {n_b:.1f} blows per 25 mm ({how})")
    return GatesResult(energy, s, n_b, r_u, design, rules.design_approach, text)


def check_driving_resistance(record: DrivingRecord, compression_kn: float,
                             rules: Rules | None = None) -> Check:
    """``driving_resistance``: the dynamic formula's design resistance against the compression.

    ``compression_kn`` is the design compression as the schedule gives it (``rules.loads_are``),
    converted to the resistance's basis as the axial check does. value = demand (kN), limit =
    design resistance (kN). The reason calls it the weaker evidence it is.
    """
    code, rules = "driving_resistance", rules or Rules()
    load = number("compression_kn", compression_kn, 0.0, 1e6)
    weaker = "dynamic formula cross-check, weaker evidence than the set criterion"
    if load <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, f"No compression load in the design ({weaker})")
    res = gates_resistance(record, rules)
    if isinstance(res, str):
        return Check.not_checked(code, "kN", f"{res} ({weaker})")
    demand = axial_demand(load, rules)
    util = demand / res.design_kn if res.design_kn > 0 else math.inf
    ok = util <= 1.0 + _TOL
    basis = "Working" if rules.design_approach == "working_stress" else "Factored"
    verb = "within" if ok else "exceeds"
    return Check(code, demand, res.design_kn, "kN", util, ok,
                 f"{basis} load {demand:.0f} kN {verb} {res.reason} ({weaker})")


def check_driving_refusal(record: DrivingRecord, design_toe_depth_m: float | None,
                          rules: Rules | None = None) -> Check:
    """``driving_refusal``: the most blows per 0.25 m in the intervals ending at or above the
    design toe depth (m below the platform) against ``rules.driving_refusal_blows_per_250mm``.

    value = most blows, limit = the refusal limit, utilisation = value / limit. Beyond the limit
    before the design toe: a possible obstruction or pile damage for the engineer. Not checked
    without a driving log or the design toe depth.
    """
    code, rules = "driving_refusal", rules or Rules()
    limit = rules.driving_refusal_blows_per_250mm
    if not record.blows_per_250mm:
        return Check.not_checked(code, "blows", "No driving log recorded (blows_per_250mm)")
    if design_toe_depth_m is None:
        return Check.not_checked(code, "blows", "Design toe depth below the platform not known "
                                 "(platform_level)")
    toe = number("design_toe_depth_m", design_toe_depth_m, 0.0, 500.0)
    above = [iv for iv in record.intervals() if iv[1] <= toe + 1e-6]
    if not above:
        return Check(code, 0.0, limit, "blows", 0.0, True,
                     f"The driving log starts at or below the design toe depth {toe:.2f} m; "
                     "nothing before it to check")
    top, bot, most = max(above, key=lambda iv: (iv[2], -iv[0]))
    util = most / limit
    ok = most <= limit + _TOL
    if ok:
        text = (f"Most {most} blows per 0.25 m ({top:.2f}-{bot:.2f} m) before the design toe "
                f"depth {toe:.2f} m, within the refusal limit {limit:g}")
    else:
        first = next(iv for iv in above if iv[2] > limit + _TOL)
        text = (f"{most} blows per 0.25 m at {top:.2f}-{bot:.2f} m, beyond the refusal limit "
                f"{limit:g} from {first[0]:.2f} m, before the design toe depth {toe:.2f} m: possible "
                "obstruction or pile damage, for the engineer")
    return Check(code, float(most), limit, "blows", util, ok, text)
