"""The ``toeline`` command: set up a data folder, add users, serve, and the demo.

The data folder comes from ``--data DIR`` (on the command or before it) or ``TOELINE_DATA``,
default ``./toeline-data``.
"""

from __future__ import annotations

import sys

import click

from fieldapp import create_app, datalock, db
from fieldapp.queries import audit, projects, users

DEFAULT_DATA = "toeline-data"


def data_option(f):
    """Add ``--data DIR`` to a subcommand (overrides the group's option)."""
    return click.option("--data", "data_dir", default=None, type=click.Path(file_okay=False),
                        help="Data folder (default: TOELINE_DATA or ./toeline-data).")(f)


def _app(ctx: click.Context, data_dir: str | None):
    folder = data_dir or ctx.obj["data"]
    return create_app(data_dir=folder)


def _hold_folder(ctx: click.Context, data_dir: str | None, doing: str) -> None:
    """Take the data folder's lock for this process's life (fieldapp.datalock): a restore is
    refused while it is held, and a second server on the same folder cannot start."""
    try:
        datalock.acquire(data_dir or ctx.obj["data"], doing)
    except datalock.FolderInUse as exc:
        raise click.ClickException(str(exc)) from None


@click.group()
@click.option("--data", "data_dir", envvar="TOELINE_DATA", default=DEFAULT_DATA, show_default=True,
              type=click.Path(file_okay=False), help="Data folder (also TOELINE_DATA).")
@click.pass_context
def main(ctx: click.Context, data_dir: str) -> None:
    """Toeline: record piles as built, recheck them on the spot, certify the foundations."""
    ctx.ensure_object(dict)
    ctx.obj["data"] = data_dir


@main.command()
@data_option
@click.pass_context
def init(ctx, data_dir):
    """Create the data folder and database (safe to run again)."""
    app = _app(ctx, data_dir)
    with app.app_context():
        version = db.schema_version(db.get_db())
    click.echo(f"data folder {app.config['DATA_DIR']} ready (schema version {version})")


@main.command()
@data_option
@click.option("--host", default="127.0.0.1", show_default=True, help="Address to listen on.")
@click.option("--port", default=8000, show_default=True, type=int)
@click.option("--threads", default=8, show_default=True, type=int)
@click.option("--https", "use_https", is_flag=True,
              help="Serve HTTPS (cheroot) with a site certificate authority kept in the data folder.")
@click.option("--name", "names", multiple=True,
              help="With --https: an extra host name or address for the certificate (repeatable).")
@click.pass_context
def serve(ctx, data_dir, host, port, threads, use_https, names):
    """Serve the app with waitress (the production WSGI server), or over HTTPS with --https.

    Holds the data folder's lock while it runs, so ``toeline restore`` refuses meanwhile."""
    _hold_folder(ctx, data_dir, "serve")
    app = _app(ctx, data_dir)
    if use_https:
        from fieldapp import https

        https.serve(app, host, port, threads, list(names), echo=click.echo)
        return
    _serve(app, host, port, threads)


def _serve(app, host: str, port: int, threads: int = 8) -> None:
    import waitress

    click.echo(f"Toeline serving {app.config['DATA_DIR']} at http://{host}:{port}/  (Ctrl+C stops)")
    waitress.serve(app, host=host, port=port, threads=threads, ident="toeline")


@main.group()
def user():
    """Manage users."""


@user.command("add")
@data_option
@click.argument("email")
@click.option("--role", required=True, type=click.Choice(["admin", "engineer", "inspector", "viewer"]))
@click.option("--name", default="", help="Full name shown on records.")
@click.option("--project", "project_ids", type=int, multiple=True, help="Project id to join (repeatable).")
@click.option("--password-stdin", is_flag=True, help="Read the password from standard input.")
@click.pass_context
def user_add(ctx, data_dir, email, role, name, project_ids, password_stdin):
    """Add a user with a role, optionally to projects."""
    if password_stdin:
        password = sys.stdin.readline().rstrip("\r\n")
    else:
        password = click.prompt("Password", hide_input=True, confirmation_prompt=True)
    app = _app(ctx, data_dir)
    with app.app_context():
        conn = db.get_db()
        try:
            with db.write(conn):
                user_id = users.create(conn, email, password, role, name)
                for pid in project_ids:
                    if projects.get(conn, pid) is None:
                        raise ValueError(f"project {pid} does not exist")
                    users.add_member(conn, pid, user_id)
                    audit.append(conn, pid, "cli", "member added", email, {"role": role})
        except ValueError as exc:
            raise click.ClickException(str(exc)) from exc
    click.echo(f"user {email} added as {role}")


@user.command("end-sessions")
@data_option
@click.argument("email")
@click.pass_context
def user_end_sessions(ctx, data_dir, email):
    """Sign a user out everywhere (a lost or stolen tablet): every session of EMAIL ends now.

    Records already saved stay saved. A tablet whose session ended keeps its unsent saves in
    its outbox; they are sent once someone signs in on it again."""
    app = _app(ctx, data_dir)
    with app.app_context():
        conn = db.get_db()
        found = users.by_email(conn, email)
        if found is None:
            raise click.ClickException(f"no user with email {email}")
        with db.write(conn):
            ended = users.end_sessions(conn, found.id)
            audit.append(conn, None, "cli", "sessions ended", found.email, {"sessions": ended})
    click.echo(f"{ended} session{'s' if ended != 1 else ''} of {found.email} ended")


