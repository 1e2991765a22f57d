"""Photos of piles: check an upload is a real image, keep the original, make the copies.

``ingest(data, photo_dir)`` does the image work with Pillow:

* refuse more than ``MAX_BYTES`` (25 MB), anything Pillow cannot identify as an image, images
  over ``MAX_PIXELS`` (50 megapixels; Pillow's decompression-bomb guard is set to the same
  limit and its ``DecompressionBombError``/``Warning`` become a refusal) and truncated files
  (the whole file is decoded once, a JPEG at the reduced scale the display copy needs; a short
  file fails there);
* keep the original bytes, untouched, as ``photos/originals/<sha[:2]>/<sha256>.<ext>`` (the
  evidence; the client's file name never becomes a path);
* apply the EXIF orientation, then write a display copy no larger than 1600 px and a
  thumbnail no larger than 320 px (made from the display copy) as JPEG
  (``photos/display/<sha>.jpg``, ``photos/thumb/<sha>.jpg``), decoding JPEGs with
  ``Image.draft`` at 1/2, 1/4 or 1/8 scale when the display copy needs no more;
* read the EXIF capture time (DateTimeOriginal, else DateTime) as ISO 8601.

``add_photo(conn, project_id, pile_row, user, client_id, kind, caption, data)`` is the one
upload path: ingest, then one ``db.write`` transaction with the photo row and a "photo added"
audit entry. The same ``client_id`` again returns the first photo and stores nothing.
"""

from __future__ import annotations

import hashlib
import io
import math
import os
import sqlite3
import tempfile
import time
import warnings
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path

from PIL import ExifTags, Image, ImageOps, UnidentifiedImageError

from fieldapp import db
from fieldapp.queries import audit
from fieldapp.queries import photos as photos_q

MAX_BYTES = 25 * 1024 * 1024
MAX_PIXELS = 50_000_000
DISPLAY_PX = 1600
THUMB_PX = 320
FORMATS = {"JPEG": "jpg", "PNG": "png", "WEBP": "webp", "TIFF": "tif", "GIF": "gif", "BMP": "bmp",
           "MPO": "jpg"}
KINDS = photos_q.KINDS
CAPTION_MAX = 500
# ISO base media "ftyp" brands of HEIC/HEIF files (phone cameras), which Pillow cannot decode.
HEIF_BRANDS = {b"heic", b"heix", b"hevc", b"hevx", b"heim", b"heis", b"mif1", b"msf1"}

# Pillow refuses images over twice this and warns over it; we refuse at the limit itself.
Image.MAX_IMAGE_PIXELS = MAX_PIXELS


class ClientIdReused(ValueError):
    """The client id was already used in this project for another photo."""


class PhotoRejected(ValueError):
    """The upload is not a photo we keep; the message says why, with the limit."""


@dataclass(frozen=True)
class Ingested:
    """What ``ingest`` stored: hash, format, sizes in pixels and bytes, EXIF capture time."""

    sha256: str
    format: str
    width: int
    height: int
    size_bytes: int
    taken_at: str | None
    display_size: tuple[int, int]
    thumb_size: tuple[int, int]


def original_path(photo_dir: str | Path, sha256: str, fmt: str) -> Path:
    """Where the original with this hash is kept."""
    return Path(photo_dir) / "originals" / sha256[:2] / f"{sha256}.{FORMATS.get(fmt, 'bin')}"


def display_path(photo_dir: str | Path, sha256: str) -> Path:
    """The 1600 px display copy (JPEG)."""
    return Path(photo_dir) / "display" / f"{sha256}.jpg"


def thumb_path(photo_dir: str | Path, sha256: str) -> Path:
    """The 320 px thumbnail (JPEG)."""
    return Path(photo_dir) / "thumb" / f"{sha256}.jpg"


def _write_atomic(path: Path, data: bytes) -> None:
    """Write via a temporary file and rename, so a crash never leaves half a file."""
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


_TAG = {name: tag for tag, name in ExifTags.TAGS.items()}


def exif_taken_at(image: Image.Image) -> str | None:
    """The EXIF capture time as ISO 8601 (no zone: cameras write local time), or None."""
    try:
        exif = image.getexif()
    except Exception:  # noqa: BLE001 - a broken EXIF block must not refuse the photo
        return None
    values = []
    try:
        values.append(exif.get_ifd(ExifTags.IFD.Exif).get(_TAG["DateTimeOriginal"]))
    except Exception:  # noqa: BLE001
        pass
    values.append(exif.get(_TAG["DateTime"]))
    for value in values:
        if isinstance(value, bytes):
            value = value.decode("ascii", "ignore")
        if isinstance(value, str):
            try:
                return datetime.strptime(value.strip().rstrip("\x00"), "%Y:%m:%d %H:%M:%S").isoformat()
            except ValueError:
                continue
    return None


_QUARTER_TURNS = (5, 6, 7, 8)  # EXIF orientations that swap width and height


