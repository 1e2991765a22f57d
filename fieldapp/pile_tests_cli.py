"""``toeline pile-test add PROJECT_ID MARK --kind KIND --file FILE ...``: put one test on a pile
from the command line, through the same reading and the same one write as the screen
(``fieldapp.pile_tests.read_test`` and ``fieldapp.pile_test_register.add_test``).

``--as EMAIL`` names the member who enters it (a recorder: inspector, engineer or admin); the
options are the form's fields (``--rating``, ``--anomaly-depth``, ``--description``, ``--csl``
lines "pair, from m, to m, %, dB" separated by ";", ``--resistance``, ``--set``,
``--compression``, ``--tension``, ``--material``, ``--required``, ``--settlement-limit``,
``--length``, ``--e-mpa``). Exit status 0 when stored, 1 when refused (every field named, nothing
stored), 2 for an unknown project, pile or user.
"""

from __future__ import annotations

from pathlib import Path

import click

from fieldapp import db
from fieldapp import pile_test_register as reg
from fieldapp.pile_tests import FormErrors, read_test
from fieldapp.queries import piles as piles_q
from fieldapp.queries import projects, users

OPTIONS = {  # option name -> form field
    "rating": "rating", "anomaly_depth": "anomaly_depth_m", "description": "description",
    "resistance": "resistance_kn", "set_mm": "set_mm", "compression": "compression_mpa",
    "tension": "tension_mpa", "material": "material", "required": "required_kn",
    "settlement_limit": "settlement_limit_mm", "length": "length_m", "e_mpa": "e_mpa",
}


class _Upload:
    """A file given on the command line, read like a form's upload."""

    def __init__(self, path: Path):
        self.filename = path.name
        self._data = path.read_bytes()

    def read(self) -> bytes:
        return self._data


def register(main: click.Group) -> None:
    """Add ``pile-test add`` to the ``toeline`` command group."""
    # fieldapp.cli imports this module while it loads: importing it back at the top would
    # find it half made (as the other command modules do).
    from fieldapp.cli import _app, data_option

    @main.group("pile-test")
    def pile_test():
        """The test register: tests after installation."""

    @pile_test.command("add")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("mark")
    @click.option("--kind", required=True, type=click.Choice(list(reg.KINDS)))
    @click.option("--file", "file_path", type=click.Path(exists=True, dir_okay=False, path_type=Path))
    @click.option("--date", "tested_on", required=True, help="YYYY-MM-DD")
    @click.option("--by", "tested_by", required=True, help="who tested")
    @click.option("--as", "email", required=True, help="the member entering the test")
    @click.option("--csl", default="", help='zones "pair, from, to, %, dB" separated by ";"')
    @click.option("--rating")
    @click.option("--anomaly-depth")
    @click.option("--description")
    @click.option("--resistance")
    @click.option("--set", "set_mm")
    @click.option("--compression")
    @click.option("--tension")
    @click.option("--material")
    @click.option("--required")
    @click.option("--settlement-limit")
    @click.option("--length")
    @click.option("--e-mpa")
    @click.pass_context
    def add(ctx, data_dir, project_id, mark, kind, file_path, tested_on, tested_by, email, csl,
            **values):
        """Add one test to pile MARK of PROJECT_ID."""
        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            pile = piles_q.get_pile(conn, project_id, mark)
            user = users.by_email(conn, email)
            if projects.get(conn, project_id) is None or pile is None:
                click.echo(f"no pile {mark} in project {project_id}", err=True)
                ctx.exit(2)
            if user is None or not user.can_record or (
                    user.role != "admin" and not users.is_member(conn, project_id, user.id)):
                click.echo(f"{email} is not a member who records in project {project_id}", err=True)
                ctx.exit(2)
            form = {"kind": kind, "tested_on": tested_on, "tested_by": tested_by,
                    "csl": "\n".join(csl.split(";"))}
            form.update({OPTIONS[k]: v for k, v in values.items() if v is not None})
            files = {"file": _Upload(file_path)} if file_path else {}
            rules = projects.current_rules(conn, project_id).rules
            try:
                got = read_test(conn, project_id, pile, form, files, rules)
                test = reg.add_test(conn, app.config["DATA_DIR"], project_id, pile, user, *got)
            except (FormErrors, reg.TestFileRefused) as exc:
                for name, message in getattr(exc, "errors", {"file": str(exc)}).items():
                    click.echo(f"{name}: {message}", err=True)
                click.echo("nothing was stored", err=True)
                ctx.exit(1)
            click.echo(f"test {test.id} on {mark}: {test.check['reason']}")
