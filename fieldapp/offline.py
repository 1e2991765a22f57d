"""Offline: the service worker, the web app manifest, the project bundle and the site CA page.

PRODUCT.md section 9. Routes (blueprint ``offline``):

* ``GET /sw.js``: ``static/sw.js`` with its cache version (a hash of every static file, so any
  change to the app shell makes a new worker) and the list of static files filled in; served
  with ``Service-Worker-Allowed: /`` and ``Cache-Control: no-cache``.
* ``GET /manifest.webmanifest``: name, icons (drawn by ``deploy/make_icons.py``), standalone.
* ``GET /api/v1/projects/<id>/bundle``: everything the tablet needs to record piles of one
  project with no network (members only): the schedule with design values, the rules, the
  capacity curves (one per ground model, diameter, top level and pile type, shared by every
  pile that has them), each pile's required toe level for its design load, its current version
  and verdict. Strong ETag over the bytes; ``If-None-Match`` answers 304.
* ``GET /site-ca``: how to install the site certificate authority on a tablet, with a download
  link (``/site-ca/toeline-site-ca.crt``) and a QR code of it (SVG, no script).
"""

from __future__ import annotations

import gzip
import hashlib
import io
import json
from pathlib import Path

from flask import Blueprint, Response, abort, current_app, render_template, request, url_for
from markupsafe import Markup

from fieldapp import db
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
# The project bundle
# --------------------------------------------------------------------------------------------

def build_bundle(conn, project) -> dict:
    """Everything the tablet needs to record this project's piles offline (JSON-ready).

    ``piles`` maps each mark to what ``services.rig_data`` gives the At the rig page for that
    pile (design values, newest record and its result, version, verdict, load, required toe
    level), except that what many piles share is stored once: ``curve`` is a key of
    ``curves`` (one capacity curve per ground model, diameter, top level and pile type, made
    by ``services.pile_curve``), ``ground`` a key of ``ground_models`` (ground_top,
    ground_bottom, layers) and ``limits`` sits at the top. ``rig_data_from_bundle`` (and the
    tablet's ``ToelineOutbox.rigData``) put one pile's rig data back together.
    """
    from design_core.axial import required_toe_level
    from fieldapp import services
    from fieldapp.queries import ground as ground_q
    from fieldapp.queries import piles as piles_q
    from fieldapp.queries import projects as projects_q
    from fieldapp.queries import records as records_q

    rule_set = projects_q.current_rules(conn, project.id)
    rules = rule_set.rules
    current = records_q.current_for_project(conn, project.id)
    grounds: dict[str, dict] = {}
    curves: dict[str, dict] = {}
    curve_keys: dict[tuple, tuple[str | None, object, str]] = {}
    piles_out: dict[str, dict] = {}
    for row in piles_q.list_piles(conn, project.id, sort="mark"):
        gkey = str(row.ground_model_id)
        if gkey not in grounds:
            ground = ground_q.load_ground_model(conn, row.ground_model_id)
            grounds[gkey] = {
                "name": row.ground_model_name, "ground_top": ground.top, "ground_bottom": ground.bottom,
                "layers": [{"index": i, "material": layer.material, "top": layer.top, "bottom": layer.bottom}
                           for i, layer in enumerate(ground.layers)],
            }
        key = (row.ground_model_id, row.diameter_mm, row.cutoff_level_m, row.pile_type)
        if key not in curve_keys:
            curve, error = None, ""
            try:
                curve = services.pile_curve(conn, row, rules)
            except ValueError as exc:
                error = str(exc)
            ckey = None
            if curve is not None:
                ckey = f"c{len(curves) + 1}"
                curves[ckey] = {"toe_levels": [round(float(z), 4) for z in curve.toe_levels],
                                "design": [round(float(d), 2) for d in curve.design]}
            curve_keys[key] = (ckey, curve, error)
        ckey, curve, error = curve_keys[key]
        design = piles_q.pile_design(row)
        required = None
        if curve is not None and design.compression > 0:
            required = required_toe_level(curve, design.compression)
        version = current.get(row.id)
        piles_out[row.mark] = {
            "mark": row.mark,
            "project_id": project.id,
            "version": version.version if version else 0,
            "progress": row.progress,
            "verdict": row.verdict,
            "design": services.design_dict(design),
            "record": version.record if version else {},
            "result": version.answer() if version else None,
            "load_kn": design.compression,
            "curve": ckey,
            "curve_error": error,
            "required_toe_level": required,
            "rules_version": rule_set.version,
            "ground": gkey,
            "ground_model": row.ground_model_name,
            "worst_utilisation": row.worst_utilisation,
        }
    return {
        "format": 1,
        "project": {"id": project.id, "name": project.name, "site": project.site,
                    "datum": project.datum, "engineer": project.engineer},
        "rules_version": rule_set.version,
        "rules": rules.to_dict(),
        "limits": services.limits_dict(rules),
        "ground_models": grounds,
        "curves": curves,
        "piles": piles_out,
    }