def _orientation(image: Image.Image) -> int:
    """The EXIF orientation (1 to 8) that ``ImageOps.exif_transpose`` applies; 1 when none."""
    try:
        return int(image.getexif().get(ExifTags.Base.Orientation, 1))
    except Exception:  # noqa: BLE001 - a broken EXIF block means no turn, as exif_transpose does
        return 1


def _open(data: bytes) -> Image.Image:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("error", Image.DecompressionBombWarning)
            image = Image.open(io.BytesIO(data))
    except (Image.DecompressionBombError, Image.DecompressionBombWarning):
        raise PhotoRejected(f"the image has too many pixels: at most {MAX_PIXELS // 1_000_000} "
                            "megapixels") from None
    except (UnidentifiedImageError, OSError, ValueError, SyntaxError):
        if data[4:8] == b"ftyp" and data[8:12] in HEIF_BRANDS:
            raise PhotoRejected("HEIC/HEIF photos cannot be read here: set the camera to JPEG "
                                "('most compatible') or send a JPEG or PNG copy") from None
        raise PhotoRejected("the file is not an image Toeline can read (JPEG, PNG, WebP, TIFF, GIF, BMP)") from None
    if image.format not in FORMATS:
        raise PhotoRejected(f"{image.format} files are not accepted: send JPEG, PNG, WebP, TIFF, GIF or BMP")
    if image.width * image.height > MAX_PIXELS:
        raise PhotoRejected(f"the image has {image.width} x {image.height} pixels, over the limit of "
                            f"{MAX_PIXELS // 1_000_000} megapixels")
    return image


def _draft_box(size: tuple[int, int], long_side: int) -> tuple[int, int]:
    """The size to ask ``Image.draft`` for so a JPEG decodes at the smallest DCT scale (1/2,
    1/4, 1/8) that still gives ``long_side`` px. draft() keeps a scale only while both sides
    stay at least the size asked for, so this keeps the image's proportions: (1600, 1600) made
    a 4000 x 3000 photo decode at full size."""
    scale = min(1.0, long_side / max(size))
    return math.ceil(size[0] * scale), math.ceil(size[1] * scale)


def _viewable(image: Image.Image) -> Image.Image:
    """The image turned by its EXIF orientation, as RGB or L (transparency on white)."""
    image = ImageOps.exif_transpose(image)
    if image.mode not in ("RGB", "L"):
        background = Image.new("RGB", image.size, "white")
        rgba = image.convert("RGBA")
        background.paste(rgba, mask=rgba.getchannel("A"))
        image = background
    return image


def _jpeg(image: Image.Image) -> bytes:
    out = io.BytesIO()
    image.save(out, "JPEG", quality=85, optimize=True)
    return out.getvalue()


def ingest(data: bytes, photo_dir: str | Path) -> Ingested:
    """Check an upload and store the original, display copy and thumbnail (module docstring).

    Raises ``PhotoRejected`` with a message naming the limit; nothing is written then.
    """
    if len(data) > MAX_BYTES:
        raise PhotoRejected(f"the file is {len(data) / 1_048_576:.1f} MB, over the limit of "
                            f"{MAX_BYTES // 1_048_576} MB")
    if not data:
        raise PhotoRejected("the file is empty")
    image = _open(data)
    fmt = image.format
    width, height = image.size
    try:
        image.verify()  # structure check (PNG checksums, etc.)
        decoded = _open(data)
        if fmt in ("JPEG", "MPO"):
            decoded.draft("RGB", _draft_box(decoded.size, DISPLAY_PX))
        # The one decode of the whole file (a JPEG at the scale the display copy needs: its
        # entropy-coded data is still read to the end), so a truncated file fails here.
        decoded.load()
    except PhotoRejected:
        raise
    except (OSError, SyntaxError, ValueError, Image.DecompressionBombError) as exc:
        raise PhotoRejected(f"the image is damaged or truncated ({exc})") from None
    taken_at = exif_taken_at(decoded)
    if _orientation(decoded) in _QUARTER_TURNS:  # the size as viewed, without turning the pixels
        width, height = height, width
    view = _viewable(decoded)
    view.thumbnail((DISPLAY_PX, DISPLAY_PX), Image.Resampling.LANCZOS)
    display, display_size = _jpeg(view), view.size
    view.thumbnail((THUMB_PX, THUMB_PX), Image.Resampling.LANCZOS)  # from the display copy
    thumb, thumb_size = _jpeg(view), view.size

    sha = hashlib.sha256(data).hexdigest()
    original = original_path(photo_dir, sha, fmt)
    if not original.exists():
        _write_atomic(original, data)
    for path, content in ((display_path(photo_dir, sha), display), (thumb_path(photo_dir, sha), thumb)):
        if not path.exists():
            _write_atomic(path, content)
    return Ingested(sha, fmt, width, height, len(data), taken_at, display_size, thumb_size)


