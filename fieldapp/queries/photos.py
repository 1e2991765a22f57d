"""Photos of piles (table ``photos``); the image files themselves are handled by
``fieldapp.photos`` and live on disk by SHA-256."""

from __future__ import annotations

import sqlite3
from dataclasses import asdict, dataclass
from typing import Any

from fieldapp.queries.audit import now_iso

KINDS = ("base", "cage", "pour", "finished", "other")


@dataclass(frozen=True)
class Photo:
    """One stored photo: which pile, kind, caption, hash of the original, sizes in pixels."""

    id: int
    project_id: int
    pile_id: int
    client_id: str
    kind: str
    caption: str
    sha256: str
    format: str
    taken_at: str | None
    uploaded_at: str
    uploaded_by: int | None
    uploaded_by_name: str
    width: int
    height: int
    size_bytes: int
    display_width: int
    display_height: int
    thumb_width: int
    thumb_height: int

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict of every field."""
        return asdict(self)


_SELECT = ("SELECT ph.*, COALESCE(NULLIF(u.name, ''), u.email, '') AS uploaded_by_name "
           "FROM photos ph LEFT JOIN users u ON u.id = ph.uploaded_by ")


def _photo(row) -> Photo | None:
    if row is None:
        return None
    return Photo(**{k: row[k] for k in row.keys()})


def by_client_id(conn: sqlite3.Connection, project_id: int, client_id: str) -> Photo | None:
    """The photo a client's upload in this project made, or None (client ids are unique per
    project)."""
    return _photo(conn.execute(_SELECT + "WHERE ph.project_id = ? AND ph.client_id = ?",
                               (project_id, client_id)).fetchone())


def get(conn: sqlite3.Connection, project_id: int, photo_id: int) -> Photo | None:
    """A photo of the project, or None (a photo of another project is None too)."""
    return _photo(conn.execute(_SELECT + "WHERE ph.id = ? AND ph.project_id = ?",
                               (photo_id, project_id)).fetchone())


def for_pile(conn: sqlite3.Connection, pile_id: int) -> list[Photo]:
    """The photos of a pile in the order they were taken (or uploaded)."""
    return [_photo(r) for r in conn.execute(
        _SELECT + "WHERE ph.pile_id = ? ORDER BY COALESCE(ph.taken_at, ph.uploaded_at), ph.id",
        (pile_id,)).fetchall()]


def sha_in_use(conn: sqlite3.Connection, sha256: str) -> bool:
    """True when any photo row points at this original."""
    return conn.execute("SELECT 1 FROM photos WHERE sha256 = ? LIMIT 1", (sha256,)).fetchone() is not None


def hashes_in_use(conn: sqlite3.Connection) -> set[str]:
    """The SHA-256 of every original that a photo row points at."""
    return {row[0] for row in conn.execute("SELECT DISTINCT sha256 FROM photos").fetchall()}


def insert(conn: sqlite3.Connection, *, project_id: int, pile_id: int, client_id: str, kind: str,
           caption: str, sha256: str, format: str, taken_at: str | None, uploaded_by: int | None,
           width: int, height: int, size_bytes: int, display_width: int, display_height: int,
           thumb_width: int, thumb_height: int) -> int:
    """Store one photo row; returns its id. Run inside ``db.write``."""
    cur = conn.execute(
        "INSERT INTO photos (project_id, pile_id, client_id, kind, caption, sha256, format, "
        "taken_at, uploaded_at, uploaded_by, width, height, size_bytes, display_width, "
        "display_height, thumb_width, thumb_height) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, pile_id, client_id, kind, caption, sha256, format, taken_at, now_iso(),
         uploaded_by, width, height, size_bytes, display_width, display_height, thumb_width,
         thumb_height))
    return cur.lastrowid
