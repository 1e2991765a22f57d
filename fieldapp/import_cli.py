"""``toeline import-ags PROJECT_ID FILE`` and ``toeline import-layout PROJECT_ID FILE.dxf --layer NAME``.

``import-ags`` checks the whole AGS4 file and stores it only when it is accepted (every problem
listed with group, heading and line, exit status 1 otherwise). ``import-layout`` prints the
preview of the drawing and stores nothing unless ``--apply`` is given; applying moves existing
piles and creates new ones copying ``--template`` (a pile of the schedule), all or nothing.
"""

from __future__ import annotations

from pathlib import Path

import click


def register(main: click.Group) -> None:
    """Add ``import-ags`` and ``import-layout`` to the ``toeline`` command group."""
    from fieldapp.cli import _app, data_option

    def _project(conn, project_id):
        from fieldapp.queries import projects

        if projects.get(conn, project_id) is None:
            raise click.ClickException(f"project {project_id} does not exist")

    @main.command("import-ags")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("file", type=click.Path(exists=True, dir_okay=False))
    @click.pass_context
    def import_ags_command(ctx, data_dir, project_id, file):
        """Import an AGS4 ground investigation: locations, strata as proposals, SPT, CPT, water."""
        from fieldapp import ags_io, db

        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            _project(conn, project_id)
            result = ags_io.import_ags(conn, project_id, Path(file).read_bytes(), file, "cli",
                                       app.config["DATA_DIR"])
        if not result.ok:
            for error in result.errors:
                click.echo(str(error), err=True)
            raise click.ClickException(result.summary())
        click.echo(result.summary())
        click.echo("Materials are proposals: confirm them and enter the strength parameters when making "
                   "each ground model (Ground screen, AGS4 data).")

    @main.command("import-layout")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("file", type=click.Path(exists=True, dir_okay=False))
    @click.option("--layer", required=True, help="Layer whose circles or blocks are the piles.")
    @click.option("--units", type=click.Choice(["m", "mm"]), default=None,
                  help="Drawing units, when the drawing does not say ($INSUNITS).")
    @click.option("--text-distance", "text_distance", type=float, default=1.0, show_default=True,
                  help="Furthest a mark text may be from its circle's centre, m.")
    @click.option("--template", default=None, help="Pile whose design new piles copy.")
    @click.option("--apply", "apply_", is_flag=True, help="Apply the drawing (otherwise only preview).")
    @click.pass_context
    def import_layout_command(ctx, data_dir, project_id, file, layer, units, text_distance, template, apply_):
        """Preview (or with --apply, apply) a pile layout drawn in a DXF file."""
        from fieldapp import db, layout_io

        app = _app(ctx, data_dir)
        data = Path(file).read_bytes()
        with app.app_context():
            conn = db.get_db()
            _project(conn, project_id)
            try:
                if apply_:
                    result, outcome = layout_io.apply_layout(conn, project_id, data, file, layer, units,
                                                             text_distance, template, "cli", app.config["DATA_DIR"])
                else:
                    result, outcome = layout_io.preview(conn, project_id, data, layer, units, text_distance), None
            except layout_io.LayoutRefused as exc:
                raise click.ClickException(str(exc)) from None
        for pile in result.new:
            click.echo(f"new        {pile.mark:<12} ({pile.x_m:.3f}, {pile.y_m:.3f}) {pile.diameter_mm:g} mm")
        for pile, _, moved in result.moved:
            click.echo(f"moved      {pile.mark:<12} by {moved * 1000:.0f} mm to ({pile.x_m:.3f}, {pile.y_m:.3f})")
        for pile in result.unchanged:
            click.echo(f"unchanged  {pile.mark}")
        for mark, found in sorted(result.clashes.items()):
            click.echo(f"CLASH      {mark:<12} on {len(found)} circles: " + "; ".join(p.where() for p in found))
        for pile in result.unmarked:
            click.echo(f"NO MARK    {pile.where()}")
        for pile, row in result.diameter_differs:
            click.echo(f"DIAMETER   {pile.mark:<12} drawn {pile.diameter_mm:g} mm, schedule {row.diameter_mm:g} mm")
        for problem in result.problems:
            click.echo(f"PROBLEM    {problem}")
        click.echo(result.summary())
        if outcome is None:
            click.echo("Preview only: nothing stored. Add --apply (and --template MARK for new piles) to apply.")
            return
        if not outcome.ok:
            for error in outcome.errors:
                click.echo(str(error), err=True)
            raise click.ClickException("Nothing applied: the whole drawing or nothing.")
        click.echo(outcome.summary())
