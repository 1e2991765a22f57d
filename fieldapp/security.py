"""Response headers that every page and API answer carries.

* Content-Security-Policy: scripts only from our own origin (no inline scripts, no eval);
  styles from our origin plus inline ``style`` attributes (the SVG drawings use them); images
  from our origin, ``data:`` and ``blob:`` (photo previews made on the tablet); no framing.
* ``X-Content-Type-Options: nosniff`` and ``Referrer-Policy: same-origin``.
* No server version: the WSGI server's banner is replaced by a plain name.
"""

from __future__ import annotations

CSP = "; ".join([
    "default-src 'self'",
    "script-src 'self'",
    "style-src 'self' 'unsafe-inline'",
    "img-src 'self' data: blob:",
    "connect-src 'self'",
    "worker-src 'self'",
    "manifest-src 'self'",
    "object-src 'none'",
    "base-uri 'self'",
    "form-action 'self'",
    "frame-ancestors 'none'",
])


def init_app(app) -> None:
    """Add the security headers to every response."""

    @app.after_request
    def _headers(response):
        response.headers.setdefault("Content-Security-Policy", CSP)
        response.headers["X-Content-Type-Options"] = "nosniff"
        response.headers["Referrer-Policy"] = "same-origin"
        response.headers["X-Frame-Options"] = "DENY"
        response.headers["Server"] = "toeline"
        return response
