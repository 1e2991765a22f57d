"""WSGI entry point for a production server: ``waitress-serve --call deploy.wsgi:make_app``
or ``waitress-serve --port 8000 deploy.wsgi:app``. The data folder comes from TOELINE_DATA."""

from fieldapp import create_app


def make_app():
    """Build the app (for servers that call a factory)."""
    return create_app()


app = make_app()