def add_photo(conn: sqlite3.Connection, project_id: int, pile_row, user, client_id: str, kind: str,
              caption: str, data: bytes, photo_dir: str | Path) -> tuple[photos_q.Photo, bool]:
    """Store a photo of a pile: (photo, created). ``created`` False means a repeat of a
    ``client_id`` already stored (nothing new is written).

    Raises ``PhotoRejected`` for a bad image or kind/caption, ``ClientIdReused`` when the
    ``client_id`` was used in this project for another photo of the pile (another file, kind or
    caption), ``ValueError`` when it was used for another pile. Client ids are kept apart per
    project.
    """
    caption = (caption or "").strip()
    sha = hashlib.sha256(data).hexdigest()

    def repeat() -> photos_q.Photo | None:
        earlier = photos_q.by_client_id(conn, project_id, client_id)
        if earlier is None:
            return None
        if earlier.pile_id != pile_row.id:
            raise ValueError("client_id was already used for a photo of another pile: make a new one")
        if (earlier.sha256, earlier.kind, earlier.caption) != (sha, kind, caption):
            raise ClientIdReused("client_id reused")
        return earlier

    earlier = repeat()
    if earlier is not None:
        return earlier, False
    if kind not in KINDS:
        raise PhotoRejected(f"kind must be one of {', '.join(KINDS)}, got {kind!r}")
    if len(caption) > CAPTION_MAX:
        raise PhotoRejected(f"caption must be at most {CAPTION_MAX} characters, got {len(caption)}")
    stored = ingest(data, photo_dir)
    with db.write(conn):
        earlier = repeat()
        if earlier is not None:
            return earlier, False
        if not files_present(photo_dir, stored):
            # ``prune_unreferenced`` removed a file of this hash between ingest and this
            # transaction (it deletes only under the write lock, so it cannot now): write again.
            stored = ingest(data, photo_dir)
        photo_id = photos_q.insert(
            conn, project_id=project_id, pile_id=pile_row.id, client_id=client_id, kind=kind,
            caption=caption, sha256=stored.sha256, format=stored.format, taken_at=stored.taken_at,
            uploaded_by=user.id, width=stored.width, height=stored.height,
            size_bytes=stored.size_bytes, display_width=stored.display_size[0],
            display_height=stored.display_size[1], thumb_width=stored.thumb_size[0],
            thumb_height=stored.thumb_size[1])
        audit.append(conn, project_id, user.label, "photo added", pile_row.mark,
                     {"photo_id": photo_id, "sha256": stored.sha256, "kind": kind,
                      "client_id": client_id, "taken_at": stored.taken_at})
    return photos_q.get(conn, project_id, photo_id), True


# --------------------------------------------------------------------------------------------
# Files no photo row points at
# --------------------------------------------------------------------------------------------

def files_present(photo_dir: str | Path, stored: Ingested) -> bool:
    """True when the original, display copy and thumbnail of ``stored`` are all on disk."""
    return all(p.exists() for p in (original_path(photo_dir, stored.sha256, stored.format),
                                    display_path(photo_dir, stored.sha256),
                                    thumb_path(photo_dir, stored.sha256)))


@dataclass(frozen=True)
class PruneReport:
    """What ``prune_unreferenced`` removed (or, dry, would remove): files and their bytes, and
    how many unreferenced files it left because they were younger than the age asked for."""

    removed: tuple[Path, ...]
    bytes: int
    left_young: int


def _unreferenced(photo_dir: Path, in_use: set[str], cutoff: float) -> tuple[list[Path], int]:
    old, young = [], 0
    for path in sorted(photo_dir.rglob("*")):
        if not path.is_file():
            continue
        leftover = path.name.startswith(".tmp-")     # a write cut off by a crash
        if not leftover and path.stem in in_use:
            continue
        if path.stat().st_mtime > cutoff:
            young += 1
        else:
            old.append(path)
    return old, young


def prune_unreferenced(conn: sqlite3.Connection, photo_dir: str | Path, older_than_s: float,
                       dry_run: bool = False) -> PruneReport:
    """Remove photo files that no photo row points at, last changed more than ``older_than_s``
    seconds ago: files of an upload whose database write failed (the disk full, say), and
    temporary files left by a crash. Nothing a row points at is ever touched.

    Candidates are found first; each is checked again and removed under the write lock, so an
    upload of the same picture cannot store its row meanwhile (``add_photo`` checks its files
    under that lock and writes them again if they went). Appends "photo files pruned" to the
    site-wide audit chain when anything was removed.
    """
    photo_dir = Path(photo_dir)
    cutoff = time.time() - older_than_s
    candidates, young = _unreferenced(photo_dir, photos_q.hashes_in_use(conn), cutoff)
    if dry_run or not candidates:
        return PruneReport(tuple(candidates), sum(p.stat().st_size for p in candidates), young)
    removed, size = [], 0
    with db.write(conn):
        in_use = photos_q.hashes_in_use(conn)
        for path in candidates:
            try:
                stat = path.stat()
            except FileNotFoundError:
                continue
            if (not path.name.startswith(".tmp-") and path.stem in in_use) or stat.st_mtime > cutoff:
                continue
            path.unlink()
            removed.append(path)
            size += stat.st_size
        if removed:
            audit.append(conn, None, "cli", "photo files pruned", str(photo_dir),
                         {"files": len(removed), "bytes": size})
    return PruneReport(tuple(removed), size, young)
