"""Offline: the service worker, the web app manifest, the project bundle and the site CA page.

Routes (blueprint ``offline``):

* ``GET /sw.js``: ``static/sw.js`` with its cache version (a hash of every static file, so any
  change to the app shell makes a new worker) and the list of static files filled in; served
  with ``Service-Worker-Allowed: /`` and ``Cache-Control: no-cache``.
* ``GET /manifest.webmanifest``: name, icons (drawn by ``deploy/make_icons.py``), standalone.
* ``GET /api/v1/projects/<id>/bundle``: everything the tablet needs to record piles of one
  project with no network (members only): the schedule with design values, the rules, the
  capacity curves (one per ground model, diameter, top level and pile type, shared by every
  pile that has them), each pile's required toe level for its design load, its current version
  and verdict (``fieldapp.rig_view.build_bundle``). Strong ETag over the bytes; ``If-None-Match`` answers 304.
* ``GET /site-ca``: how to install the site certificate authority on a tablet, with a download
  link (``/site-ca/toeline-site-ca.crt``) and a QR code of it (SVG, no script).
"""

from __future__ import annotations

import gzip
import hashlib
import io
import json
from pathlib import Path

import qrcode
import qrcode.image.svg
from flask import Blueprint, Response, abort, current_app, render_template, request, url_for
from markupsafe import Markup

from fieldapp import bundle_store, db, https
from fieldapp.auth import login_required, project_or_404

bp = Blueprint("offline", __name__)

SW_FILE = "sw.js"
CA_DOWNLOAD_NAME = "toeline-site-ca.crt"
THEME = "#0b3d2e"


# --------------------------------------------------------------------------------------------
# Service worker and manifest
# --------------------------------------------------------------------------------------------

def _static_dir() -> Path:
    return Path(current_app.static_folder)


def static_files() -> list[str]:
    """Every file under static/ except the worker itself, as URL paths, sorted."""
    root = _static_dir()
    out = []
    for path in sorted(root.rglob("*")):
        if path.is_file() and path.name != SW_FILE and not path.name.startswith("."):
            out.append("/static/" + path.relative_to(root).as_posix())
    return out


def shell_version() -> str:
    """A short hash of every static file's path and bytes (the worker's cache version)."""
    root = _static_dir()
    digest = hashlib.sha256()
    for url in [f"/static/{SW_FILE}"] + static_files():
        rel = url[len("/static/"):]
        digest.update(rel.encode())
        digest.update(b"\0")
        digest.update((root / rel).read_bytes())
    return digest.hexdigest()[:16]


@bp.get("/sw.js")
def service_worker():
    """The service worker script, at the root so its scope is the whole app."""
    source = (_static_dir() / SW_FILE).read_text(encoding="utf-8")
    files = ", ".join(json.dumps(u) for u in static_files())
    body = (source.replace("/*VERSION*/", shell_version())
                  .replace("/*STATIC_FILES*/", files))
    response = Response(body, mimetype="text/javascript")
    response.headers["Service-Worker-Allowed"] = "/"
    response.headers["Cache-Control"] = "no-cache"
    return response


@bp.get("/manifest.webmanifest")
def manifest():
    """The web app manifest: installable, standalone, our own icons."""
    data = {
        "id": "/",
        "name": "Toeline",
        "short_name": "Toeline",
        "description": "Record piles as built at the rig, with the design checks on the spot.",
        "start_url": "/",
        "scope": "/",
        "display": "standalone",
        "orientation": "any",
        "background_color": "#ffffff",
        "theme_color": THEME,
        "icons": [
            {"src": url_for("static", filename="icons/icon-192.png"), "sizes": "192x192",
             "type": "image/png", "purpose": "any"},
            {"src": url_for("static", filename="icons/icon-512.png"), "sizes": "512x512",
             "type": "image/png", "purpose": "any"},
            {"src": url_for("static", filename="icons/icon-maskable-512.png"), "sizes": "512x512",
             "type": "image/png", "purpose": "maskable"},
        ],
    }
    response = Response(json.dumps(data, indent=1), mimetype="application/manifest+json")
    response.headers["Cache-Control"] = "no-cache"
    return response


# --------------------------------------------------------------------------------------------
# The project bundle (built by fieldapp.rig_view.build_bundle)
# --------------------------------------------------------------------------------------------

def _etag_matches(header: str | None, etags: tuple[str, ...]) -> bool:
    if not header:
        return False
    if header.strip() == "*":
        return True
    for part in header.split(","):
        part = part.strip()
        if part.startswith("W/"):
            part = part[2:]
        if part in etags:
            return True
    return False