RIG_KEYS = ("mark", "project_id", "version", "progress", "verdict", "design", "record", "result",
            "load_kn", "curve", "curve_error", "required_toe_level", "rules_version", "limits",
            "ground_top", "ground_bottom", "layers")


def rig_data_from_bundle(bundle: dict, mark: str) -> dict | None:
    """One pile's rig data (the shape of ``services.rig_data``) put back together from a bundle.

    The same assembly as ``rigData`` in static/outbox.js; None when the mark is not in it.
    """
    pile = bundle["piles"].get(mark)
    if pile is None:
        return None
    ground = bundle["ground_models"][pile["ground"]]
    out = {k: pile[k] for k in RIG_KEYS if k in pile}
    out["curve"] = bundle["curves"][pile["curve"]] if pile["curve"] else None
    out["limits"] = bundle["limits"]
    out.update(ground_top=ground["ground_top"], ground_bottom=ground["ground_bottom"],
               layers=ground["layers"])
    return out


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

    Sent gzip-compressed when the client accepts it (a 5,000-pile bundle is about 3.5 MB of
    JSON and 0.2 MB compressed); the compressed form has its own ETag (``"<hash>-gz"``), as a
    strong validator must differ between content codings.
    """
    project = project_or_404(project_id)
    data = build_bundle(db.get_db(), project)
    body = json.dumps(data, separators=(",", ":"), sort_keys=True, allow_nan=False).encode()
    digest = hashlib.sha256(body).hexdigest()[:32]
    gz = request.accept_encodings["gzip"] > 0
    etag = f'"{digest}-gz"' if gz else f'"{digest}"'
    headers = {"ETag": etag, "Cache-Control": "private, no-cache", "Vary": "Cookie, Accept-Encoding"}
    if _etag_matches(request.headers.get("If-None-Match"), (f'"{digest}"', f'"{digest}-gz"')):
        return Response(status=304, headers=headers)
    if gz:
        headers["Content-Encoding"] = "gzip"
        body = gzip.compress(body, compresslevel=5, mtime=0)
    return Response(body, mimetype="application/json", headers=headers)


# --------------------------------------------------------------------------------------------
# The site certificate authority page
# --------------------------------------------------------------------------------------------

def _qr_svg(text: str) -> Markup:
    """A QR code of ``text`` as inline SVG markup (no script)."""
    import qrcode
    import qrcode.image.svg

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
    from fieldapp import https

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
    from fieldapp import https

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
    from fieldapp import https

    path = https.SiteCertificates.in_folder(current_app.config["DATA_DIR"]).ca_cert
    if not path.exists():
        abort(404)
    response = Response(path.read_bytes(), mimetype="application/x-x509-ca-cert")
    response.headers["Content-Disposition"] = f'attachment; filename="{CA_DOWNLOAD_NAME}"'
    response.headers["Cache-Control"] = "no-cache"
    return response
