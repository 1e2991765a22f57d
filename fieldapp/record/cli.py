"""``toeline record PROJECT_ID OUT.pdf``: build the certification record of a project."""

from __future__ import annotations

import time

import click


def register(main: click.Group) -> None:
    """Add ``record`` to the ``toeline`` command group."""
    from fieldapp.cli import _app, data_option

    @main.command("record")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("out", type=click.Path(dir_okay=False, writable=True))
    @click.option("--quiet", is_flag=True, help="Print only the summary.")
    @click.pass_context
    def record(ctx, data_dir, project_id, out, quiet):
        """Write the certification record (PDF) of PROJECT_ID to OUT; an OUT ending in .csv or
        .xlsx gets the as-built schedule instead."""
        from pathlib import Path

        from fieldapp import db
        from fieldapp.queries import audit, projects
        from fieldapp.record import export, pdf

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

            result = pdf.build(conn, project_id, out, photo_dir=app.config["PHOTO_DIR"], progress=progress)
            with db.write(conn):
                audit.append(conn, project_id, "cli", "record built", "record",
                             {"head_hash": result.head_hash, "pages": result.pages, "piles": result.piles,
                              "file": Path(out).name})
            coverage = audit.verify_content(conn, project_id)
        click.echo(f"record of project {project_id}: {result.piles} piles, {result.pages} pages, "
                   f"{time.perf_counter() - started:.1f} s -> {result.path}")
        click.echo(f"audit head hash {result.head_hash} (chain {'intact' if result.chain_ok else 'BROKEN'})")
        click.echo(f"content: {coverage.covered} row(s) match their entries"
                   + (f"; {len(coverage.not_covered)} entries not covered (made before content hashes)"
                      if coverage.not_covered else "")
                   + (f"; {len(coverage.problems)} ALTERED or missing (run toeline verify-audit {project_id})"
                      if coverage.problems else ""))