@bp.get("/api/v1/projects/<int:project_id>/bundle")
@login_required
def bundle(project_id: int):
    """The project's offline bundle (members only) with a strong ETag; 304 when unchanged.

    Kept on disk per audit head (``fieldapp.bundle_store``), so an unchanged bundle is read,
    not built. ``?since=<head>`` (the ``head`` of the bundle the tablet holds) answers only what
    changed since (``"delta": true``), or the whole bundle when that head is no longer kept.
    Sent gzip-compressed when the client accepts it; the compressed form has its own ETag
    (``"<hash>-gz"``), as a strong validator must differ between content codings.
    """
    project = project_or_404(project_id)
    conn = db.get_db()
    data_dir = current_app.config["DATA_DIR"]
    gz = request.accept_encodings["gzip"] > 0
    since = request.args.get("since", "")
    if since:
        delta = bundle_store.delta(conn, project, data_dir, since)
        if delta is not None:
            headers = {"Cache-Control": "private, no-cache", "Vary": "Cookie, Accept-Encoding"}
            if gz:
                headers["Content-Encoding"] = "gzip"
                return Response(delta, mimetype="application/json", headers=headers)
            return Response(gzip.decompress(delta), mimetype="application/json", headers=headers)
    stored = bundle_store.current(conn, project, data_dir)
    digest = stored.digest
    etag = f'"{digest}-gz"' if gz else f'"{digest}"'
    headers = {"ETag": etag, "Cache-Control": "private, no-cache", "Vary": "Cookie, Accept-Encoding"}
    if _etag_matches(request.headers.get("If-None-Match"), (f'"{digest}"', f'"{digest}-gz"')):
        return Response(status=304, headers=headers)
    if gz:
        headers["Content-Encoding"] = "gzip"
        return Response(stored.gz, mimetype="application/json", headers=headers)
    return Response(stored.body(), mimetype="application/json", headers=headers)


# --------------------------------------------------------------------------------------------
# The site certificate authority page
# --------------------------------------------------------------------------------------------

def _qr_svg(text: str) -> Markup:
    """A QR code of ``text`` as inline SVG markup (no script)."""
    img = qrcode.make(text, image_factory=qrcode.image.svg.SvgPathImage, box_size=10, border=2)
    buf = io.BytesIO()
    img.save(buf)
    svg = buf.getvalue().decode("utf-8")
    if svg.startswith("<?xml"):
        svg = svg[svg.index("?>") + 2:]
    return Markup(svg.strip())


def _download_urls(port: str) -> list[str]:
    """Download addresses a tablet can reach: the page's own host unless it is loopback,
    else every non-loopback name and address in the server certificate."""
    scheme = request.scheme
    host = request.host.rsplit(":", 1)[0] if not request.host.endswith("]") else request.host
    path = url_for("offline.site_ca_file")
    loopback = {"localhost", "127.0.0.1", "[::1]", "::1"}
    if host not in loopback:
        return [f"{scheme}://{request.host}{path}"]
    cert = https.load_server_cert(current_app.config["DATA_DIR"])
    if cert is None:
        return [f"{scheme}://{request.host}{path}"]
    dns, ips = https._sans(cert)
    urls = []
    for name in sorted(ips) + sorted(dns):
        if name in loopback:
            continue
        shown = f"[{name}]" if ":" in name else name
        urls.append(f"{scheme}://{shown}{':' + port if port else ''}{path}")
    return urls or [f"{scheme}://{request.host}{path}"]


@bp.get("/site-ca")
def site_ca():
    """How to install the site certificate authority on a tablet (open to anyone on the network)."""
    cert = https.load_ca_cert(current_app.config["DATA_DIR"])
    info = None
    if cert is not None:
        port = request.host.rsplit(":", 1)[1] if ":" in request.host.rsplit("]", 1)[-1] else ""
        urls = _download_urls(port)
        info = {
            "subject": cert.subject.rfc4514_string(),
            "fingerprint": https.fingerprint_sha256(cert),
            "not_after": cert.not_valid_after_utc.date().isoformat(),
            "codes": [(u, _qr_svg(u)) for u in urls[:4]],
        }
    return render_template("site_ca.html", info=info, secure=request.is_secure)


@bp.get("/site-ca/" + CA_DOWNLOAD_NAME)
def site_ca_file():
    """The site authority's certificate (PEM) for tablets to install; 404 before --https."""
    path = https.SiteCertificates.in_folder(current_app.config["DATA_DIR"]).ca_cert
    if not path.exists():
        abort(404)
    response = Response(path.read_bytes(), mimetype="application/x-x509-ca-cert")
    response.headers["Content-Disposition"] = f'attachment; filename="{CA_DOWNLOAD_NAME}"'
    response.headers["Cache-Control"] = "no-cache"
    return response
