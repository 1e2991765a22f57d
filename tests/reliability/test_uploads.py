"""Uploads: the photo API takes real images only, within the limits, and the client's file name
never becomes a path (issue 5 photos; issue 9 upload corpus).

Decisions recorded here:
* an animated GIF is accepted as a photo: the original is kept as sent, the display copy and
  the thumbnail are made from its first frame;
* SVG (with or without script) is refused: it is not a raster photo and could carry script;
* HEIC (the default of many phone cameras) cannot be read by Pillow without a plugin: it is
  refused with a message that names HEIC and says what to send instead.

Every refusal is a 4xx JSON answer naming the field; after it the photo rows, the audit entries
and the files under the data folder's photos/ are as they were.
"""

from __future__ import annotations

import io
import re
import struct
import uuid
import zlib

import pytest
from PIL import Image
from reliability_kit import make_app, sign_in, small_jpeg

MARK = "P1"


@pytest.fixture
def upload(demo_data):
    app = make_app(demo_data)
    client = app.test_client()
    token = sign_in(client, "inspector")

    def send(data: bytes, filename: str = "photo.jpg", mimetype: str = "image/jpeg", **fields):
        send.before = _stored(send)
        form = {"client_id": str(uuid.uuid4()), "kind": "base", "caption": "corpus", **fields,
                "file": (io.BytesIO(data), filename, mimetype)}
        return client.post(f"/api/v1/projects/1/piles/{MARK}/photos", data=form,
                           headers={"X-CSRFToken": token}, content_type="multipart/form-data")

    send.app, send.client, send.data = app, client, demo_data
    return send


def _stored(upload) -> tuple[int, int, list[str]]:
    from fieldapp import db
    with upload.app.app_context():
        conn = db.get_db()
        rows = conn.execute("SELECT COUNT(*) FROM photos").fetchone()[0]
        audit = conn.execute("SELECT COUNT(*) FROM audit_log WHERE action = 'photo added'").fetchone()[0]
    files = sorted(str(p.relative_to(upload.data)) for p in (upload.data / "photos").rglob("*") if p.is_file())
    return rows, audit, files


def _refused(upload, answer, field: str, *words: str) -> None:
    assert 400 <= answer.status_code < 500, (answer.status_code, answer.get_data(as_text=True)[:300])
    body = answer.get_json()
    message = body["errors"][field] if "errors" in body else body["error"]
    for word in words:
        assert word.lower() in message.lower(), message
    assert _stored(upload) == upload.before, "a refused upload left something behind"


def _png_header(width: int, height: int, bit_depth: int = 8, colour: int = 2) -> bytes:
    """A PNG whose IHDR declares width x height, with one tiny IDAT: a few hundred bytes."""
    def chunk(kind: bytes, body: bytes) -> bytes:
        return struct.pack(">I", len(body)) + kind + body + struct.pack(">I", zlib.crc32(kind + body))
    ihdr = struct.pack(">IIBBBBB", width, height, bit_depth, colour, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(b"\x00" * 64))
            + chunk(b"IEND", b""))


def test_text_file_named_jpg_is_refused(upload):
    _refused(upload, upload(b"pile P1 notes, not a picture\n" * 20, "P1.jpg"), "file", "not an image")


def test_truncated_jpeg_is_refused(upload):
    whole = small_jpeg(7, size=400)
    _refused(upload, upload(whole[: len(whole) // 2]), "file", "truncated")


def test_decompression_bomb_is_refused(upload):
    # 1-bit 12,000 x 9,000 (108 megapixels) compresses to a few kB: a bomb for a naive decoder.
    bomb = io.BytesIO()
    Image.new("1", (12_000, 9_000), 0).save(bomb, "PNG", optimize=True)
    assert len(bomb.getvalue()) < 200_000
    _refused(upload, upload(bomb.getvalue(), "bomb.png", "image/png"), "file", "megapixels")


def test_20000_by_20000_png_is_refused_from_its_header(upload):
    data = _png_header(20_000, 20_000)
    assert len(data) < 1000  # nothing like the 1.2 GB it declares
    _refused(upload, upload(data, "huge.png", "image/png"), "file", "megapixels")


def test_svg_with_script_is_refused(upload):
    svg = (b'<?xml version="1.0"?><svg xmlns="http://www.w3.org/2000/svg" width="10" height="10">'
           b'<script>alert(document.cookie)</script><rect width="10" height="10"/></svg>')
    _refused(upload, upload(svg, "pile.svg", "image/svg+xml"), "file", "not an image")
    _refused(upload, upload(svg, "pile.jpg", "image/jpeg"), "file", "not an image")


def test_heic_is_refused_with_a_message_naming_it(upload):
    # The start of an HEIF file: an ftyp box with the 'heic' brand, then a meta box.
    heic = struct.pack(">I", 24) + b"ftypheic" + b"\x00\x00\x00\x00" + b"mif1heic" + b"\x00" * 200
    _refused(upload, upload(heic, "IMG_0001.HEIC", "image/heic"), "file", "HEIC", "JPEG")


def test_over_25_mb_is_refused(upload):
    _refused(upload, upload(b"\xff\xd8" + b"\x00" * (25 * 1024 * 1024 + 10)), "file", "25 MB")


def test_animated_gif_is_accepted_as_its_first_frame(upload):
    frames = [Image.new("RGB", (64, 48), colour) for colour in ((200, 0, 0), (0, 0, 200), (0, 200, 0))]
    data = io.BytesIO()
    frames[0].save(data, "GIF", save_all=True, append_images=frames[1:], duration=100, loop=0)
    answer = upload(data.getvalue(), "anim.gif", "image/gif")
    assert answer.status_code == 201, answer.get_json()
    thumb = upload.client.get(answer.get_json()["thumb_url"])
    assert thumb.status_code == 200 and thumb.mimetype == "image/jpeg"
    r, g, b = Image.open(io.BytesIO(thumb.data)).convert("RGB").getpixel((10, 10))
    assert r > 150 and g < 60 and b < 60, "the thumbnail is the first (red) frame"
    original = upload.client.get(answer.get_json()["thumb_url"].replace("/thumb", "/original"))
    assert original.mimetype == "image/gif" and original.data == data.getvalue()


@pytest.mark.parametrize("name", ["../../../../tmp/escape.jpg", "..\\..\\evil.jpg", "bad\x00name.jpg",
                                  "x" * 300 + ".jpg", "/etc/passwd", ".jpg", "con.jpg"])
def test_client_file_names_never_become_paths(upload, name, tmp_path):
    data = small_jpeg(len(name))
    answer = upload(data, name)
    assert answer.status_code == 201, answer.get_json()
    sha = answer.get_json()["sha256"]
    _, _, files = _stored(upload)
    assert sorted(set(files) - set(upload.before[2])) == [
        f"photos/display/{sha}.jpg", f"photos/originals/{sha[:2]}/{sha}.jpg", f"photos/thumb/{sha}.jpg"]
    outside = [p for p in tmp_path.rglob("*") if re.search(r"escape|evil|passwd|xxxxxxxx", p.name)]
    assert outside == []
