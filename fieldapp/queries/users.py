"""Users, passwords, project membership, login failures and sessions."""

from __future__ import annotations

import hashlib
import secrets
import sqlite3
import time
from dataclasses import dataclass

from argon2 import PasswordHasher
from argon2.exceptions import InvalidHashError, VerificationError

from fieldapp.queries.audit import now_iso

ROLES = ("admin", "engineer", "inspector", "viewer")



def default_hasher() -> PasswordHasher:
    """Argon2id with argon2-cffi's defaults (RFC 9106 low-memory profile: 64 MiB, 3 passes)."""
    return PasswordHasher()


_hasher = default_hasher()


@dataclass(frozen=True)
class User:
    """A signed-in person: id, email, name and role."""

    id: int
    email: str
    name: str
    role: str

    @property
    def is_engineer(self) -> bool:
        """Engineers (and admins) may change ground, rules and schedule and sign off."""
        return self.role in ("engineer", "admin")

    @property
    def can_record(self) -> bool:
        """Inspectors, engineers and admins may record piles; viewers may not."""
        return self.role in ("inspector", "engineer", "admin")

    @property
    def label(self) -> str:
        """The name, or the email when no name was given."""
        return self.name or self.email


def _user(row) -> User | None:
    return User(row["id"], row["email"], row["name"], row["role"]) if row else None


def hash_password(password: str) -> str:
    """Argon2id hash of a password (argon2-cffi defaults)."""
    return _hasher.hash(password)


def check_password(stored_hash: str, password: str) -> bool:
    """True when the password matches the stored Argon2 hash."""
    try:
        return _hasher.verify(stored_hash, password)
    except (VerificationError, InvalidHashError):
        return False


def create(conn: sqlite3.Connection, email: str, password: str, role: str, name: str = "") -> int:
    """Insert a user; ValueError for an unknown role or an email already taken."""
    email = email.strip().lower()
    if role not in ROLES:
        raise ValueError(f"role must be one of {', '.join(ROLES)}, got {role!r}")
    if "@" not in email or len(email) > 254:
        raise ValueError(f"email {email!r} is not an email address")
    if len(password) < 8:
        raise ValueError("password must be at least 8 characters")
    if conn.execute("SELECT 1 FROM users WHERE email = ?", (email,)).fetchone():
        raise ValueError(f"a user with email {email} already exists")
    cur = conn.execute(
        "INSERT INTO users (email, name, password_hash, role, created_at) VALUES (?, ?, ?, ?, ?)",
        (email, name, hash_password(password), role, now_iso()))
    return cur.lastrowid


def by_id(conn: sqlite3.Connection, user_id: int) -> User | None:
    """The user with this id, or None."""
    return _user(conn.execute("SELECT * FROM users WHERE id = ?", (user_id,)).fetchone())


def by_email(conn: sqlite3.Connection, email: str) -> User | None:
    """The user with this email, or None."""
    return _user(conn.execute("SELECT * FROM users WHERE email = ?",
                              (email.strip().lower(),)).fetchone())


def authenticate(conn: sqlite3.Connection, email: str, password: str) -> User | None:
    """The user when email and password match, else None (same work either way)."""
    row = conn.execute("SELECT * FROM users WHERE email = ?", (email.strip().lower(),)).fetchone()
    if row is None:
        check_password(_DUMMY_HASH, password)
        return None
    return _user(row) if check_password(row["password_hash"], password) else None


def verify_password(conn: sqlite3.Connection, user_id: int, password: str) -> bool:
    """True when ``password`` is this user's password (re-entry at sign-off)."""
    row = conn.execute("SELECT password_hash FROM users WHERE id = ?", (user_id,)).fetchone()
    return bool(row) and check_password(row["password_hash"], password)


def add_member(conn: sqlite3.Connection, project_id: int, user_id: int) -> None:
    """Make the user a member of the project (no-op if already)."""
    conn.execute("INSERT INTO memberships (project_id, user_id) VALUES (?, ?) ON CONFLICT DO NOTHING",
                 (project_id, user_id))


def is_member(conn: sqlite3.Connection, project_id: int, user_id: int) -> bool:
    """True when the user belongs to the project."""
    return conn.execute("SELECT 1 FROM memberships WHERE project_id = ? AND user_id = ?",
                        (project_id, user_id)).fetchone() is not None


