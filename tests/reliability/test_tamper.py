"""The audit chain vouches for what it records, and is held to heads kept outside it (issue 15,
items 2 and 3): an edit of a record version, a sign-off or a photo row in the database file, a
deleted row, and a chain cut short, renumbered or rehashed after an edit are all reported by
``toeline verify-audit``; tampered backups of each kind are refused by ``toeline restore``."""

from __future__ import annotations

import json
import sqlite3

import pytest
from click.testing import CliRunner

from fieldapp import db, review
from fieldapp.backup import DB_NAME, MANIFEST, make_backup, restore_backup, sha256_file
from fieldapp.cli import main
from fieldapp.queries import audit, piles, users

PROJECT = 1


def _raw(data):
    """A plain connection to the data folder's database with the append-only triggers dropped:
    what someone with the file and the sqlite3 shell can do."""
    conn = sqlite3.connect(str(data / DB_NAME))
    conn.row_factory = sqlite3.Row
    for trigger in ("signoffs_no_update", "audit_no_update", "audit_no_delete"):
        conn.execute(f"DROP TRIGGER IF EXISTS {trigger}")
    return conn


def _verify(data, *args):
    result = CliRunner().invoke(main, ["--data", str(data), "verify-audit", *map(str, args)])
    return result.exit_code, result.output


@pytest.fixture
def signed(demo_data):
    """The demo folder with one logged pile signed off by the engineer; returns (data, mark)."""
    from fieldapp import create_app

    app = create_app({"TESTING": True}, data_dir=demo_data)
    with app.app_context():
        conn = db.get_db()
        engineer = users.by_email(conn, "engineer@toeline.example")
        row = conn.execute("SELECT p.mark FROM piles p WHERE p.project_id = ? AND p.progress = 'logged' "
                           "AND p.verdict = 'meets design' ORDER BY p.id LIMIT 1", (PROJECT,)).fetchone()
        pile = piles.get_pile(conn, PROJECT, row["mark"])
        review.sign_pile(conn, PROJECT, pile, engineer, "accepted", "as designed")
    return demo_data, row["mark"]


def test_an_untouched_folder_verifies_and_says_what_it_checked(signed):
    data, _ = signed
    code, out = _verify(data, PROJECT)
    assert code == 0, out
    assert "intact, " in out and "row(s) match" in out
    assert "anchors: none known" in out
    covered = int(out.split("content: ")[1].split(" ")[0])
    conn = _raw(data)
    rows = sum(conn.execute(f"SELECT COUNT(*) FROM {t} WHERE project_id = ?", (PROJECT,)).fetchone()[0]
               for t in ("pile_records", "signoffs", "amendments", "photos"))
    conn.close()
    assert covered == rows  # every row of the project is vouched for


def test_an_edited_signed_record_version_is_reported(signed):
    data, mark = signed
    conn = _raw(data)
    conn.execute("UPDATE pile_records SET record_json = replace(record_json, '\"progress\"', '\"progress\" ') "
                 "WHERE id = (SELECT r.id FROM pile_records r JOIN piles p ON p.id = r.pile_id "
                 "WHERE p.mark = ? ORDER BY r.version DESC LIMIT 1)", (mark,))
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)
    assert code == 1
    assert "ALTERED" in out and "no longer matches" in out and mark in out


def test_an_edited_sign_off_is_reported(signed):
    data, mark = signed
    conn = _raw(data)
    conn.execute("UPDATE signoffs SET reasons = 'nothing to see'")
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)
    assert code == 1 and "sign-off" in out and "no longer matches" in out


def test_a_deleted_sign_off_and_a_deleted_newest_version_are_reported(signed):
    data, mark = signed
    conn = _raw(data)
    conn.execute("DELETE FROM signoffs")
    newest = conn.execute("SELECT r.id FROM pile_records r JOIN piles p ON p.id = r.pile_id WHERE p.mark != ? "
                          "ORDER BY r.id DESC LIMIT 1", (mark,)).fetchone()["id"]
    conn.execute("DELETE FROM pile_records WHERE id = ?", (newest,))
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)
    assert code == 1
    assert "its sign-off" in out and "is missing" in out
    assert f"its record version (row {newest}) is missing" in out


