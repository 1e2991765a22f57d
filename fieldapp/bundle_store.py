"""The offline bundle kept per audit head on disk, and the bundle by difference.

Every change the bundle shows appends to the project's audit chain in its own transaction, so
the chain's head names the bundle's state. ``current(conn, project, data_dir)`` gives the bundle
at the present head, kept as ``<data>/bundles/p<project id>/<key>.json.gz`` (the gzip of the
exact bytes the API sends) with ``<key>.meta`` beside it (head, sequence number, ETag digest).
Any process of the server finds it there, so a request at an unchanged head reads a file and
builds nothing. When the newest kept bundle is a few record saves or rechecks behind, only
those piles' entries are made again (``rig_view.patch_bundle``); otherwise the bundle is built
whole (``rig_view.build_bundle``). The last ``KEEP`` heads of a project are kept.

The bundle by difference (``delta(conn, project, data_dir, since)``): what changed between the
bundle at head ``since`` (one the tablet holds, still kept here) and the present one::

    {"format": 1, "delta": true, "since": <head>, "head": <head>,
     "piles": {mark: entry, ...}, "piles_removed": [mark, ...],
     "curves": {...}, "curves_removed": [...], "ground_models": {...}, "ground_models_removed": [...],
     and "project", "rules_version", "rules", "limits" only when they changed}

``apply_delta(bundle, delta)`` applies it (the tablet's ``applyDelta`` in static/outbox/bundle.js
does the same); the result equals the present bundle. None when ``since`` is not kept: the tablet
then gets the whole bundle. Deltas are kept too (``<since key>--<key>.delta.json.gz``).
"""

from __future__ import annotations

import gzip
import hashlib
import json
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path

from fieldapp.queries import audit
from fieldapp.rig_view import build_bundle, patch_bundle

BUNDLE_FORMAT = 1
KEEP = 8
PATCH_MAX_ENTRIES = 2000      # more audit entries than this since the kept bundle: build whole
# Audit actions that change only the entry of the pile named as their subject, and actions
# that change nothing in the bundle. Any other action since the kept bundle builds it whole.
_ROW_ACTIONS = frozenset({"record saved", "record rechecked"})
_NO_ACTIONS = frozenset({"photo added"})
SHARED_KEYS = ("format", "project", "rules_version", "rules", "limits")
KEYED_PARTS = ("piles", "curves", "ground_models")


@dataclass(frozen=True)
class Stored:
    """A kept bundle: its key, the audit head it stands for, the ETag digest and the gzip bytes."""

    key: str
    head: str
    seq: int
    digest: str
    gz: bytes

    def body(self) -> bytes:
        """The JSON bytes (uncompressed)."""
        return gzip.decompress(self.gz)


def encode(data: dict) -> bytes:
    """The bundle's JSON bytes as the API sends them (sorted keys, no spaces, no NaN)."""
    return json.dumps(data, separators=(",", ":"), sort_keys=True, allow_nan=False).encode()


def _folder(data_dir: str | Path, project_id: int) -> Path:
    return Path(data_dir) / "bundles" / f"p{int(project_id)}"


def _key(project, head: str) -> str:
    """The file name of the bundle at ``head``: the head with a hash of the project's details
    (which the bundle carries) and the bundle format."""
    details = json.dumps([BUNDLE_FORMAT, project.name, project.site, project.datum, project.engineer])
    return f"{head[:40]}-{hashlib.sha256(details.encode()).hexdigest()[:8]}"


def _write(path: Path, data: bytes) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=".tmp-")
    try:
        with os.fdopen(fd, "wb") as out:
            out.write(data)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _load(folder: Path, key: str) -> Stored | None:
    try:
        meta = json.loads((folder / f"{key}.meta").read_text())
        gz = (folder / f"{key}.json.gz").read_bytes()
    except (OSError, ValueError):
        return None
    return Stored(key, meta["head"], meta["seq"], meta["digest"], gz)


def _kept(folder: Path) -> list[tuple[int, str]]:
    """(seq, key) of every kept bundle of the folder, newest first."""
    out = []
    for meta in folder.glob("*.meta") if folder.is_dir() else ():
        try:
            out.append((json.loads(meta.read_text())["seq"], meta.name[:-len(".meta")]))
        except (OSError, ValueError, KeyError):
            continue
    return sorted(out, reverse=True)


def _store(folder: Path, key: str, head: str, seq: int, data: dict) -> Stored:
    body = encode(data)
    digest = hashlib.sha256(body).hexdigest()[:32]
    gz = gzip.compress(body, compresslevel=6, mtime=0)
    _write(folder / f"{key}.json.gz", gz)
    _write(folder / f"{key}.meta", json.dumps({"head": head, "seq": seq, "digest": digest}).encode())
    for _, old in _kept(folder)[KEEP:]:
        for path in [folder / f"{old}.meta", folder / f"{old}.json.gz", *folder.glob(f"*{old}*.delta.json.gz")]:
            path.unlink(missing_ok=True)
    return Stored(key, head, seq, digest, gz)


