"""Stored rows as design_core inputs: the one place the app builds a ``PileDesign``, ``AsBuilt``,
``GroundModel`` or ``CapGroup``.

The query modules (``fieldapp.queries``) return rows; everything that turns rows into the inputs
design_core's checks take is here, so a new pile type or input has one room.

Functions
---------
``pile_design(row) -> PileDesign``
    A schedule row (``queries.piles.PileRow``) as designed (diameter in m from ``diameter_mm``).
``layer_from_values(values) -> Layer``, ``ground_from_values(water_level_m, layers) -> GroundModel``
    Stored-column dicts as design_core's ground (ValueError naming the layer and field).
``ground_model(row) -> GroundModel``
    A stored ground model (``queries.ground.GroundModelRow``).
``cap_group(cap_row, positions, asbuilt) -> CapGroup | None``
    A stored cap with its piles' design positions and the as-built positions surveyed so far.
``asbuilt_from_record(record) -> AsBuilt``
    A clean record dict (``record_input.validate_record`` or storage) as built.
``load_ground``, ``cap_group_for``, ``load_inputs``
    The same, read from the database for one pile (``RecheckInputs``).
``store_ground_model``
    Check a ground model's layers with design_core, then store them (nothing stored if invalid).
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass, field
from typing import Any

from design_core import Rules
from design_core.ground import GroundModel, Layer
from design_core.inputs import AsBuilt, CapGroup, CapPile, Delivery, PileDesign, StratumMet
from fieldapp.queries import caps as caps_q
from fieldapp.queries import ground as ground_q
from fieldapp.queries import projects, records
from fieldapp.record_input import NUMBER_FIELDS, parse_time


# --------------------------------------------------------------------------------------------
# Rows to inputs
# --------------------------------------------------------------------------------------------

def pile_design(row) -> PileDesign:
    """The design_core PileDesign of a schedule row (diameter in m from diameter_mm)."""
    return PileDesign(
        mark=row.mark, diameter=row.diameter_mm / 1000.0, cutoff_level=row.cutoff_level_m,
        toe_level=row.toe_level_m, easting=row.easting_m, northing=row.northing_m,
        pile_type=row.pile_type, compression=row.compression_kn, tension=row.tension_kn,
        shear=row.shear_kn, moment=row.moment_knm, n_bars=int(row.n_bars), bar_mm=row.bar_mm,
        cage_length=row.cage_length_m, fc_mpa=row.fc_mpa, fy_mpa=row.fy_mpa,
        exposure_class=row.exposure_class, cover_mm=row.cover_mm, head=row.head, cap=row.cap_mark)


def layer_from_values(values: dict) -> Layer:
    """A design_core Layer from a dict keyed by the stored column names (None for blanks)."""
    return Layer(values["top_level_m"], values["bottom_level_m"], values["material"],
                 values["unit_weight_kn_m3"], cu=values.get("cu_kpa"),
                 cu_bottom=values.get("cu_bottom_kpa"), phi=values.get("phi_deg"),
                 shaft_friction=values.get("shaft_friction_kpa"),
                 base_pressure=values.get("base_pressure_kpa"))


def ground_from_values(water_level_m: float, layers: list[dict]) -> GroundModel:
    """A design_core GroundModel from stored-column dicts; ValueError names what is wrong."""
    built = []
    for i, values in enumerate(layers):
        try:
            built.append(layer_from_values(values))
        except ValueError as exc:
            raise ValueError(f"layer {i + 1}: {exc}") from None
    return GroundModel(tuple(built), water_level_m)


def ground_model(row: ground_q.GroundModelRow) -> GroundModel:
    """A stored ground model (row with its layers) as a design_core GroundModel."""
    return GroundModel(tuple(layer_from_values(layer.__dict__) for layer in row.layers),
                       row.water_level_m)


def cap_group(cap_row, positions: list[tuple[str, float, float]],
              asbuilt: dict[str, tuple[float, float]] | None = None) -> CapGroup | None:
    """The cap as a design_core CapGroup, or None when it has no piles or does not exist.

    ``cap_row``: the stored cap (mark and ``queries.caps.CAP_LOAD_FIELDS``); ``positions``:
    (mark, design easting, design northing) of its piles; ``asbuilt`` maps pile mark ->
    (easting, northing) in m for piles already surveyed. The loads act at the centroid of the
    design positions (CapGroup's default load point).
    """
    if cap_row is None or not positions:
        return None
    asbuilt = asbuilt or {}
    piles = tuple(CapPile(mark, (e, n), tuple(asbuilt[mark]) if asbuilt.get(mark) is not None else None)
                  for mark, e, n in positions)
    return CapGroup(cap_row["mark"], piles, cap_row["n_kn"], cap_row["mx_knm"], cap_row["my_knm"],
                    cap_row["hx_kn"], cap_row["hy_kn"])


def asbuilt_from_record(record: dict[str, Any]) -> AsBuilt:
    """A clean record (from ``validate_record`` or storage) as a design_core ``AsBuilt``."""
    deliveries = tuple(
        Delivery(docket=d.get("docket", ""), volume_m3=d.get("volume_m3"),
                 batched_at=parse_time(d.get("batched_at")),
                 discharged_at=parse_time(d.get("discharged_at")), slump_mm=d.get("slump_mm"))
        for d in record.get("deliveries", ()))
    strata = tuple(
        StratumMet(s["from_depth"], s["to_depth"], s["material"], s.get("description", ""),
                   s.get("layer_index"))
        for s in record.get("strata", ()))
    kwargs = {name: record.get(name) for name in NUMBER_FIELDS}
    if record.get("permanent_casing") is not None:
        kwargs["permanent_casing"] = record["permanent_casing"]
    return AsBuilt(base_check=record.get("base_check"), exposure_class=record.get("exposure_class"),
                   deliveries=deliveries, strata=strata, **kwargs)


# --------------------------------------------------------------------------------------------
# Read from the database
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class RecheckInputs:
    """What the recheck of one pile takes, read from the database."""

    design: PileDesign
    ground: GroundModel
    rules: Rules
    rules_version: int
    group: CapGroup | None
    extras: dict[str, Any] = field(default_factory=dict)


def load_ground(conn: sqlite3.Connection, ground_model_id: int) -> GroundModel:
    """The stored ground model as a design_core GroundModel; LookupError when it does not exist."""
    row = ground_q.model_by_id(conn, ground_model_id)
    if row is None:
        raise LookupError(f"ground model {ground_model_id} does not exist")
    return ground_model(row)


def load_cap_group(conn: sqlite3.Connection, cap_id: int,
                   asbuilt: dict[str, tuple[float, float]] | None = None) -> CapGroup | None:
    """The stored cap ``cap_id`` as a CapGroup (``cap_group``), or None."""
    return cap_group(caps_q.cap_loads(conn, cap_id), caps_q.cap_pile_positions(conn, cap_id), asbuilt)


def cap_group_for(conn: sqlite3.Connection, pile_row,
                  record: dict[str, Any] | None = None) -> CapGroup | None:
    """The pile's cap with its loads and the as-built positions of its piles from their newest
    records, this record's easting/northing (when given) in place of the pile's own; None when
    the pile is not in a cap."""
    if pile_row.cap_id is None:
        return None
    positions = records.current_positions_in_cap(conn, pile_row.cap_id)
    positions.pop(pile_row.mark, None)
    if record and record.get("easting") is not None and record.get("northing") is not None:
        positions[pile_row.mark] = (record["easting"], record["northing"])
    return load_cap_group(conn, pile_row.cap_id, positions)


def load_inputs(conn: sqlite3.Connection, project_id: int, pile_row,
                record: dict[str, Any] | None = None, with_group: bool = True) -> RecheckInputs:
    """Design, ground model, current rules and cap group (``cap_group_for``) for one pile.

    ``with_group=False`` leaves the cap group out (None): enough to validate a record, which
    does not look at the cap.
    """
    rule_set = projects.current_rules(conn, project_id)
    group = cap_group_for(conn, pile_row, record) if with_group else None
    return RecheckInputs(pile_design(pile_row), load_ground(conn, pile_row.ground_model_id),
                         rule_set.rules, rule_set.version, group)


def store_ground_model(conn: sqlite3.Connection, project_id: int, name: str, water_level_m: float,
                       layers: list[dict], description: str = "",
                       ground_model_id: int | None = None) -> int:
    """Check the layers with design_core (``ground_from_values``), then store the ground model
    (``queries.ground.save_model``); its id. ValueError naming the layer and field, and nothing
    written, when design_core refuses it. Call inside db.write."""
    ground_from_values(water_level_m, layers)
    return ground_q.save_model(conn, project_id, name, water_level_m, layers, description,
                               ground_model_id)
