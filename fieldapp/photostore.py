"""Where photo files are kept: a folder (the default) or an S3-compatible object store.

Photos are content-addressed: the original is named by the SHA-256 of its bytes, its display
copy and thumbnail by the same hash (see ``fieldapp.photos``). A store holds files by *key*, the
path relative to the photo folder (``originals/ab/<sha>.jpg``, ``display/<sha>.jpg``,
``thumb/<sha>.jpg``), so a folder and a bucket hold the same names and a copy between them is a
copy of keys.

* :class:`DirectoryStore`: files under a folder, written through a temporary file, fsynced and
  renamed (a crash never leaves half a file). Every process of one machine shares it.
* :class:`S3Store`: an S3-compatible bucket (AWS, MinIO, Ceph) through boto3, which is optional
  (``pip install boto3``); servers on several machines share it. Not exercised by the test
  suite here (no object store on the test machines).

``TOELINE_PHOTO_STORE``: ``s3://bucket/prefix`` for an object store (credentials and endpoint
from boto3's usual environment: ``AWS_ACCESS_KEY_ID``, ``AWS_SECRET_ACCESS_KEY``,
``AWS_ENDPOINT_URL``); unset, the data folder's ``photos/``.
"""

from __future__ import annotations

import base64
import hashlib
import os
import tempfile
from pathlib import Path
from typing import Iterator, Protocol

from fieldapp.photos import FORMATS

STORE_ENV = "TOELINE_PHOTO_STORE"


def original_key(sha256: str, fmt: str) -> str:
    """The key of an original: ``originals/<first two hex>/<sha>.<ext>``."""
    return f"originals/{sha256[:2]}/{sha256}.{FORMATS.get(fmt, 'bin')}"


def display_key(sha256: str) -> str:
    """The key of the 1600 px display copy."""
    return f"display/{sha256}.jpg"


def thumb_key(sha256: str) -> str:
    """The key of the 320 px thumbnail."""
    return f"thumb/{sha256}.jpg"


def photo_keys(sha256: str, fmt: str) -> tuple[str, str, str]:
    """The three keys of one stored photo: original, display copy, thumbnail."""
    return original_key(sha256, fmt), display_key(sha256), thumb_key(sha256)


def _check_key(key: str) -> str:
    parts = key.split("/")
    if not key or key.startswith("/") or any(p in ("", ".", "..") for p in parts):
        raise ValueError(f"photo key {key!r} is not a relative path inside the store")
    return key


class PhotoStore(Protocol):
    """What the app needs of a photo store."""

    def put(self, key: str, data: bytes) -> None:
        """Store ``data`` under ``key`` whole or not at all (a repeat overwrites the same bytes)."""

    def get(self, key: str) -> bytes:
        """The bytes under ``key``; FileNotFoundError when there are none."""

    def exists(self, key: str) -> bool:
        """True when ``key`` is stored."""

    def keys(self) -> Iterator[str]:
        """Every stored key (temporary files left out)."""

    def local_path(self, key: str) -> Path | None:
        """A file on this machine holding ``key`` (to serve it with send_file), or None."""

    def delete(self, key: str) -> None:
        """Remove ``key`` (no error when it is not there): only for files no photo row names."""


class DirectoryStore:
    """Photo files under one folder (the data folder's ``photos/`` by default)."""

    def __init__(self, root: str | Path):
        self.root = Path(root)

    def __repr__(self) -> str:
        return f"DirectoryStore({str(self.root)!r})"

    def _path(self, key: str) -> Path:
        return self.root / _check_key(key)

    def put(self, key: str, data: bytes) -> None:
        path = self._path(key)
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

    def get(self, key: str) -> bytes:
        return self._path(key).read_bytes()

    def exists(self, key: str) -> bool:
        return self._path(key).is_file()

    def keys(self) -> Iterator[str]:
        if not self.root.is_dir():
            return
        for path in sorted(self.root.rglob("*")):
            if path.is_file() and not path.name.startswith(".tmp-"):
                yield path.relative_to(self.root).as_posix()

    def local_path(self, key: str) -> Path | None:
        path = self._path(key)
        return path if path.is_file() else None

    def delete(self, key: str) -> None:
        self._path(key).unlink(missing_ok=True)


