"""The data folder's lock: one server at a time, and no restore under a running server.

``toeline serve`` and ``toeline demo`` take an exclusive ``flock`` on ``toeline.lock`` in the
data folder and hold it for the life of the process (the kernel drops it when the process
ends, even on SIGKILL, so a crash never leaves a stale lock behind). ``toeline restore`` takes
the same lock for the time it replaces the database, and refuses while someone else holds it:
a server that kept running would go on writing into the moved-aside database and every save
it acknowledged afterwards would be lost from the restored one.

The lock file holds the process id and the command of the holder, for the refusal message.
"""

from __future__ import annotations

import fcntl
import os
import sys
from pathlib import Path

LOCK_NAME = "toeline.lock"

_held: dict[str, int] = {}  # resolved data folder -> open file descriptor holding the lock


class FolderInUse(Exception):
    """Another process holds the data folder's lock; the message says who and how to stop it."""


def lock_path(data_dir: str | Path) -> Path:
    """The lock file of a data folder."""
    return Path(data_dir).resolve() / LOCK_NAME


def holder(data_dir: str | Path) -> str:
    """What the lock file says about its holder ('pid 123: toeline serve'), or ''."""
    try:
        return lock_path(data_dir).read_text(encoding="utf-8", errors="replace").strip()[:300]
    except OSError:
        return ""


def _in_use_message(data_dir: Path, doing: str) -> str:
    who = holder(data_dir) or "another process"
    pid = who.split(":", 1)[0].removeprefix("pid ").strip() if who.startswith("pid ") else ""
    how = (f"stop it first (Ctrl+C in its window, `systemctl stop toeline`, or `kill {pid}`)"
           if pid else "stop the Toeline server using it first")
    return f"the data folder {data_dir} is in use by {who}: {how}, then {doing} again"


def acquire(data_dir: str | Path, doing: str = "start", shared: bool = False) -> None:
    """Take the data folder's lock for the rest of this process's life (idempotent).

    ``shared``: a worker of a multi-process server (deploy/wsgi.py under gunicorn) takes the
    lock shared, so its sibling workers can too, while restore (exclusive) is still refused.

    FolderInUse when another process holds it. ``doing`` names the action for the message
    ("serve", "restore").
    """
    folder = Path(data_dir).resolve()
    key = str(folder)
    if key in _held:
        return
    folder.mkdir(parents=True, exist_ok=True)
    fd = os.open(lock_path(folder), os.O_RDWR | os.O_CREAT, 0o600)
    try:
        fcntl.flock(fd, (fcntl.LOCK_SH if shared else fcntl.LOCK_EX) | fcntl.LOCK_NB)
    except BlockingIOError:
        os.close(fd)
        raise FolderInUse(_in_use_message(folder, doing)) from None
    os.ftruncate(fd, 0)
    command = " ".join([Path(sys.argv[0]).name, *sys.argv[1:]]) if sys.argv else "python"
    os.write(fd, f"pid {os.getpid()}: {command}".encode("utf-8", "replace")[:300])
    os.fsync(fd)
    _held[key] = fd


def release(data_dir: str | Path) -> None:
    """Give the lock back (restore does, when it is done; a server never does)."""
    fd = _held.pop(str(Path(data_dir).resolve()), None)
    if fd is not None:
        fcntl.flock(fd, fcntl.LOCK_UN)
        os.close(fd)


def held_here(data_dir: str | Path) -> bool:
    """True when this process holds the folder's lock."""
    return str(Path(data_dir).resolve()) in _held


def in_use(data_dir: str | Path) -> bool:
    """True when another process holds the folder's lock right now."""
    folder = Path(data_dir).resolve()
    if held_here(folder) or not lock_path(folder).exists():
        return False
    fd = os.open(lock_path(folder), os.O_RDONLY)
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)   # any holder, shared or exclusive
    except BlockingIOError:
        return True
    finally:
        os.close(fd)
    return False
