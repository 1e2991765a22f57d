"""``toeline verify-audit [PROJECT_ID]``: walk the audit chain(s) and say whether they are intact.

Exit status 0 when every chain walked is intact, 1 naming the first broken entry (its id, its
action and what is wrong), 2 for a project that does not exist.
"""

from __future__ import annotations

import click

from fieldapp import db
from fieldapp.queries import audit, projects


def register(main: click.Group) -> None:
    """Add ``verify-audit`` to the ``toeline`` command group."""
    # fieldapp.cli imports this module while it loads (its _load_extra_commands): importing it
    # back at the top would find it half made.
    from fieldapp.cli import _app, data_option

    @main.command("verify-audit")
    @data_option
    @click.argument("project_id", required=False, type=int)
    @click.pass_context
    def verify_audit(ctx, data_dir, project_id):
        """Verify the audit hash chain of one project, or of every chain when no id is given."""
        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            if project_id is not None:
                if projects.get(conn, project_id) is None:
                    click.echo(f"project {project_id} does not exist", err=True)
                    ctx.exit(2)
                chain_ids = [project_id]
            else:
                chain_ids = audit.chains(conn) or [None]
            broken = False
            for chain in chain_ids:
                report = audit.verify_chain(conn, chain)
                name = f"project {chain}" if chain is not None else "site-wide chain"
                if report.ok:
                    click.echo(f"{name}: intact, {report.entries} entries, head {report.head}")
                else:
                    broken = True
                    click.echo(f"{name}: BROKEN at entry {report.broken_id} after {report.entries} "
                               f"good entries: {report.problem}")
            ctx.exit(1 if broken else 0)