class S3Store:
    """Photo files in an S3-compatible bucket under ``prefix`` (boto3, optional dependency).

    A PUT of one object is atomic in S3 (readers see the old object, none, or the whole new
    one), so ``put`` needs no temporary name. ``client`` may be given (tests, a configured
    session); else boto3's default client, which reads the usual AWS_* environment."""

    def __init__(self, bucket: str, prefix: str = "", client=None):
        if client is None:
            try:
                import boto3  # optional: only an object-store deployment needs it
            except ModuleNotFoundError as exc:
                raise RuntimeError("an s3:// photo store needs boto3: pip install boto3") from exc
            client = boto3.client("s3", endpoint_url=os.environ.get("AWS_ENDPOINT_URL") or None)
        self.bucket = bucket
        self.prefix = prefix.strip("/")
        self.client = client

    def __repr__(self) -> str:
        return f"S3Store(s3://{self.bucket}/{self.prefix})"

    def _name(self, key: str) -> str:
        key = _check_key(key)
        return f"{self.prefix}/{key}" if self.prefix else key

    def put(self, key: str, data: bytes) -> None:
        digest = hashlib.md5(data, usedforsecurity=False).digest()
        self.client.put_object(Bucket=self.bucket, Key=self._name(key), Body=data,
                               ContentMD5=base64.b64encode(digest).decode())  # the store checks the bytes

    def get(self, key: str) -> bytes:
        try:
            answer = self.client.get_object(Bucket=self.bucket, Key=self._name(key))
        except Exception as exc:  # botocore's NoSuchKey / ClientError 404
            if "NoSuchKey" in type(exc).__name__ or "404" in str(exc) or "NoSuchKey" in str(exc):
                raise FileNotFoundError(key) from exc
            raise
        return answer["Body"].read()

    def exists(self, key: str) -> bool:
        try:
            self.client.head_object(Bucket=self.bucket, Key=self._name(key))
        except Exception as exc:
            if "404" in str(exc) or "Not Found" in str(exc) or "NoSuchKey" in str(exc):
                return False
            raise
        return True

    def keys(self) -> Iterator[str]:
        start = f"{self.prefix}/" if self.prefix else ""
        token = None
        while True:
            kwargs = {"Bucket": self.bucket, "Prefix": start}
            if token:
                kwargs["ContinuationToken"] = token
            page = self.client.list_objects_v2(**kwargs)
            for item in page.get("Contents", []):
                yield item["Key"][len(start):]
            if not page.get("IsTruncated"):
                return
            token = page.get("NextContinuationToken")

    def local_path(self, key: str) -> Path | None:
        return None

    def delete(self, key: str) -> None:
        self.client.delete_object(Bucket=self.bucket, Key=self._name(key))


def open_store(spec: str | Path) -> PhotoStore:
    """A store from ``s3://bucket/prefix`` or a folder path."""
    text = str(spec)
    if text.startswith("s3://"):
        bucket, _, prefix = text[len("s3://"):].partition("/")
        if not bucket:
            raise ValueError(f"photo store {text!r} names no bucket (s3://bucket/prefix)")
        return S3Store(bucket, prefix)
    return DirectoryStore(text)


def store_for(app) -> PhotoStore:
    """The app's photo store: ``TOELINE_PHOTO_STORE`` (or ``PHOTO_STORE`` in its config), else the
    folder ``PHOTO_DIR``."""
    spec = app.config.get("PHOTO_STORE") or os.environ.get(STORE_ENV) or app.config["PHOTO_DIR"]
    return open_store(spec)