def test_a_row_with_no_entry_is_reported(signed):
    data, mark = signed
    conn = _raw(data)
    conn.execute("INSERT INTO amendments (project_id, pile_id, from_version, version, reason, amended_at) "
                 "SELECT project_id, id, 1, 99, 'slipped in', '2026-01-01' FROM piles WHERE mark = ?", (mark,))
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)
    assert code == 1 and "has no audit entry" in out and "version 99" in out


def test_a_replaced_photo_file_is_reported(signed):
    data, _ = signed
    conn = _raw(data)
    row = conn.execute("SELECT sha256, format FROM photos WHERE project_id = ? LIMIT 1", (PROJECT,)).fetchone()
    conn.close()
    from fieldapp import photos

    photos.original_path(data / "photos", row["sha256"], row["format"]).write_bytes(b"another picture")
    code, out = _verify(data, PROJECT)
    assert code == 1 and "does not match its SHA-256" in out


def test_entries_without_a_content_hash_are_not_covered_never_intact(signed):
    data, _ = signed
    conn = _raw(data)
    # Rewrite the chain as it was before entries carried content hashes (a valid old chain).
    rows = conn.execute("SELECT * FROM audit_log WHERE project_id = ? ORDER BY seq", (PROJECT,)).fetchall()
    prev = audit.GENESIS
    for row in rows:
        payload = json.loads(row["payload_json"])
        payload.pop("content", None)
        text = audit.canonical_json(payload)
        digest = audit.entry_hash(row["project_id"], row["seq"], row["at"], row["actor"], row["action"],
                                  row["subject"], text, prev)
        conn.execute("UPDATE audit_log SET payload_json = ?, prev_hash = ?, hash = ? WHERE id = ?",
                     (text, prev, digest, row["id"]))
        prev = digest
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)
    assert "not covered" in out and "content: 0 row(s)" in out
    assert code == 0, out  # an old chain is not broken, but nothing of it is called intact content


@pytest.fixture
def anchored(signed, tmp_path):
    """``signed`` with a backup made (its heads kept in anchors/) and a head printed for keeping."""
    data, mark = signed
    make_backup(data, tmp_path / "bk")
    result = CliRunner().invoke(main, ["--data", str(data), "audit-head", str(PROJECT)])
    assert result.exit_code == 0, result.output
    head = result.stdout.strip().splitlines()[0]
    seq, digest = head.split(":")
    assert int(seq) > 0 and len(digest) == 64
    return data, mark, head


def _rehash_from(conn, project_id, first_seq=1):
    """Recompute every hash of a chain from ``first_seq`` on (a forger covering an edit)."""
    rows = conn.execute("SELECT * FROM audit_log WHERE project_id = ? ORDER BY seq", (project_id,)).fetchall()
    prev = audit.GENESIS
    for row in rows:
        if row["seq"] >= first_seq:
            digest = audit.entry_hash(row["project_id"], row["seq"], row["at"], row["actor"], row["action"],
                                      row["subject"], row["payload_json"], prev)
            conn.execute("UPDATE audit_log SET prev_hash = ?, hash = ? WHERE id = ?", (prev, digest, row["id"]))
            prev = digest
        else:
            prev = row["hash"]


def test_anchors_are_checked_and_named(anchored):
    data, _, head = anchored
    code, out = _verify(data, PROJECT, "--head", head)
    assert code == 0, out
    assert "anchor checked: backup of" in out and f"anchor checked: kept head {head.split(':')[0]}" in out


def test_a_truncated_chain_is_detected_with_an_anchor(anchored):
    data, _, head = anchored
    conn = _raw(data)
    last = conn.execute("SELECT MAX(seq) FROM audit_log WHERE project_id = ?", (PROJECT,)).fetchone()[0]
    conn.execute("DELETE FROM audit_log WHERE project_id = ? AND seq > ?", (PROJECT, last - 2))
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT, "--head", head)
    assert code == 1
    assert "anchor NOT HELD" in out and "last entries were deleted" in out
    assert out.count("anchor NOT HELD") >= 2  # the backup's head and the kept head


