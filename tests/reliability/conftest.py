"""Fixtures for the reliability tests: a demo data folder built once per session and copied
per test (the demo project is invented data, fieldapp/demo.py)."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from fieldapp import create_app, demo


@pytest.fixture(scope="session")
def demo_template(tmp_path_factory) -> Path:
    """A data folder holding the demo project (built once per test session; do not write to it)."""
    folder = tmp_path_factory.mktemp("demo-template") / "data"
    app = create_app({"TESTING": True}, data_dir=folder)
    with app.app_context():
        demo.build(app)
    return folder


@pytest.fixture
def demo_data(tmp_path, demo_template) -> Path:
    """A fresh copy of the demo data folder for one test."""
    folder = tmp_path / "data"
    shutil.copytree(demo_template, folder)
    return folder
