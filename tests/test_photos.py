"""Photo uploads: real images only, size and pixel limits, EXIF orientation and capture time,
originals kept by SHA-256, display copies and thumbnails, and who may see them (issue 5).

EXIF orientation values are as defined in CIPA DC-008 (Exif 2.32), tag 0x0112: value 6 means
the stored 0th row is the visual right-hand side and the 0th column the visual top, so the
image must turn 90 degrees clockwise to be seen upright.
"""

from __future__ import annotations

import hashlib
import io
import uuid
from pathlib import Path

import pytest
from PIL import ExifTags, Image

from fieldapp import db, photos
from tests.factories import make_ground, make_pile

RED, BLUE = (220, 0, 0), (0, 0, 220)


def jpeg(size=(400, 200), orientation=None, taken="2026:03:02 09:15:30", quality=90) -> bytes:
    """A JPEG whose left half is red and right half blue, with optional EXIF."""
    image = Image.new("RGB", size, BLUE)
    image.paste(RED, (0, 0, size[0] // 2, size[1]))
    exif = Image.Exif()
    if orientation:
        exif[ExifTags.Base.Orientation] = orientation
    if taken:
        exif.get_ifd(ExifTags.IFD.Exif)[ExifTags.Base.DateTimeOriginal] = taken
    out = io.BytesIO()
    image.save(out, "JPEG", quality=quality, exif=exif.tobytes())
    return out.getvalue()


def near(pixel, colour, tol=40):
    return all(abs(a - b) <= tol for a, b in zip(pixel, colour, strict=True))


# --- ingest ----------------------------------------------------------------------------------

def test_orientation_is_applied_to_copies_and_sizes(tmp_path):
    data = jpeg((400, 200), orientation=6)
    out = photos.ingest(data, tmp_path)
    assert (out.width, out.height) == (200, 400)  # upright: portrait
    thumb = Image.open(photos.thumb_path(tmp_path, out.sha256))
    assert thumb.size == (160, 320)
    # stored left (red) is the visual top after turning 90 degrees clockwise
    assert near(thumb.getpixel((80, 20)), RED) and near(thumb.getpixel((80, 300)), BLUE)


def test_exif_capture_time_is_read(tmp_path):
    out = photos.ingest(jpeg(taken="2026:03:02 09:15:30"), tmp_path)
    assert out.taken_at == "2026-03-02T09:15:30"
    assert photos.ingest(jpeg(size=(300, 300), taken=None), tmp_path).taken_at is None


def test_original_kept_by_sha256_with_display_copy_and_thumbnail(tmp_path):
    data = jpeg((2400, 1800))
    out = photos.ingest(data, tmp_path)
    sha = hashlib.sha256(data).hexdigest()
    assert out.sha256 == sha
    original = photos.original_path(tmp_path, sha, "JPEG")
    assert original.read_bytes() == data  # the evidence, byte for byte
    display = Image.open(photos.display_path(tmp_path, sha))
    thumb = Image.open(photos.thumb_path(tmp_path, sha))
    assert display.size == (1600, 1200) and out.display_size == (1600, 1200)
    assert thumb.size == (320, 240) and out.thumb_size == (320, 240)


def test_small_png_keeps_its_size_and_transparency_turns_white(tmp_path):
    image = Image.new("RGBA", (100, 50), (0, 0, 0, 0))
    buf = io.BytesIO()
    image.save(buf, "PNG")
    out = photos.ingest(buf.getvalue(), tmp_path)
    thumb = Image.open(photos.thumb_path(tmp_path, out.sha256))
    assert thumb.size == (100, 50) and near(thumb.getpixel((50, 25)), (255, 255, 255))


def test_not_an_image_is_rejected(tmp_path):
    with pytest.raises(photos.PhotoRejected, match="not an image"):
        photos.ingest(b"%PDF-1.7 this is a document, not a photo", tmp_path)
    assert not any(tmp_path.rglob("*.*"))


def test_truncated_jpeg_is_rejected(tmp_path):
    data = jpeg((1200, 900), quality=95)
    with pytest.raises(photos.PhotoRejected, match="truncated"):
        photos.ingest(data[: len(data) // 2], tmp_path)


def test_over_50_megapixels_is_rejected(tmp_path):
    buf = io.BytesIO()
    Image.new("1", (8000, 7000)).save(buf, "PNG")  # 56 MP, a few kB on disk
    with pytest.raises(photos.PhotoRejected, match="50 megapixels"):
        photos.ingest(buf.getvalue(), tmp_path)


def test_decompression_bomb_is_rejected(tmp_path):
    buf = io.BytesIO()
    Image.new("1", (12000, 10000)).save(buf, "PNG")  # 120 MP: Pillow's bomb error
    with pytest.raises(photos.PhotoRejected, match="too many pixels"):
        photos.ingest(buf.getvalue(), tmp_path)


def test_over_25_mb_is_rejected(tmp_path):
    with pytest.raises(photos.PhotoRejected, match="25 MB"):
        photos.ingest(b"\xff\xd8" + b"\0" * (25 * 1024 * 1024), tmp_path)


# --- the API -------------------------------------------------------------------------------

CLAY = [dict(top_level_m=100.0, bottom_level_m=80.0, material="cohesive", unit_weight_kn_m3=19.0,
             cu_kpa=80.0)]


@pytest.fixture
def pile(app, people):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = make_ground(conn, people["own"], CLAY, "clay", 95.0)
            make_pile(conn, people["own"], "P7", gm, easting_m=0.0, northing_m=0.0, cutoff_level_m=99.0,
                      toe_level_m=85.0, compression_kn=500.0, shear_kn=0.0, cage_length_m=6.0)
    return people


def upload(client, auth, project_id, data, client_id=None, kind="base", caption="base clean",
           filename="../../etc/evil.jpg"):
    return client.post(f"/api/v1/projects/{project_id}/piles/P7/photos",
                       data={"file": (io.BytesIO(data), filename), "client_id": client_id or str(uuid.uuid4()),
                             "kind": kind, "caption": caption},
                       headers={"X-CSRFToken": auth.token()}, content_type="multipart/form-data")


def test_upload_stores_photo_once_per_client_id(app, client, auth, pile):
    auth.login(pile["inspector"])
    data = jpeg()
    cid = str(uuid.uuid4())
    first = upload(client, auth, pile["own"], data, cid)
    assert first.status_code == 201
    body = first.get_json()
    assert body["sha256"] == hashlib.sha256(data).hexdigest() and isinstance(body["id"], int)
    again = upload(client, auth, pile["own"], data, cid)
    assert again.status_code == 200 and again.get_json() == body
    with app.app_context():
        conn = db.get_db()
        assert conn.execute("SELECT COUNT(*) FROM photos").fetchone()[0] == 1
        assert conn.execute("SELECT COUNT(*) FROM audit_log WHERE action = 'photo added'").fetchone()[0] == 1
        row = conn.execute("SELECT * FROM photos").fetchone()
        assert row["kind"] == "base" and row["caption"] == "base clean"
        assert row["taken_at"] == "2026-03-02T09:15:30"
    # the client's file name never became a path
    assert not list(Path(app.config["DATA_DIR"]).rglob("*evil*"))


def test_photo_files_are_for_members_only(client, auth, pile):
    auth.login(pile["inspector"])
    body = upload(client, auth, pile["own"], jpeg()).get_json()
    thumb = client.get(body["thumb_url"])
    assert thumb.status_code == 200 and thumb.mimetype == "image/jpeg"
    assert Image.open(io.BytesIO(thumb.data)).size == (320, 160)
    listed = client.get(f"/api/v1/projects/{pile['own']}/piles/P7/photos").get_json()["photos"]
    assert [p["id"] for p in listed] == [body["id"]]
    original = client.get(listed[0]["original_url"])
    assert hashlib.sha256(original.data).hexdigest() == body["sha256"]
    auth.logout()
    assert client.get(body["thumb_url"]).status_code == 401
    auth.login(pile["outsider"])
    assert client.get(body["thumb_url"]).status_code == 404
    auth.logout()
    auth.login(pile["viewer"])
    assert client.get(body["thumb_url"]).status_code == 200


def test_viewer_cannot_upload_and_outsider_gets_404(client, auth, pile):
    auth.login(pile["viewer"])
    assert upload(client, auth, pile["own"], jpeg()).status_code == 403
    auth.logout()
    auth.login(pile["outsider"])
    assert upload(client, auth, pile["own"], jpeg()).status_code == 404


def test_bad_uploads_get_422_naming_the_field(app, client, auth, pile):
    auth.login(pile["inspector"])
    r = upload(client, auth, pile["own"], b"not an image at all")
    assert r.status_code == 422 and "not an image" in r.get_json()["errors"]["file"]
    r = upload(client, auth, pile["own"], jpeg(), kind="selfie")
    assert r.status_code == 422 and "base, cage, pour, finished, other" in r.get_json()["errors"]["kind"]
    with app.app_context():
        assert db.get_db().execute("SELECT COUNT(*) FROM photos").fetchone()[0] == 0


def test_upload_over_the_request_limit_is_413(client, auth, pile):
    auth.login(pile["inspector"])
    r = upload(client, auth, pile["own"], b"\xff\xd8" + b"\0" * (27 * 1024 * 1024))
    assert r.status_code == 413 and "25 MB" in r.get_json()["error"]


# --- files no photo points at -------------------------------------------------------------------

def _age(paths, hours: float) -> None:
    import os
    import time
    when = time.time() - hours * 3600.0
    for path in paths:
        os.utime(path, (when, when))


def _files_of(photo_dir, sha: str) -> list[Path]:
    return sorted(p for p in Path(photo_dir).rglob("*") if p.is_file() and p.stem == sha)


def test_prune_removes_old_unreferenced_files_and_never_a_stored_photo(app, client, auth, pile):
    from click.testing import CliRunner

    from fieldapp.cli import main

    auth.login(pile["inspector"])
    kept = jpeg(size=(300, 200))
    assert upload(client, auth, pile["own"], kept).status_code == 201
    photo_dir = app.config["PHOTO_DIR"]
    orphan, fresh = photos.ingest(jpeg(size=(310, 200)), photo_dir), photos.ingest(jpeg(size=(320, 200)), photo_dir)
    crash = Path(photo_dir) / "display" / ".tmp-cut-off"      # a write cut off by a crash
    crash.write_bytes(b"half a file")
    stored = _files_of(photo_dir, hashlib.sha256(kept).hexdigest())
    _age(stored + _files_of(photo_dir, orphan.sha256) + [crash], hours=48)
    assert len(stored) == 3 and len(_files_of(photo_dir, orphan.sha256)) == 3

    run = lambda *a: CliRunner().invoke(main, ["--data", app.config["DATA_DIR"], "photos", "prune", *a])  # noqa: E731
    dry = run("--dry-run")
    assert dry.exit_code == 0 and "4 files" in dry.output and "would be removed" in dry.output
    assert len(_files_of(photo_dir, orphan.sha256)) == 3 and crash.exists()
    done = run()
    assert done.exit_code == 0, done.output
    assert "4 files" in done.output and "3 newer than 24 h left" in done.output
    assert _files_of(photo_dir, orphan.sha256) == [] and not crash.exists()
    assert _files_of(photo_dir, hashlib.sha256(kept).hexdigest()) == stored      # a stored photo
    assert len(_files_of(photo_dir, fresh.sha256)) == 3                           # too new to judge
    with app.app_context():
        entry = db.get_db().execute("SELECT payload_json FROM audit_log WHERE action = "
                                    "'photo files pruned'").fetchone()
    assert entry is not None and '"files":4' in entry[0]
    assert run("--older-than-hours", "0.5").exit_code != 0    # at least an hour: uploads under way


def test_an_upload_whose_files_were_pruned_meanwhile_writes_them_again(app, client, auth, pile):
    # prune_unreferenced removes files only under the write lock; add_photo checks its files
    # under that lock too, so a prune between its ingest and its row cannot leave a row whose
    # files are gone.
    auth.login(pile["inspector"])
    data = jpeg(size=(330, 200))
    photo_dir = app.config["PHOTO_DIR"]
    real_ingest = photos.ingest
    calls = []

    def ingest_then_prune(content, where):
        out = real_ingest(content, where)
        calls.append(out.sha256)
        if len(calls) == 1:       # a prune runs right after this upload's files were written
            _age(_files_of(where, out.sha256), hours=48)
            with app.app_context():
                photos.prune_unreferenced(db.get_db(), where, 3600.0)
            assert _files_of(where, out.sha256) == []
        return out

    photos.ingest = ingest_then_prune
    try:
        assert upload(client, auth, pile["own"], data).status_code == 201
    finally:
        photos.ingest = real_ingest
    assert len(calls) == 2 and len(_files_of(photo_dir, hashlib.sha256(data).hexdigest())) == 3
