"""The photo store (fieldapp.photostore) that a company server keeps photos in: the folder store
holds the same names fieldapp.photos writes, whole files only, and refuses keys outside it.
(The S3-compatible store needs an object store, which the test machines do not have: it is not
tested here.)"""

from __future__ import annotations

import hashlib
from pathlib import Path

import pytest

from fieldapp import photos, photostore


def test_keys_are_the_paths_the_photo_code_writes(tmp_path):
    sha = hashlib.sha256(b"a photo").hexdigest()
    for fmt in ("JPEG", "PNG", "WEBP"):
        original, display, thumb = photostore.photo_keys(sha, fmt)
        assert tmp_path / original == photos.original_path(tmp_path, sha, fmt)
        assert tmp_path / display == photos.display_path(tmp_path, sha)
        assert tmp_path / thumb == photos.thumb_path(tmp_path, sha)


def test_directory_store_round_trip_and_listing(tmp_path):
    store = photostore.open_store(tmp_path / "photos")
    assert isinstance(store, photostore.DirectoryStore)
    assert list(store.keys()) == []
    store.put("thumb/abc.jpg", b"small")
    store.put("originals/ab/abc.jpg", b"big")
    (tmp_path / "photos" / "thumb" / ".tmp-left-by-a-crash").write_bytes(b"half")
    assert store.get("thumb/abc.jpg") == b"small" and store.exists("originals/ab/abc.jpg")
    assert list(store.keys()) == ["originals/ab/abc.jpg", "thumb/abc.jpg"]  # no temporary file
    assert store.local_path("thumb/abc.jpg") == tmp_path / "photos" / "thumb" / "abc.jpg"
    store.put("thumb/abc.jpg", b"again")  # a repeat replaces the file whole
    assert store.get("thumb/abc.jpg") == b"again"
    store.delete("thumb/abc.jpg")
    store.delete("thumb/abc.jpg")  # twice is fine
    assert not store.exists("thumb/abc.jpg") and store.local_path("thumb/abc.jpg") is None
    with pytest.raises(FileNotFoundError):
        store.get("thumb/abc.jpg")


@pytest.mark.parametrize("key", ["../secret_key", "/etc/passwd", "thumb/../../x", "", "a//b"])
def test_a_key_outside_the_store_is_refused(tmp_path, key):
    store = photostore.DirectoryStore(tmp_path / "photos")
    with pytest.raises(ValueError, match="not a relative path"):
        store.put(key, b"x")
    assert not any(Path(tmp_path).rglob("x"))


def test_an_s3_address_names_its_bucket(tmp_path):
    with pytest.raises(ValueError, match="names no bucket"):
        photostore.open_store("s3://")
