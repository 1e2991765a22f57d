"""Ground models and their layers.

Stored rows come back as small frozen dataclasses (``fieldapp.pile_inputs.ground_model`` turns
one into the ``design_core.ground.GroundModel`` the checks take). ``save_model`` stores layers
that ``fieldapp.pile_inputs.store_ground_model`` has checked with design_core first.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass

LAYER_FIELDS = ("top_level_m", "bottom_level_m", "material", "unit_weight_kn_m3", "cu_kpa",
                "cu_bottom_kpa", "phi_deg", "shaft_friction_kpa", "base_pressure_kpa", "description")


@dataclass(frozen=True)
class LayerRow:
    """One stored layer: levels in m, unit weight in kN/m3, strengths and pressures in kPa."""

    id: int
    ground_model_id: int
    position: int
    top_level_m: float
    bottom_level_m: float
    material: str
    unit_weight_kn_m3: float
    cu_kpa: float | None
    cu_bottom_kpa: float | None
    phi_deg: float | None
    shaft_friction_kpa: float | None
    base_pressure_kpa: float | None
    description: str


@dataclass(frozen=True)
class GroundModelRow:
    """One stored ground model with its layers, top down, and its water level (m)."""

    id: int
    project_id: int
    name: str
    description: str
    water_level_m: float
    layers: tuple[LayerRow, ...]

    @property
    def top_level_m(self) -> float | None:
        """Level of the ground surface (m), the top of the first layer."""
        return self.layers[0].top_level_m if self.layers else None

    @property
    def bottom_level_m(self) -> float | None:
        """Level of the bottom of the last layer (m)."""
        return self.layers[-1].bottom_level_m if self.layers else None


def _layer(row) -> LayerRow:
    return LayerRow(row["id"], row["ground_model_id"], row["position"], row["top_level_m"],
                    row["bottom_level_m"], row["material"], row["unit_weight_kn_m3"], row["cu_kpa"],
                    row["cu_bottom_kpa"], row["phi_deg"], row["shaft_friction_kpa"],
                    row["base_pressure_kpa"], row["description"])


def _layers(conn: sqlite3.Connection, ground_model_id: int) -> tuple[LayerRow, ...]:
    rows = conn.execute("SELECT * FROM layers WHERE ground_model_id = ? ORDER BY position",
                        (ground_model_id,)).fetchall()
    return tuple(_layer(r) for r in rows)


def _model(conn: sqlite3.Connection, row) -> GroundModelRow | None:
    if row is None:
        return None
    return GroundModelRow(row["id"], row["project_id"], row["name"], row["description"],
                          row["water_level_m"], _layers(conn, row["id"]))


def list_models(conn: sqlite3.Connection, project_id: int) -> list[GroundModelRow]:
    """Every ground model of the project with its layers, by name."""
    rows = conn.execute("SELECT * FROM ground_models WHERE project_id = ? ORDER BY name",
                        (project_id,)).fetchall()
    return [_model(conn, r) for r in rows]


def get_model(conn: sqlite3.Connection, project_id: int, ground_model_id: int) -> GroundModelRow | None:
    """One ground model of the project, or None (also None when it belongs to another project)."""
    row = conn.execute("SELECT * FROM ground_models WHERE id = ? AND project_id = ?",
                       (ground_model_id, project_id)).fetchone()
    return _model(conn, row)


def by_name(conn: sqlite3.Connection, project_id: int, name: str) -> GroundModelRow | None:
    """The project's ground model with this name, or None."""
    row = conn.execute("SELECT * FROM ground_models WHERE project_id = ? AND name = ?",
                       (project_id, name)).fetchone()
    return _model(conn, row)


def names(conn: sqlite3.Connection, project_id: int) -> dict[str, int]:
    """Ground model name -> id for the project."""
    return {r["name"]: r["id"] for r in conn.execute(
        "SELECT id, name FROM ground_models WHERE project_id = ?", (project_id,)).fetchall()}


def model_by_id(conn: sqlite3.Connection, ground_model_id: int) -> GroundModelRow | None:
    """The ground model with this id (any project), or None."""
    row = conn.execute("SELECT * FROM ground_models WHERE id = ?", (ground_model_id,)).fetchone()
    return _model(conn, row)


