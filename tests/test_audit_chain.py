"""The audit trail is tamper-evident: an edited, a deleted or a reordered row breaks the chain, and
``toeline verify-audit`` exits 1 naming the first broken entry (issue 6).

Tampering is simulated as an attacker with the database file would do it: drop the append-only
triggers with sqlite3, then change rows directly.
"""

from __future__ import annotations

import sqlite3

import pytest
from click.testing import CliRunner

from fieldapp import db
from fieldapp.cli import main
from fieldapp.queries import audit


@pytest.fixture
def chain(app, people):
    """Six entries in project 'own''s chain, one in the site-wide chain; returns (db path, ids)."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            for i in range(6):
                audit.append(conn, people["own"], "engineer@test.example", "record saved", f"P{i}",
                             {"version": i + 1})
            audit.append(conn, None, "someone@test.example", "login failed", "someone@test.example", {})
        ids = [r["id"] for r in conn.execute(
            "SELECT id FROM audit_log WHERE project_id = ? ORDER BY seq", (people["own"],))]
    return app.config["DATABASE"], ids


def _tamper(path: str, *statements: tuple[str, tuple]) -> None:
    conn = sqlite3.connect(path)
    conn.execute("DROP TRIGGER IF EXISTS audit_no_update")
    conn.execute("DROP TRIGGER IF EXISTS audit_no_delete")
    for sql, params in statements:
        conn.execute(sql, params)
    conn.commit()
    conn.close()


def _verify(app, *args):
    return CliRunner().invoke(main, ["--data", app.config["DATA_DIR"], "verify-audit", *map(str, args)])


def test_intact_chain_verifies_and_exits_0(app, people, chain):
    result = _verify(app, people["own"])
    assert result.exit_code == 0, result.output
    assert "intact, 6 entries" in result.output
    with app.app_context():
        head = audit.head_hash(db.get_db(), people["own"])
    assert head in result.output
    every = _verify(app)
    assert every.exit_code == 0, every.output
    assert "site-wide chain: intact, 1 entries" in every.output


def test_triggers_refuse_edit_and_delete(app, chain):
    path, ids = chain
    conn = sqlite3.connect(path)
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        conn.execute("UPDATE audit_log SET actor = 'x' WHERE id = ?", (ids[0],))
    with pytest.raises(sqlite3.IntegrityError, match="append-only"):
        conn.execute("DELETE FROM audit_log WHERE id = ?", (ids[0],))
    conn.close()


def test_edited_row_is_found(app, people, chain):
    path, ids = chain
    _tamper(path, ("UPDATE audit_log SET payload_json = ? WHERE id = ?", ('{"version":99}', ids[2])))
    result = _verify(app, people["own"])
    assert result.exit_code == 1
    assert f"BROKEN at entry {ids[2]} " in result.output
    assert "altered" in result.output


def test_edited_row_with_recomputed_hash_breaks_the_next_link(app, people, chain):
    """Rewriting an entry and its own hash still breaks the chain at the entry after it."""
    path, ids = chain
    conn = sqlite3.connect(path)
    conn.row_factory = sqlite3.Row
    row = conn.execute("SELECT * FROM audit_log WHERE id = ?", (ids[1],)).fetchone()
    conn.close()
    forged = '{"version":42}'
    digest = audit.entry_hash(row["project_id"], row["seq"], row["at"], row["actor"], row["action"],
                              row["subject"], forged, row["prev_hash"])
    _tamper(path, ("UPDATE audit_log SET payload_json = ?, hash = ? WHERE id = ?", (forged, digest, ids[1])))
    result = _verify(app, people["own"])
    assert result.exit_code == 1
    assert f"BROKEN at entry {ids[2]} " in result.output


def test_deleted_row_is_found(app, people, chain):
    path, ids = chain
    _tamper(path, ("DELETE FROM audit_log WHERE id = ?", (ids[3],)))
    result = _verify(app, people["own"])
    assert result.exit_code == 1
    assert f"BROKEN at entry {ids[4]} " in result.output
    assert "deleted or moved" in result.output


def test_reordered_rows_are_found(app, people, chain):
    path, ids = chain
    # swap the places (seq) of the 2nd and 3rd entries, through a free seq to pass the unique index
    _tamper(path,
            ("UPDATE audit_log SET seq = 1000 WHERE id = ?", (ids[1],)),
            ("UPDATE audit_log SET seq = 2 WHERE id = ?", (ids[2],)),
            ("UPDATE audit_log SET seq = 3 WHERE id = ?", (ids[1],)))
    result = _verify(app, people["own"])
    assert result.exit_code == 1
    assert f"BROKEN at entry {ids[2]} " in result.output


def test_verify_all_chains_reports_the_broken_one(app, people, chain):
    path, ids = chain
    _tamper(path, ("UPDATE audit_log SET actor = 'someone else' WHERE id = ?", (ids[0],)))
    result = _verify(app)
    assert result.exit_code == 1
    assert f"project {people['own']}: BROKEN at entry {ids[0]} " in result.output
    assert "site-wide chain: intact" in result.output


def test_unknown_project_exits_2(app, chain):
    result = _verify(app, 9999)
    assert result.exit_code == 2
    assert "project 9999 does not exist" in result.output
