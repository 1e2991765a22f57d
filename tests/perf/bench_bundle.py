"""Offline bundle benchmark (issue 7): GET /api/v1/projects/<id>/bundle for 5,000 piles.

The scene: a tablet opens a 5,000-pile invented project (``sitegen.build_site``) and fetches
everything it needs to record offline. Figures: ``bundle_5000_ms`` median time to build the
bundle (``fieldapp.rig_view.build_bundle``: schedule, rules, shared capacity curves, required
toes, versions); ``bundle_5000_kb`` and ``bundle_5000_gzip_kb`` its JSON size plain and as
sent gzip-compressed; ``bundle_vs_rig_data`` the time of 200 separate ``rig_view.rig_data``
calls (one curve each, as the rig page does) scaled to 5,000 piles, over the bundle's time:
what sharing one curve per ground model, diameter, cut-off and pile type saves.
"""

from __future__ import annotations

import gzip
import json
import statistics
import tempfile
import time

from tests.perf import sitegen

N_PILES = 5000
SAMPLE = 200


def run() -> dict:
    from fieldapp import create_app, db, rig_view
    from fieldapp.rig_view import build_bundle
    from fieldapp.queries import piles as piles_q
    from fieldapp.queries import projects

    with tempfile.TemporaryDirectory() as folder:
        sitegen.build_site(folder, N_PILES, 1)
        app = create_app({"TESTING": True, "DATA_DIR": folder})
        with app.app_context():
            conn = db.get_db()
            project = projects.all_projects(conn)[0]
            times = []
            for _ in range(5):
                t0 = time.perf_counter()
                bundle = build_bundle(conn, project)
                times.append(time.perf_counter() - t0)
            body = json.dumps(bundle, separators=(",", ":"), sort_keys=True).encode()
            packed = gzip.compress(body, compresslevel=5, mtime=0)
            rows = piles_q.list_piles(conn, project.id)[:SAMPLE]
            t0 = time.perf_counter()
            for row in rows:
                rig_view.rig_data(conn, project.id, row)
            per_pile = (time.perf_counter() - t0) / len(rows)
    bundle_s = statistics.median(times)
    return {
        "bundle_5000_ms": bundle_s * 1000.0,
        "bundle_5000_kb": len(body) / 1024.0,
        "bundle_5000_gzip_kb": len(packed) / 1024.0,
        "bundle_curves": float(len(bundle["curves"])),
        "bundle_vs_rig_data": per_pile * N_PILES / bundle_s,
    }


if __name__ == "__main__":  # pragma: no cover
    for name, value in run().items():
        print(f"{name:24s} {value:10.1f}")
