"""Invented test data shared by the app tests: ground models, piles and small sites.

Nothing here is a real site. The values only have to be consistent with each other (a toe
below the cut-off, layers contiguous from the top down); each test that depends on a value
passes it itself, so the defaults below are there to be overridden.

* ``make_ground(conn, project_id, layers=TWO_LAYERS, ...)`` stores a ground model (checked by
  design_core first, as the Ground screen does) and returns its id.
* ``pile_values(mark, ground_model_id, cap_id=None, **changes)`` the stored-column values of a
  pile; ``make_pile(conn, project_id, mark, ground_model_id, cap_id=None, **changes)`` stores
  one and returns its id.
* ``make_site(app, project_id, layers=..., caps=..., piles=...)`` a ground model, caps and piles
  in one transaction; returns the ids (``Site``).

``conn`` functions run inside the caller's ``db.write``; ``make_site`` opens its own.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from fieldapp import db
from fieldapp.pile_inputs import store_ground_model
from fieldapp.queries import caps, piles

# Firm clay (c_u 60 to 90 kPa) over dense sand (phi' 34 degrees), ground at +10 m: invented.
TWO_LAYERS = [
    dict(top_level_m=10.0, bottom_level_m=5.0, material="cohesive", unit_weight_kn_m3=19.0,
         cu_kpa=60.0, cu_bottom_kpa=90.0),
    dict(top_level_m=5.0, bottom_level_m=-20.0, material="cohesionless", unit_weight_kn_m3=20.0,
         phi_deg=34.0),
]

PILE_DEFAULTS = {
    "pile_type": "bored", "easting_m": 100.0, "northing_m": 200.0, "cutoff_level_m": 9.0,
    "toe_level_m": -5.0, "diameter_mm": 600.0, "compression_kn": 900.0, "tension_kn": 0.0,
    "shear_kn": 20.0, "moment_knm": 0.0, "n_bars": 8, "bar_mm": 20.0, "cage_length_m": 8.0,
    "fc_mpa": 40.0, "fy_mpa": 500.0, "exposure_class": "XC2", "cover_mm": 75.0, "head": "free",
}


def make_ground(conn, project_id: int, layers: list[dict] | None = None, name: str = "Zone 1",
                water_level_m: float = 8.0, description: str = "") -> int:
    """Store a ground model of ``layers`` (stored-column dicts, top down); its id."""
    return store_ground_model(conn, project_id, name, water_level_m,
                              [dict(layer) for layer in (layers or TWO_LAYERS)], description)


def pile_values(mark: str, ground_model_id: int, cap_id: int | None = None, **changes) -> dict:
    """Every stored design value of a pile (``PILE_DEFAULTS`` with ``changes``)."""
    values = {"mark": mark, "cap_id": cap_id, "ground_model_id": ground_model_id, **PILE_DEFAULTS}
    unknown = set(changes) - set(values)
    if unknown:
        raise KeyError(f"not a pile value: {sorted(unknown)}")
    values.update(changes)
    return values


def make_pile(conn, project_id: int, mark: str, ground_model_id: int, cap_id: int | None = None,
              **changes) -> int:
    """Store a pile (``pile_values``); its id."""
    return piles.save_pile(conn, project_id, pile_values(mark, ground_model_id, cap_id, **changes))


@dataclass
class Site:
    """What ``make_site`` stored: the ground model's id, cap ids and pile ids by mark."""

    ground: int
    caps: dict[str, int] = field(default_factory=dict)
    piles: dict[str, int] = field(default_factory=dict)


def make_site(app, project_id: int, layers: list[dict] | None = None, *, ground_name: str = "Zone 1",
              water_level_m: float = 8.0, description: str = "",
              caps_loads: dict[str, dict] | None = None,
              pile_list: list[tuple[str, str | None, dict]] | None = None) -> Site:
    """A ground model, caps (mark -> loads by ``queries.caps.CAP_LOAD_FIELDS``) and piles
    ((mark, cap mark or None, changes to ``PILE_DEFAULTS``)) in the project, in one transaction."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            site = Site(make_ground(conn, project_id, layers, ground_name, water_level_m, description))
            for mark, loads in (caps_loads or {}).items():
                site.caps[mark] = caps.save_cap(conn, project_id, mark, loads)
            for mark, cap_mark, changes in pile_list or []:
                cap_id = site.caps[cap_mark] if cap_mark else None
                site.piles[mark] = make_pile(conn, project_id, mark, site.ground, cap_id, **changes)
    return site
