"""WSGI entry point for a production server: ``gunicorn -c deploy/gunicorn.conf.py`` (several
worker processes, deploy/README.md), ``waitress-serve --call deploy.wsgi:make_app`` or
``waitress-serve --port 8000 deploy.wsgi:app``. The data folder comes from TOELINE_DATA, the
database from TOELINE_DATABASE_URL (unset: SQLite in the data folder)."""

from fieldapp import create_app


def make_app():
    """Build the app (for servers that call a factory)."""
    return create_app()


app = make_app()