def save_model(conn: sqlite3.Connection, project_id: int, name: str, water_level_m: float,
               layers: list[dict], description: str = "", ground_model_id: int | None = None) -> int:
    """Insert (or, given ``ground_model_id``, replace) a ground model with its layers; its id.

    ``layers`` are dicts keyed by ``LAYER_FIELDS``, top down, already checked
    (``fieldapp.pile_inputs.store_ground_model`` checks them with design_core and calls this).
    ValueError, and nothing written, when another ground model of the project already has this
    name. Call inside db.write.
    """
    name = name.strip()
    if not name:
        raise ValueError("name is required")
    clash = conn.execute("SELECT id FROM ground_models WHERE project_id = ? AND name = ? AND id IS DISTINCT FROM ?",
                         (project_id, name, ground_model_id)).fetchone()
    if clash:
        raise ValueError(f"name: another ground model is already called {name!r}")
    if ground_model_id is None:
        cur = conn.execute(
            "INSERT INTO ground_models (project_id, name, description, water_level_m) VALUES (?, ?, ?, ?)",
            (project_id, name, description, water_level_m))
        ground_model_id = cur.lastrowid
    else:
        cur = conn.execute(
            "UPDATE ground_models SET name = ?, description = ?, water_level_m = ? "
            "WHERE id = ? AND project_id = ?",
            (name, description, water_level_m, ground_model_id, project_id))
        if cur.rowcount != 1:
            raise LookupError(f"ground model {ground_model_id} is not in project {project_id}")
        conn.execute("DELETE FROM layers WHERE ground_model_id = ?", (ground_model_id,))
    for position, values in enumerate(layers):
        conn.execute(
            "INSERT INTO layers (ground_model_id, position, top_level_m, bottom_level_m, material, "
            "unit_weight_kn_m3, cu_kpa, cu_bottom_kpa, phi_deg, shaft_friction_kpa, base_pressure_kpa, "
            "description) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (ground_model_id, position, values["top_level_m"], values["bottom_level_m"],
             values["material"], values["unit_weight_kn_m3"], values.get("cu_kpa"),
             values.get("cu_bottom_kpa"), values.get("phi_deg"), values.get("shaft_friction_kpa"),
             values.get("base_pressure_kpa"), values.get("description") or ""))
    return ground_model_id


def piles_using(conn: sqlite3.Connection, ground_model_id: int) -> int:
    """How many piles use this ground model."""
    return conn.execute("SELECT COUNT(*) FROM piles WHERE ground_model_id = ?",
                        (ground_model_id,)).fetchone()[0]


def extents(conn: sqlite3.Connection, project_id: int) -> dict[int, tuple[str, float, float]]:
    """Ground model id -> (name, top level m, bottom level m) for the project's models."""
    rows = conn.execute(
        "SELECT g.id, g.name, MAX(l.top_level_m) AS top, MIN(l.bottom_level_m) AS bottom "
        "FROM ground_models g JOIN layers l ON l.ground_model_id = g.id WHERE g.project_id = ? "
        "GROUP BY g.id, g.name", (project_id,)).fetchall()
    return {r["id"]: (r["name"], r["top"], r["bottom"]) for r in rows}


def piles_below(conn: sqlite3.Connection, ground_model_id: int, level_m: float) -> list[tuple[str, float]]:
    """(mark, toe level m) of the piles on this ground model whose design toe is below ``level_m``."""
    rows = conn.execute("SELECT mark, toe_level_m FROM piles WHERE ground_model_id = ? AND toe_level_m < ? "
                        "ORDER BY toe_level_m", (ground_model_id, level_m - 1e-6)).fetchall()
    return [(r["mark"], r["toe_level_m"]) for r in rows]


def piles_checked_on(conn: sqlite3.Connection, ground_model_id: int) -> int:
    """How many piles on this ground model already carry a verdict."""
    return conn.execute("SELECT COUNT(*) FROM piles WHERE ground_model_id = ? AND verdict IS NOT NULL",
                        (ground_model_id,)).fetchone()[0]