def test_an_edit_then_rehash_is_detected_with_an_anchor(anchored):
    data, mark, head = anchored
    conn = _raw(data)
    # Edit the sign-off's reasons, update its entry's content hash and rehash the whole chain.
    entry = conn.execute("SELECT * FROM audit_log WHERE project_id = ? AND action = 'sign-off'",
                         (PROJECT,)).fetchone()
    conn.execute("UPDATE signoffs SET reasons = 'forged'")
    payload = json.loads(entry["payload_json"])
    row = conn.execute("SELECT * FROM signoffs WHERE id = ?", (payload["content"]["id"],)).fetchone()
    payload["content"]["sha256"] = audit.content_hash("signoffs", row)
    payload["reasons"] = "forged"
    conn.execute("UPDATE audit_log SET payload_json = ? WHERE id = ?", (audit.canonical_json(payload), entry["id"]))
    _rehash_from(conn, PROJECT, entry["seq"])
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)  # the links and the content are consistent again ...
    assert "intact, " in out and "ALTERED" not in out
    assert code == 1 and "renumbered or rehashed" in out  # ... but the backup's anchor is not held
    code, out = _verify(data, PROJECT, "--head", head)
    assert code == 1 and out.count("anchor NOT HELD") >= 2


def test_a_deleted_and_renumbered_entry_is_detected_with_an_anchor(anchored):
    data, _, head = anchored
    conn = _raw(data)
    victim = conn.execute("SELECT seq FROM audit_log WHERE project_id = ? AND action = 'sign-off'",
                          (PROJECT,)).fetchone()["seq"]
    conn.execute("DELETE FROM audit_log WHERE project_id = ? AND seq = ?", (PROJECT, victim))
    conn.execute("DELETE FROM signoffs")
    conn.execute("UPDATE audit_log SET seq = seq - 1 - 1000000 WHERE project_id = ? AND seq > ?", (PROJECT, victim))
    conn.execute("UPDATE audit_log SET seq = seq + 1000000 WHERE project_id = ? AND seq < 0", (PROJECT,))
    _rehash_from(conn, PROJECT, victim)
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT, "--head", head)
    assert "intact, " in out
    assert code == 1 and "anchor NOT HELD" in out


def test_a_deleted_whole_chain_is_detected_with_an_anchor(anchored):
    data, _, _ = anchored
    conn = _raw(data)
    for table in ("audit_log", "signoffs", "amendments", "photos", "pile_records", "record_jobs"):
        conn.execute(f"DELETE FROM {table} WHERE project_id = ?", (PROJECT,))
    conn.commit()
    conn.close()
    code, out = _verify(data)
    assert code == 1 and "its chain is gone" in out


def test_an_issued_record_head_is_an_anchor(signed):
    data, _ = signed
    conn = _raw(data)
    seq, digest = conn.execute("SELECT seq, hash FROM audit_log WHERE project_id = ? ORDER BY seq DESC LIMIT 1",
                               (PROJECT,)).fetchone()
    conn.execute("INSERT INTO record_jobs (project_id, status, head_hash, created_at, updated_at) "
                 "VALUES (?, 'done', ?, '2026-01-01', '2026-01-01')", (PROJECT, digest))
    conn.commit()
    code, out = _verify(data, PROJECT)
    assert code == 0 and "anchor checked: record_jobs row" in out, out
    conn.execute("DELETE FROM audit_log WHERE project_id = ? AND seq >= ?", (PROJECT, seq))
    conn.commit()
    conn.close()
    code, out = _verify(data, PROJECT)
    assert code == 1 and "is not in the chain" in out


def test_audit_head_refuses_a_project_that_does_not_exist(demo_data):
    result = CliRunner().invoke(main, ["--data", str(demo_data), "audit-head", "999"])
    assert result.exit_code != 0 and "does not exist" in result.output


# --------------------------------------------------------------------------------------------
# Tampered backups: refused by restore, whose manifest hashes were rewritten to match.
# --------------------------------------------------------------------------------------------

def _forge(backup, sql: str, *args) -> None:
    conn = _raw(backup)
    conn.execute(sql, args)
    conn.commit()
    conn.close()
    manifest = json.loads((backup / MANIFEST).read_text())
    manifest["files"][DB_NAME] = sha256_file(backup / DB_NAME)
    (backup / MANIFEST).write_text(json.dumps(manifest))