def _patched(conn, project, folder: Path, seq: int, head: str) -> tuple[dict, str, dict] | None:
    """(bundle at ``head``, key of the kept bundle it was made from, the delta between them):
    the newest kept bundle patched for the record saves since; None when it cannot be."""
    for kept_seq, kept_key in _kept(folder)[:1]:
        if kept_seq >= seq:
            return None
        base = _load(folder, kept_key)
        if base is None:
            return None
        entries = audit.entries_after(conn, project.id, kept_seq, limit=PATCH_MAX_ENTRIES + 1)
        if (not entries or len(entries) > PATCH_MAX_ENTRIES or entries[0]["prev_hash"] != base.head
                or entries[-1]["hash"] != head
                or not all(e["action"] in _ROW_ACTIONS | _NO_ACTIONS for e in entries)):
            return None
        marks = {e["subject"] for e in entries if e["action"] in _ROW_ACTIONS}
        data = patch_bundle(conn, project, json.loads(base.body()), marks)
        if data is None:
            return None
        data["head"] = head
        # the delta from the kept bundle is these piles alone: kept now, without a comparison
        quick = {"format": data["format"], "delta": True, "since": base.head, "head": head,
                 "piles": {m: data["piles"][m] for m in sorted(marks)},
                 **{name: {} for name in KEYED_PARTS if name != "piles"},
                 **{name + "_removed": [] for name in KEYED_PARTS}}
        return data, base.key, quick
    return None


def current(conn, project, data_dir: str | Path) -> Stored:
    """The bundle at the project's present audit head, kept on disk (module docstring).

    A project with no audit entry yet (the genesis head) is built every time and not kept.
    """
    seq, head = audit.head(conn, project.id)
    folder = _folder(data_dir, project.id)
    key = _key(project, head)
    if head != audit.GENESIS:
        kept = _load(folder, key)
        if kept is not None:
            return kept
        patched = _patched(conn, project, folder, seq, head)
        if patched is None:
            return _store(folder, key, head, seq, dict(build_bundle(conn, project), head=head))
        data, base_key, quick = patched
        stored = _store(folder, key, head, seq, data)
        _write(folder / f"{base_key}--{key}.delta.json.gz", gzip.compress(encode(quick), compresslevel=6, mtime=0))
        return stored
    data = dict(build_bundle(conn, project), head=head)
    body = encode(data)
    return Stored(key, head, seq, hashlib.sha256(body).hexdigest()[:32],
                  gzip.compress(body, compresslevel=6, mtime=0))


def difference(old: dict, new: dict) -> dict:
    """The delta that turns bundle ``old`` into bundle ``new`` (module docstring)."""
    out: dict = {"format": new["format"], "delta": True, "since": old.get("head"), "head": new.get("head")}
    for name in SHARED_KEYS:
        if old.get(name) != new.get(name):
            out[name] = new[name]
    for name in KEYED_PARTS:
        before, after = old.get(name, {}), new.get(name, {})
        out[name] = {k: v for k, v in after.items() if before.get(k) != v}
        out[name + "_removed"] = sorted(k for k in before if k not in after)
    return out


def apply_delta(bundle: dict, delta: dict) -> dict:
    """``bundle`` with ``delta`` applied: the bundle at the delta's head (a new dict)."""
    out = dict(bundle)
    for name in SHARED_KEYS:
        if name in delta:
            out[name] = delta[name]
    for name in KEYED_PARTS:
        part = dict(bundle.get(name, {}))
        for k in delta.get(name + "_removed", ()):
            part.pop(k, None)
        part.update(delta.get(name, {}))
        out[name] = part
    out["head"] = delta["head"]
    return out


def delta(conn, project, data_dir: str | Path, since: str) -> bytes | None:
    """The gzip bytes of the delta from the kept bundle at head ``since`` to the present one,
    or None when no bundle at ``since`` is kept (the whole bundle is then the answer)."""
    now = current(conn, project, data_dir)
    folder = _folder(data_dir, project.id)
    old_key = _key(project, since) if len(since) >= 40 else ""
    if not old_key or now.head == audit.GENESIS:
        return None
    if since == now.head:
        empty = {"format": BUNDLE_FORMAT, "delta": True, "since": since, "head": now.head,
                 **{name: {} for name in KEYED_PARTS}, **{name + "_removed": [] for name in KEYED_PARTS}}
        return gzip.compress(encode(empty), mtime=0)
    cached = folder / f"{old_key}--{now.key}.delta.json.gz"
    try:
        return cached.read_bytes()
    except OSError:
        pass
    old = _load(folder, old_key)
    if old is None or old.head[:len(since)] != since:
        return None
    gz = gzip.compress(encode(difference(json.loads(old.body()), json.loads(now.body()))),
                       compresslevel=6, mtime=0)
    _write(cached, gz)
    return gz