def all_users(conn: sqlite3.Connection) -> list[User]:
    """Every user, by email."""
    return [_user(r) for r in conn.execute("SELECT * FROM users ORDER BY email").fetchall()]


def record_login_failure(conn: sqlite3.Connection, email: str, ip: str = "") -> None:
    """Note a failed login (by email and by the address it came from) for rate limiting."""
    conn.execute("INSERT INTO login_failures (email, at, ip) VALUES (?, ?, ?)",
                 (email.strip().lower(), time.time(), ip or ""))


def recent_failures_from(conn: sqlite3.Connection, ip: str, window_s: float) -> int:
    """Failed logins from this address, for any email, within the last ``window_s`` seconds."""
    return conn.execute("SELECT COUNT(*) FROM login_failures WHERE ip = ? AND at > ?",
                        (ip or "", time.time() - window_s)).fetchone()[0]


def recent_failures(conn: sqlite3.Connection, email: str, window_s: float) -> int:
    """Failed logins for this email within the last ``window_s`` seconds."""
    return conn.execute("SELECT COUNT(*) FROM login_failures WHERE email = ? AND at > ?",
                        (email.strip().lower(), time.time() - window_s)).fetchone()[0]


def clear_failures(conn: sqlite3.Connection, email: str) -> None:
    """Forget failed logins after a successful one."""
    conn.execute("DELETE FROM login_failures WHERE email = ?", (email.strip().lower(),))


def remember_address(conn: sqlite3.Connection, user_id: int, ip: str) -> None:
    """Note that the user signed in successfully from this address. Run inside ``db.write``."""
    now = time.time()
    conn.execute("INSERT INTO login_addresses (user_id, ip, first_at, last_at) VALUES (?, ?, ?, ?) "
                 "ON CONFLICT (user_id, ip) DO UPDATE SET last_at = excluded.last_at",
                 (user_id, ip or "", now, now))


def known_address(conn: sqlite3.Connection, email: str, ip: str) -> bool:
    """True when the user with this email has signed in successfully from this address before."""
    return conn.execute(
        "SELECT 1 FROM login_addresses a JOIN users u ON u.id = a.user_id WHERE u.email = ? AND a.ip = ?",
        (email.strip().lower(), ip or "")).fetchone() is not None


_DUMMY_HASH = _hasher.hash("not a real password, used to even out timing")


# --------------------------------------------------------------------------------------------
# Sessions: a random token in the signed cookie, its SHA-256 here
# --------------------------------------------------------------------------------------------

def _token_hash(token: str) -> str:
    return hashlib.sha256(token.encode("utf-8")).hexdigest()


def start_session(conn: sqlite3.Connection, user_id: int) -> str:
    """Start a session for the user; returns its token (for the cookie; only its hash is kept).
    Run inside ``db.write``."""
    token = secrets.token_urlsafe(32)
    conn.execute("INSERT INTO sessions (user_id, token_hash, started_at) VALUES (?, ?, ?)",
                 (user_id, _token_hash(token), time.time()))
    return token


def session_user(conn: sqlite3.Connection, token: str, max_age_s: float) -> User | None:
    """The user of a session that has not ended and started within ``max_age_s`` seconds."""
    row = conn.execute(
        "SELECT u.* FROM sessions s JOIN users u ON u.id = s.user_id "
        "WHERE s.token_hash = ? AND s.ended_at IS NULL AND s.started_at > ?",
        (_token_hash(token), time.time() - max_age_s)).fetchone()
    return _user(row)


def end_session(conn: sqlite3.Connection, token: str) -> bool:
    """End one session (signing out); True when it was open. Run inside ``db.write``."""
    cur = conn.execute("UPDATE sessions SET ended_at = ? WHERE token_hash = ? AND ended_at IS NULL",
                       (time.time(), _token_hash(token)))
    return cur.rowcount > 0


def end_sessions(conn: sqlite3.Connection, user_id: int) -> int:
    """End every open session of a user (a lost tablet, a password to change); returns how
    many. Run inside ``db.write``."""
    cur = conn.execute("UPDATE sessions SET ended_at = ? WHERE user_id = ? AND ended_at IS NULL",
                       (time.time(), user_id))
    return cur.rowcount


def open_sessions(conn: sqlite3.Connection, user_id: int) -> int:
    """How many sessions of the user have not ended (some may have expired)."""
    return conn.execute("SELECT COUNT(*) FROM sessions WHERE user_id = ? AND ended_at IS NULL",
                        (user_id,)).fetchone()[0]