def _refused(backup, target, *words):
    with pytest.raises(ValueError) as refused:
        restore_backup(backup, target)
    for word in words:
        assert word in str(refused.value), str(refused.value)
    assert not (target / DB_NAME).exists(), "a refused backup must not become live"


@pytest.fixture
def backup(signed, tmp_path):
    data, _ = signed
    make_backup(data, tmp_path / "bk")
    return tmp_path / "bk"


def test_backup_with_an_edited_record_is_refused(backup, tmp_path):
    _forge(backup, "UPDATE pile_records SET notes_json = '[\"edited\"]' WHERE id = (SELECT MAX(id) FROM pile_records)")
    _refused(backup, tmp_path / "t", "no longer matches")


def test_backup_with_a_broken_chain_is_refused(backup, tmp_path):
    _forge(backup, "UPDATE audit_log SET actor = 'someone else' WHERE id = (SELECT MAX(id) FROM audit_log)")
    _refused(backup, tmp_path / "t", "chain", "broken")


def test_backup_with_random_bytes_as_the_database_is_refused(backup, tmp_path):
    import os

    (backup / DB_NAME).write_bytes(os.urandom(64 * 1024))
    manifest = json.loads((backup / MANIFEST).read_text())
    manifest["files"][DB_NAME] = sha256_file(backup / DB_NAME)
    (backup / MANIFEST).write_text(json.dumps(manifest))
    _refused(backup, tmp_path / "t", "not a readable SQLite database")


def test_backup_whose_chain_was_cut_short_is_refused_by_its_manifest_head(backup, tmp_path):
    _forge(backup, "DELETE FROM audit_log WHERE id = (SELECT MAX(id) FROM audit_log WHERE project_id = 1)")
    _refused(backup, tmp_path / "t", "the backup's manifest")


@pytest.mark.parametrize("path", ["/etc/passwd", "../outside.txt", "photos/../../x"])
def test_backup_with_an_absolute_or_climbing_path_is_refused(backup, tmp_path, path):
    manifest = json.loads((backup / MANIFEST).read_text())
    manifest["files"][path] = "0" * 64
    (backup / MANIFEST).write_text(json.dumps(manifest))
    _refused(backup, tmp_path / "t", repr(path))


def test_backup_with_a_link_in_photos_is_refused(backup, tmp_path):
    secret = tmp_path / "secret.txt"
    secret.write_text("outside the backup")
    (backup / "photos" / "ab").mkdir(parents=True, exist_ok=True)
    link = backup / "photos" / "ab" / "evil.jpg"
    link.symlink_to(secret)
    manifest = json.loads((backup / MANIFEST).read_text())
    manifest["files"]["photos/ab/evil.jpg"] = sha256_file(secret)
    (backup / MANIFEST).write_text(json.dumps(manifest))
    _refused(backup, tmp_path / "t", "is a link")
    assert not (tmp_path / "t" / "photos" / "ab" / "evil.jpg").exists()


def test_backup_with_a_replaced_photo_is_refused(backup, tmp_path):
    conn = _raw(backup)
    sha, fmt = conn.execute("SELECT sha256, format FROM photos LIMIT 1").fetchone()
    conn.close()
    from fieldapp import photos

    original = photos.original_path(backup / "photos", sha, fmt)
    original.write_bytes(b"a different picture")
    manifest = json.loads((backup / MANIFEST).read_text())
    manifest["files"][original.relative_to(backup).as_posix()] = sha256_file(original)
    (backup / MANIFEST).write_text(json.dumps(manifest))
    _refused(backup, tmp_path / "t", "does not match its SHA-256")


def test_the_record_command_says_when_rows_no_longer_match(signed, tmp_path):
    data, _ = signed
    good = CliRunner().invoke(main, ["--data", str(data), "record", str(PROJECT), str(tmp_path / "a.pdf")])
    assert good.exit_code == 0 and "row(s) match their entries" in good.output and "ALTERED" not in good.output
    conn = _raw(data)
    conn.execute("UPDATE signoffs SET reasons = 'edited in the file'")
    conn.commit()
    conn.close()
    bad = CliRunner().invoke(main, ["--data", str(data), "record", str(PROJECT), str(tmp_path / "b.pdf")])
    assert "1 ALTERED or missing" in bad.output, bad.output
