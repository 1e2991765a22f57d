"""``toeline record PROJECT_ID OUT.pdf``: issue the certification record of a project (built
from one snapshot, signed with the project's key, kept as a new revision); an OUT ending in
.csv or .xlsx gets the as-built schedule instead.

``toeline verify-record FILE.pdf [--project ID]``: exit 0 when the file's signature is intact,
made with the project's key in this data folder, and the audit head it embeds is still in the
project's chain; exit 1 otherwise, naming why.
"""

from __future__ import annotations

import time
from pathlib import Path

import click

from fieldapp import db
from fieldapp.queries import audit, projects
from fieldapp.record import export, issue, signing


def register(main: click.Group) -> None:
    """Add ``record`` and ``verify-record`` to the ``toeline`` command group."""
    from fieldapp.cli import _app, data_option       # fieldapp.cli imports this module: a cycle

    @main.command("record")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("out", type=click.Path(dir_okay=False, writable=True))
    @click.option("--quiet", is_flag=True, help="Print only the summary.")
    @click.option("--by", "issued_by", default="cli", show_default=True, help="Who issues the record.")
    @click.pass_context
    def record(ctx, data_dir, project_id, out, quiet, issued_by):
        """Issue the certification record (signed PDF) of PROJECT_ID to OUT; an OUT ending in .csv
        or .xlsx gets the as-built schedule instead."""
        suffix = Path(out).suffix.lower().lstrip(".")
        if suffix not in ("pdf",) + export.FORMATS:
            raise click.ClickException("OUT must end in .pdf (the record), .csv or .xlsx (the as-built schedule)")
        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            if projects.get(conn, project_id) is None:
                raise click.ClickException(f"project {project_id} does not exist")
            if suffix in export.FORMATS:
                Path(out).write_bytes(export.asbuilt_schedule(conn, project_id, suffix))
                click.echo(f"as-built schedule of project {project_id} -> {out}")
                return
        started = time.perf_counter()
        step = [0]

        def progress(done: int, total: int) -> None:
            if quiet or total == 0:
                return
            pct = 100 * done // total
            if pct >= step[0] + 10 or done == total:
                step[0] = pct
                click.echo(f"  {done}/{total} piles ({pct} %)")

        result = issue.issue(app.config["DATABASE"], app.config["DATA_DIR"], app.config["PHOTO_DIR"], project_id,
                             out, issued_by=issued_by, issued_role="command line", progress=progress)
        b = result.build
        conn = db.connect(app.config["DATABASE"])
        try:
            coverage = audit.verify_content(conn, project_id)
        finally:
            conn.close()
        click.echo(f"record of project {project_id}, revision {b.revision}{' (DRAFT)' if b.draft else ''}: "
                   f"{b.piles} piles, {b.pages} pages, {time.perf_counter() - started:.1f} s -> {out}")
        click.echo(f"audit head seq {b.head_seq} hash {b.head_hash} (chain {'intact' if b.chain_ok else 'BROKEN'})")
        click.echo(f"signed; file SHA-256 {result.file_sha256}")
        click.echo(f"content: {coverage.covered} row(s) match their entries"
                   + (f"; {len(coverage.not_covered)} entries not covered (made before content hashes)"
                      if coverage.not_covered else "")
                   + (f"; {len(coverage.problems)} ALTERED or missing (run toeline verify-audit {project_id})"
                      if coverage.problems else ""))

    @main.command("verify-record")
    @data_option
    @click.argument("file", type=click.Path(dir_okay=False))
    @click.option("--project", "project_id", type=int, default=None,
                  help="The project the file must be the record of.")
    @click.pass_context
    def verify_record(ctx, data_dir, file, project_id):
        """Check an issued record FILE: signature intact, made with the project's key, and its
        audit head still in the project's chain. Exit 0 when all hold, 1 otherwise."""
        app = _app(ctx, data_dir)
        conn = db.connect(app.config["DATABASE"])
        try:
            found = signing.verify(file, app.config["DATA_DIR"], conn, project_id)
        finally:
            conn.close()
        where = (f"project {found.project_id}, revision {found.revision}, audit head seq {found.head_seq}"
                 if found.project_id is not None else "no record head")
        if found.ok:
            click.echo(f"OK: {file}: {where}; signature intact, made with the project's key; head in the chain")
            return
        click.echo(f"NOT VERIFIED: {file}: {where}", err=True)
        for problem in found.problems:
            click.echo(f"  - {problem}", err=True)
        ctx.exit(1)
