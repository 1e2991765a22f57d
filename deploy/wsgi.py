"""WSGI entry point for a production server: ``gunicorn -c deploy/gunicorn.conf.py`` (several
worker processes, deploy/README.md), ``waitress-serve --call deploy.wsgi:make_app`` or
``waitress-serve --port 8000 deploy.wsgi:app``. The data folder comes from TOELINE_DATA, the
database from TOELINE_DATABASE_URL (unset: SQLite in the data folder)."""

from fieldapp import create_app, datalock


def make_app():
    """Build the app (for servers that call a factory). Each worker holds the data folder's lock
    shared for its life, so ``toeline restore`` refuses while any worker runs."""
    app = create_app()
    datalock.acquire(app.config["DATA_DIR"], "serve", shared=True)
    return app


app = make_app()
