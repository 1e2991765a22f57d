"""``toeline verify-audit [PROJECT_ID] [--head SEQ:HASH]``: is each audit chain intact, does it
still vouch for the rows it records, and does it still hold every head kept outside it?

For every chain walked it says: whether its links are intact; how many rows (record versions,
sign-offs with their dispositions, amendments, photos and their files) match the content hash
their entry carries, which entries are not covered (made before entries carried one) and every
row that no longer matches, is missing or has no entry; and which anchors it checked (the heads
of the backup manifests kept in the data folder, heads kept with issued records, and each
``--head SEQ:HASH`` an engineer kept from ``toeline audit-head``), each holding or not.

Exit status 0 when every chain walked is intact with no problem, 1 when anything is wrong, 2 for
a project that does not exist or a ``--head`` that cannot be read.
"""

from __future__ import annotations

import re
from pathlib import Path

import click

from fieldapp import backup, db
from fieldapp.queries import audit, projects

HEAD_RE = re.compile(r"^(\d{1,18}):([0-9a-f]{64})$")


def register(main: click.Group) -> None:
    """Add ``verify-audit`` to the ``toeline`` command group."""
    # fieldapp.cli imports this module while it loads (its _load_extra_commands): importing it
    # back at the top would find it half made.
    from fieldapp.cli import _app, data_option

    @main.command("verify-audit")
    @data_option
    @click.argument("project_id", required=False, type=int)
    @click.option("--head", "kept_heads", multiple=True, metavar="SEQ:HASH",
                  help="A head of PROJECT_ID's chain kept earlier (toeline audit-head); repeatable.")
    @click.pass_context
    def verify_audit(ctx, data_dir, project_id, kept_heads):
        """Verify the audit chain of one project (or every chain), the rows it vouches for and
        every anchor known."""
        kept = []
        for text in kept_heads:
            match = HEAD_RE.match(text.strip().lower())
            if not match or project_id is None:
                click.echo(f"--head {text!r}: give PROJECT_ID and SEQ:HASH (64 hex digits) as printed "
                           "by toeline audit-head", err=True)
                ctx.exit(2)
            kept.append(audit.Anchor(f"kept head {match.group(1)}", project_id, int(match.group(1)),
                                     match.group(2)))
        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            folder_anchors, anchor_problems = backup.folder_anchors(Path(app.config["DATA_DIR"]))
            anchors = folder_anchors + audit.stored_anchors(conn) + kept
            if project_id is not None:
                if projects.get(conn, project_id) is None:
                    click.echo(f"project {project_id} does not exist", err=True)
                    ctx.exit(2)
                chain_ids = [project_id]
            else:
                known = set(audit.chains(conn)) | {p.id for p in projects.all_projects(conn)}
                known |= {a.project_id for a in anchors}
                chain_ids = sorted(known, key=lambda c: (c is not None, c or 0)) or [None]
            photo_file = backup.photo_sha(Path(app.config["PHOTO_DIR"]))
            broken = False
            for problem in anchor_problems:
                broken = True
                click.echo(f"anchors: {problem}")
            for chain in chain_ids:
                broken |= _report_chain(conn, chain, [a for a in anchors if a.project_id == chain],
                                        photo_file)
            ctx.exit(1 if broken else 0)


def _report_chain(conn, chain, anchors, photo_file) -> bool:
    """Print what was checked for one chain; True when anything is wrong."""
    name = f"project {chain}" if chain is not None else "site-wide chain"
    report = audit.verify_chain(conn, chain)
    wrong = False
    if report.ok:
        seq, _ = audit.head(conn, chain)
        click.echo(f"{name}: intact, {report.entries} entries, head {report.head} (seq {seq}; the links "
                   "of the chain, its content below)")
    else:
        wrong = True
        click.echo(f"{name}: BROKEN at entry {report.broken_id} after {report.entries} "
                   f"good entries: {report.problem}")
    if chain is not None:
        coverage = audit.verify_content(conn, chain, photo_file)
        click.echo(f"  content: {coverage.covered} row(s) match the hash their entry carries")
        if coverage.not_covered:
            click.echo(f"  not covered: {len(coverage.not_covered)} entr{'y' if len(coverage.not_covered) == 1 else 'ies'}"
                       " made before entries carried content hashes (their rows are not checked):")
            for line in coverage.not_covered[:20]:
                click.echo(f"    {line}")
        for problem in coverage.problems:
            wrong = True
            click.echo(f"  ALTERED: {problem}")
    if not anchors:
        keep = f" (keep one: toeline audit-head {chain})" if chain is not None else ""
        click.echo(f"  anchors: none known{keep}")
    for anchor in anchors:
        problem = audit.check_anchor(conn, anchor)
        at = f"seq {anchor.seq}" if anchor.seq is not None else f"hash {anchor.hash[:16]}..."
        if problem:
            wrong = True
            click.echo(f"  anchor NOT HELD: {problem}")
        else:
            click.echo(f"  anchor checked: {anchor.source} ({at}) holds")
    return wrong
