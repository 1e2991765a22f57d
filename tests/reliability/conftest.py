"""Fixtures for the reliability tests: a demo data folder built once per session and copied
per test (the demo project is invented data, fieldapp/demo.py).

On the PostgreSQL run the demo's database is a PostgreSQL database built once too, and each
test's own database (tests/conftest.py) is made a copy of it."""

from __future__ import annotations

import shutil
from pathlib import Path
from urllib.parse import urlsplit

import pytest

from fieldapp import create_app, db, demo
from reliability_kit import DEMO_DATABASE, DATABASE_MARK


@pytest.fixture(scope="session")
def demo_template(tmp_path_factory, pg_server) -> Path:
    """A data folder holding the demo project (built once per test session; do not write to it)."""
    folder = tmp_path_factory.mktemp("demo-template") / "data"
    config = {"TESTING": True}
    if pg_server is not None:
        pg_server.copy(DEMO_DATABASE, pg_server.template)
        config["DATABASE_URL"] = pg_server.url(DEMO_DATABASE)
    app = create_app(config, data_dir=folder)
    with app.app_context():
        demo.build(app)
    if pg_server is not None:
        db.close_pools(pg_server.url(DEMO_DATABASE))
    return folder


@pytest.fixture
def demo_data(tmp_path, demo_template, database_url, pg_server) -> Path:
    """A fresh copy of the demo data folder (and on PostgreSQL of its database) for one test."""
    folder = tmp_path / "data"
    shutil.copytree(demo_template, folder)
    if database_url:
        pg_server.copy(urlsplit(database_url).path.lstrip("/"), DEMO_DATABASE)
        (folder / DATABASE_MARK).write_text(database_url)
    return folder