@main.group()
def project():
    """Manage projects."""


@project.command("add")
@data_option
@click.argument("name")
@click.option("--site", required=True, help="Where the piles are (1 to 200 characters).")
@click.option("--datum", default="", help="The datum levels are given to.")
@click.option("--engineer", default="", help="The engineer of record.")
@click.pass_context
def project_add(ctx, data_dir, name, site, datum, engineer):
    """Create a project NAME with the default rules as version 1; audited ("project created")."""
    app = _app(ctx, data_dir)
    with app.app_context():
        conn = db.get_db()
        try:
            with db.write(conn):
                project_id = projects.add_project(
                    conn, {"name": name, "site": site, "datum": datum, "engineer": engineer}, "cli")
        except projects.ProjectInvalid as exc:
            raise click.ClickException("project not created: " + "; ".join(exc.errors.values())) from None
    click.echo(f"project {project_id} {name.strip()!r} created; its rules are the defaults (version 1): "
               "check them against the project's specification")


@main.command("audit-head")
@data_option
@click.argument("project_id", type=int)
@click.pass_context
def audit_head(ctx, data_dir, project_id):
    """Print the head (SEQ:HASH) of PROJECT_ID's audit chain, for an engineer to keep outside the
    data folder; ``toeline verify-audit PROJECT_ID --head SEQ:HASH`` later proves the chain still
    holds it (nothing deleted from its end, nothing renumbered or rehashed)."""
    app = _app(ctx, data_dir)
    with app.app_context():
        conn = db.get_db()
        project = projects.get(conn, project_id)
        if project is None:
            raise click.ClickException(f"project {project_id} does not exist")
        seq, digest = audit.head(conn, project_id)
        at = audit.now_iso()
    click.echo(f"{seq}:{digest}")
    click.echo(f"head of the audit chain of project {project_id} ({project.name}) at {at}; keep it, "
               f"then check with: toeline verify-audit {project_id} --head {seq}:{digest}", err=True)


@main.group()
def photos():
    """Look after the photo files."""


@photos.command("prune")
@data_option
@click.option("--older-than-hours", default=24.0, show_default=True, type=click.FloatRange(min=1.0),
              help="Leave files changed more recently than this (an upload may be under way).")
@click.option("--dry-run", is_flag=True, help="Only list what would be removed.")
@click.pass_context
def photos_prune(ctx, data_dir, older_than_hours, dry_run):
    """Remove photo files that no stored photo points at (an upload whose database write
    failed, a write cut off by a crash). Files any photo points at are never touched."""
    from fieldapp import photos as photos_mod

    app = _app(ctx, data_dir)
    with app.app_context():
        report = photos_mod.prune_unreferenced(db.get_db(), app.config["PHOTO_DIR"],
                                               older_than_hours * 3600.0, dry_run=dry_run)
    for path in report.removed:
        click.echo(f"{'would remove' if dry_run else 'removed'} {path}")
    click.echo(f"{len(report.removed)} file{'s' if len(report.removed) != 1 else ''} "
               f"({report.bytes / 1_048_576:.1f} MB) {'would be ' if dry_run else ''}removed; "
               f"{report.left_young} newer than {older_than_hours:g} h left")


@main.command()
@data_option
@click.option("--host", default="127.0.0.1", show_default=True)
@click.option("--port", default=8000, show_default=True, type=int)
@click.option("--no-serve", is_flag=True, help="Build the demo data and stop.")
@click.pass_context
def demo(ctx, data_dir, host, port, no_serve):
    """Create the demo project in an empty data folder, print the logins, and serve."""
    from fieldapp import demo as demo_data
    _hold_folder(ctx, data_dir, "serve the demo")
    app = _app(ctx, data_dir)
    with app.app_context():
        conn = db.get_db()
        if not projects.all_projects(conn):
            click.echo("building the demo project ...")
            demo_data.build(app)
        else:
            click.echo("data folder already holds projects; serving it as it is")
    click.echo("Demo logins (invented people):")
    for email, role, password in getattr(demo_data, "LOGINS", []):
        click.echo(f"  {role:<9} {email:<28} password: {password}")
    if not no_serve:
        _serve(app, host, port)


def _load_extra_commands() -> None:
    """Commands that live beside their area (import/export, audit, record, backup)."""
    import importlib

    for name in ("fieldapp.schedule_io", "fieldapp.review_cli", "fieldapp.record.cli", "fieldapp.backup",
                 "fieldapp.import_cli", "fieldapp.pile_tests_cli"):
        try:
            module = importlib.import_module(name)
        except ModuleNotFoundError as exc:
            if exc.name == name:
                continue
            raise
        module.register(main)


_load_extra_commands()


def _register_migrate_to() -> None:
    """``toeline migrate-to DATABASE_URL`` (fieldapp/migrate_to.py): a site up to a company server."""
    from fieldapp import migrate_to  # it imports this module's helpers: a cycle otherwise

    migrate_to.register(main)


_register_migrate_to()

if __name__ == "__main__":  # pragma: no cover
    main()
