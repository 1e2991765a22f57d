"""Projects and the rule set versions that belong to them."""

from __future__ import annotations

import functools
import json
import sqlite3
from dataclasses import dataclass

from design_core import Rules
from fieldapp import text_rules
from fieldapp.queries import audit
from fieldapp.queries.audit import now_iso

# field -> (label, largest number of characters, required)
PROJECT_FIELDS = {
    "name": ("Name", 120, True),
    "site": ("Site", 200, True),
    "datum": ("Datum for levels", 120, False),
    "engineer": ("Engineer of record", 120, False),
}


def check_project(values: dict) -> dict[str, str]:
    """{field: message} for every problem with a new project's name, site, datum and engineer
    (required, length, printable text, not starting like a spreadsheet formula)."""
    errors = {}
    for name, (label, longest, required) in PROJECT_FIELDS.items():
        value = values.get(name)
        text = value.strip() if isinstance(value, str) else ""
        if not text:
            if required:
                errors[name] = f"{label} is required (1 to {longest} characters)"
            continue
        if len(text) > longest:
            errors[name] = f"{label} must be at most {longest} characters, got {len(text)}"
            continue
        problem = text_rules.code_problem(label, text)
        if problem:
            errors[name] = problem
    return errors


@dataclass(frozen=True)
class Project:
    """A piling project: id, name, site, datum for levels and engineer of record."""

    id: int
    name: str
    site: str
    datum: str
    engineer: str


@dataclass(frozen=True)
class RuleSet:
    """One version of a project's rules."""

    project_id: int
    version: int
    rules: Rules
    note: str
    created_at: str


def _project(row) -> Project | None:
    return Project(row["id"], row["name"], row["site"], row["datum"], row["engineer"]) if row else None


def create(conn: sqlite3.Connection, name: str, site: str = "", datum: str = "",
           engineer: str = "", rules: Rules | None = None, user_id: int | None = None) -> int:
    """Insert a project with its first rule set (version 1)."""
    cur = conn.execute(
        "INSERT INTO projects (name, site, datum, engineer, created_at) VALUES (?, ?, ?, ?, ?)",
        (name, site, datum, engineer, now_iso()))
    project_id = cur.lastrowid
    save_rules(conn, project_id, rules or Rules(), "defaults", user_id)
    return project_id


class ProjectInvalid(ValueError):
    """A new project's fields do not check out; ``errors`` is {field: message}."""

    def __init__(self, errors: dict[str, str]):
        super().__init__("; ".join(errors.values()))
        self.errors = errors


def add_project(conn: sqlite3.Connection, values: dict, actor: str, user_id: int | None = None) -> int:
    """Create a project (with the default rules as version 1) and its audit entry "project
    created", the first of its chain; returns its id. Run inside ``db.write``. ProjectInvalid
    naming each field that does not check out."""
    errors = check_project(values)
    if errors:
        raise ProjectInvalid(errors)
    clean = {name: (values.get(name) or "").strip() for name in PROJECT_FIELDS}
    project_id = create(conn, clean["name"], clean["site"], clean["datum"], clean["engineer"], user_id=user_id)
    audit.append(conn, project_id, actor, "project created", clean["name"],
                 {**clean, "rules_version": 1})
    return project_id


def get(conn: sqlite3.Connection, project_id: int) -> Project | None:
    """The project, or None."""
    return _project(conn.execute("SELECT * FROM projects WHERE id = ?", (project_id,)).fetchone())


def for_user(conn: sqlite3.Connection, user_id: int, role: str) -> list[Project]:
    """Projects the user belongs to (an admin sees every project)."""
    if role == "admin":
        rows = conn.execute("SELECT * FROM projects ORDER BY name").fetchall()
    else:
        rows = conn.execute(
            "SELECT p.* FROM projects p JOIN memberships m ON m.project_id = p.id "
            "WHERE m.user_id = ? ORDER BY p.name", (user_id,)).fetchall()
    return [_project(r) for r in rows]


def all_projects(conn: sqlite3.Connection) -> list[Project]:
    """Every project, by id."""
    return [_project(r) for r in conn.execute("SELECT * FROM projects ORDER BY id").fetchall()]


def current_rules(conn: sqlite3.Connection, project_id: int) -> RuleSet:
    """The newest rule set of the project."""
    row = conn.execute(
        "SELECT * FROM rule_sets WHERE project_id = ? ORDER BY version DESC LIMIT 1",
        (project_id,)).fetchone()
    if row is None:
        raise LookupError(f"project {project_id} has no rules")
    return RuleSet(project_id, row["version"], rules_from_json(row["rules_json"]),
                   row["note"], row["created_at"])


@functools.lru_cache(maxsize=256)
def rules_from_json(text: str) -> Rules:
    """Rules from their stored JSON; cached on the text (Rules are frozen, so sharing is safe)."""
    return Rules.from_dict(json.loads(text))


def rules_version(conn: sqlite3.Connection, project_id: int, version: int) -> RuleSet | None:
    """One stored version of the project's rules, or None."""
    row = conn.execute("SELECT * FROM rule_sets WHERE project_id = ? AND version = ?",
                       (project_id, version)).fetchone()
    if row is None:
        return None
    return RuleSet(project_id, row["version"], rules_from_json(row["rules_json"]),
                   row["note"], row["created_at"])


def save_rules(conn: sqlite3.Connection, project_id: int, rules: Rules, note: str = "",
               user_id: int | None = None) -> int:
    """Store the rules as the project's next version and return the version number."""
    row = conn.execute("SELECT COALESCE(MAX(version), 0) FROM rule_sets WHERE project_id = ?",
                       (project_id,)).fetchone()
    version = row[0] + 1
    conn.execute(
        "INSERT INTO rule_sets (project_id, version, rules_json, note, created_by, created_at) "
        "VALUES (?, ?, ?, ?, ?, ?)",
        (project_id, version, json.dumps(rules.to_dict()), note, user_id, now_iso()))
    return version
