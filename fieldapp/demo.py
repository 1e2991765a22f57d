"""The demo project: an invented site with invented people (placeholder; filled in by set-up work)."""

LOGINS = [
    ("admin@toeline.example", "admin", "demo-admin-1"),
    ("engineer@toeline.example", "engineer", "demo-engineer-1"),
    ("inspector@toeline.example", "inspector", "demo-inspector-1"),
    ("viewer@toeline.example", "viewer", "demo-viewer-1"),
]


def build(app) -> None:
    """Create the demo users and project."""
    from fieldapp import db
    from fieldapp.queries import projects, users

    conn = db.get_db()
    with db.write(conn):
        pid = projects.create(conn, "Harbour Lane Depot", "Invented site, Northfield Quay",
                              "site datum +100.000 m",
                              "A. Example")
        for email, role, password in LOGINS:
            uid = users.create(conn, email, password, role, email.split("@")[0].title())
            users.add_member(conn, pid, uid)
