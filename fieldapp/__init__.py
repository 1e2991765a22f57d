"""Toeline's web app: the Flask app factory.

``create_app(test_config=None)`` builds the app on a data folder (``TOELINE_DATA``, default
``./toeline-data``) that holds the SQLite database, the photos and the secret key made on
first start. The blueprints are registered here from one explicit list, ``BLUEPRINTS`` (one
per screen, plus the API, the offline files and the API description); a module of the list
that cannot be imported stops the start with an error naming it.
"""

from __future__ import annotations

import importlib
import os
import secrets
from datetime import timedelta
from pathlib import Path

# One BLAS thread per process, set before numpy loads OpenBLAS. The server answers requests on
# a pool of threads and each recheck solves small systems (the 201 x 201 Winkler matrix):
# OpenBLAS's own threads then fight the request threads for the cores. Profiled on 2 cores
# (tests/perf): numpy.linalg.solve of 201 x 201 took 20 ms with OpenBLAS threads, 1.6 ms
# with one. An operator may still override it in the environment.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

from flask import Blueprint, Flask, abort, request
from flask_wtf.csrf import CSRFProtect
from werkzeug.middleware.proxy_fix import ProxyFix
from werkzeug.routing import IntegerConverter

from fieldapp import auth, db, security

ROOT = Path(__file__).resolve().parent.parent
csrf = CSRFProtect()

# Every blueprint of the app, in registration order (modules under fieldapp/).
BLUEPRINTS = ("piles", "ground", "rules", "rig", "review", "record.views", "api", "offline", "openapi",
              "imports", "pile_tests", "soundings")

CAUTION = (
    "Caution: Toeline's checks aid a competent engineer; they do not replace the engineer of "
    "record, whose judgement and the local codes govern. Every default (factors, tolerances, "
    "tables) must be checked against the project's specification."
)


class SqliteInt(IntegerConverter):
    """``<int:...>`` in addresses, limited to SQLite's 64-bit integers: a larger id is a 404, not
    an OverflowError (500) in the query."""

    def __init__(self, map, *args, **kwargs):  # noqa: A002 - werkzeug's signature
        kwargs.setdefault("max", 2**63 - 1)
        super().__init__(map, *args, **kwargs)


def default_data_dir() -> Path:
    """The data folder from ``TOELINE_DATA``, else ``./toeline-data``."""
    return Path(os.environ.get("TOELINE_DATA") or "toeline-data").resolve()


def _secret_key(data_dir: Path) -> str:
    """Read the secret key kept in the data folder, making it on first start (mode 600)."""
    path = data_dir / "secret_key"
    if not path.exists():
        key = secrets.token_hex(32)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "w") as fh:
            fh.write(key)
    return path.read_text().strip()


def create_app(test_config: dict | None = None, data_dir: str | Path | None = None) -> Flask:
    """Build the app on a data folder; ``test_config`` overrides settings for tests."""
    data = Path(data_dir).resolve() if data_dir else default_data_dir()
    if test_config and test_config.get("DATA_DIR"):
        data = Path(test_config["DATA_DIR"]).resolve()
    data.mkdir(parents=True, exist_ok=True)
    (data / "photos").mkdir(exist_ok=True)

    app = Flask(__name__, template_folder=str(ROOT / "templates"),
                static_folder=str(ROOT / "static"), static_url_path="/static")
    app.url_map.converters["int"] = SqliteInt  # before any route: ids beyond SQLite's range are 404
    app.config.from_mapping(
        DATA_DIR=str(data),
        DATABASE=str(data / "toeline.sqlite3"),
        PHOTO_DIR=str(data / "photos"),
        SECRET_KEY=_secret_key(data),
        SESSION_COOKIE_HTTPONLY=True,
        SESSION_COOKIE_SAMESITE="Lax",
        PERMANENT_SESSION_LIFETIME=timedelta(days=31),  # also enforced on the server (sessions)
        MAX_CONTENT_LENGTH=26 * 1024 * 1024,
        WTF_CSRF_TIME_LIMIT=None,
        LOGIN_MAX_FAILURES=5,
        LOGIN_MAX_FAILURES_PER_IP=50,
        LOGIN_WINDOW_S=300,
    )
    if os.environ.get("TOELINE_PROXY") == "1":
        # Behind a TLS-terminating reverse proxy (deploy/): trust one hop of X-Forwarded-*
        # and send the session cookie over HTTPS only.
        app.wsgi_app = ProxyFix(app.wsgi_app, x_for=1, x_proto=1, x_host=1)
        app.config["SESSION_COOKIE_SECURE"] = True
    if test_config:
        app.config.update(test_config)

    app.before_request(_refuse_malformed_form)  # before CSRF, which fails on it with a 500
    db.init_app(app)
    auth.init_app(app)  # before CSRF: an API write with no session is a 401, not a CSRF 400
    csrf.init_app(app)
    security.init_app(app)

    @app.context_processor
    def _globals():
        return {"caution": CAUTION, "has_endpoint": lambda name: name in app.view_functions}

    @app.get("/healthz")
    def healthz():
        return {"ok": True}

    register_blueprints(app, app.config.get("BLUEPRINTS", BLUEPRINTS))
    return app


def _refuse_malformed_form():
    """400 for a form field whose name werkzeug cannot read (a line break in a multipart header
    makes the name None, and Flask-WTF's CSRF check then raises)."""
    if request.mimetype in ("multipart/form-data", "application/x-www-form-urlencoded") and (
            None in request.form or None in request.files):
        abort(400, "a form field has a name that cannot be read")


def register_blueprints(app: Flask, names: tuple[str, ...] = BLUEPRINTS) -> None:
    """Register ``fieldapp.<name>.bp`` for every name, in order. A module that is missing or
    has no blueprint raises RuntimeError naming it: a screen never goes missing silently.

    The modules are imported here, at app build time, because each imports this package (its
    ``CAUTION`` and the extensions) and so cannot be imported before it."""
    for name in names:
        try:
            module = importlib.import_module(f"fieldapp.{name}")
        except ModuleNotFoundError as exc:
            raise RuntimeError(f"blueprint module fieldapp.{name} is missing: {exc}") from exc
        blueprint = getattr(module, "bp", None)
        if not isinstance(blueprint, Blueprint):
            raise RuntimeError(f"fieldapp.{name} has no blueprint named bp")
        app.register_blueprint(blueprint)
