"""Review and sign-off (issue 6): the role matrix for sign-off, the password, reasons, the lock
on signed records and amendments, the queue order, batch sign-off, and the drawings.

The little site here is invented test data (a cap of three piles and one single pile on clay
over sand); the engineering numbers come from design_core through the app's own save path.
"""

from __future__ import annotations

import hashlib
import json
import math
import re
import uuid

import pytest

from fieldapp import capacity_figures, db, drawings, plan_figures, saving
from fieldapp.queries import audit, users
from fieldapp.queries import caps as caps_q
from fieldapp.queries import piles as piles_q
from fieldapp.queries import review as review_q
from tests.conftest import PASSWORD
from tests.factories import make_ground, make_pile

GROUND = [
    dict(top_level_m=100.0, bottom_level_m=98.5, material="ignore", unit_weight_kn_m3=18.0),
    dict(top_level_m=98.5, bottom_level_m=90.0, material="cohesive", unit_weight_kn_m3=19.5,
         cu_kpa=50.0, cu_bottom_kpa=120.0),
    dict(top_level_m=90.0, bottom_level_m=70.0, material="cohesionless", unit_weight_kn_m3=20.0, phi_deg=36.0),
]


def _pile_changes(e, n, comp):
    """The design values of this file's piles (the schedule's defaults elsewhere: no shear)."""
    return dict(easting_m=e, northing_m=n, cutoff_level_m=99.0, toe_level_m=78.0, diameter_mm=750.0,
                compression_kn=comp, shear_kn=0.0, n_bars=10, bar_mm=20.0, cage_length_m=12.0)


def good_record(pile, **changes):
    """A complete record of a pile built as designed (toe 78.00 m)."""
    rec = dict(platform_level=100.0, measured_depth=22.0, diameter_mm=750, cutoff_level=99.0,
               easting=pile.easting_m + 0.02, northing=pile.northing_m, inclination=0.005,
               base_check="sounding", debris_mm=20, cage_length=12.0, cover_mm=75, exposure_class="XC2",
               concrete_mpa=40, concrete_volume_m3=round(math.pi / 4 * 0.75 ** 2 * 21 * 1.1, 2),
               deliveries=[{"docket": "D1", "volume_m3": 6, "batched_at": "2026-03-02T09:00",
                            "discharged_at": "2026-03-02T09:40"}], progress="logged")
    rec.update(changes)
    return rec


def save(app, project_id, mark, record, email="inspector@test.example"):
    with app.app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, project_id, mark)
        user = users.by_email(conn, email)
        return saving.save_record(conn, project_id, pile, user, uuid.uuid4().hex, pile.current_version,
                                    record).version


@pytest.fixture
def site(app, people):
    """Cap C1 (P1 meets design, P2 too short, P3 not recorded) and single pile S1 (meets)."""
    return build_site(app, people)


def build_site(app, people):
    """The little site of ``site`` (also used by the record tests)."""
    pid = people["own"]
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = make_ground(conn, pid, GROUND, "Clay over sand", 97.5)
            cap = caps_q.save_cap(conn, pid, "C1", {"n_kn": 4500, "mx_knm": 200, "my_knm": 150})
            for mark, (e, n) in zip(["P1", "P2", "P3"], [(0, 0), (2.4, 0), (1.2, 2.0)], strict=True):
                make_pile(conn, pid, mark, gm, cap, **_pile_changes(e, n, 1500))
            make_pile(conn, pid, "S1", gm, None, **_pile_changes(10.0, 0.0, 1200))
        piles = {m: piles_q.get_pile(conn, pid, m) for m in ("P1", "P2", "P3", "S1")}
    assert save(app, pid, "P1", good_record(piles["P1"])).verdict == "meets design"
    short = save(app, pid, "P2", good_record(piles["P2"], measured_depth=13.0))
    assert short.verdict == "needs engineer"
    assert any(c["code"] == "axial_compression" and c["ok"] is False for c in short.checks)
    assert save(app, pid, "S1", good_record(piles["S1"])).verdict == "meets design"
    return {"pid": pid, "piles": piles}


def _sign(client, auth, pid, mark, disposition="accepted", reasons="", password=PASSWORD, **extra):
    return client.post(f"/api/v1/projects/{pid}/piles/{mark}/signoff",
                       json={"disposition": disposition, "reasons": reasons, "password": password, **extra},
                       headers={"X-CSRFToken": auth.token()})


def _signoff(app, pid, mark):
    with app.app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, pid, mark)
        return review_q.signoff_for(conn, pile.id, pile.current_version), review_q.is_locked(conn, pile.id)


def _actions(app, pid):
    with app.app_context():
        return [e["action"] for e in audit.entries(db.get_db(), pid)]


# --- the role matrix ---------------------------------------------------------------------------------

@pytest.mark.parametrize("role, status", [("engineer", 200), ("admin", 200), ("inspector", 403),
                                          ("viewer", 403), ("outsider", 404)])
def test_signoff_role_matrix(app, client, auth, people, site, role, status):
    auth.login(people[role])
    response = _sign(client, auth, site["pid"], "P1")
    assert response.status_code == status, response.get_json()
    signed, locked = _signoff(app, site["pid"], "P1")
    if status == 200:
        body = response.get_json()
        assert body["signed"] is True
        assert re.fullmatch(r"[0-9a-f]{64}", body["record_hash"])
        assert signed is not None and signed.record_hash == body["record_hash"] and locked
        assert "sign-off" in _actions(app, site["pid"])
    else:
        assert signed is None and not locked
        assert "sign-off" not in _actions(app, site["pid"])


def test_not_signed_in_gets_401(client, auth, site):
    response = client.post(f"/api/v1/projects/{site['pid']}/piles/P1/signoff",
                           json={"disposition": "accepted", "reasons": "", "password": PASSWORD},
                           headers={"X-CSRFToken": auth.token()})
    assert response.status_code == 401
    assert response.get_json() == {"error": "login required"}


def test_wrong_password_is_403_and_nothing_signed(app, client, auth, people, site):
    auth.login(people["engineer"])
    response = _sign(client, auth, site["pid"], "P1", password="not my password")
    assert response.status_code == 403
    assert response.get_json()["signed"] is False
    signed, locked = _signoff(app, site["pid"], "P1")
    assert signed is None and not locked
    assert "sign-off" not in _actions(app, site["pid"])
    assert "sign-off refused" in _actions(app, site["pid"])


def test_repeated_wrong_passwords_are_slowed_down(app, client, auth, people, site):
    auth.login(people["engineer"])
    for _ in range(app.config["LOGIN_MAX_FAILURES"]):
        assert _sign(client, auth, site["pid"], "P1", password="guess").status_code == 403
    blocked = _sign(client, auth, site["pid"], "P1")          # even the right password now waits
    assert blocked.status_code == 429 and blocked.get_json()["signed"] is False
    assert _signoff(app, site["pid"], "P1")[0] is None


def test_unknown_pile_is_404(client, auth, people, site):
    auth.login(people["engineer"])
    assert _sign(client, auth, site["pid"], "NOPE").status_code == 404


def test_pile_without_record_cannot_be_signed(client, auth, people, site):
    auth.login(people["engineer"])
    response = _sign(client, auth, site["pid"], "P3")
    assert response.status_code == 409
    assert response.get_json()["error"] == "no record"


# --- reasons and dispositions ---------------------------------------------------------------------------

def test_reasons_required_unless_accepted_as_meeting_design(app, client, auth, people, site):
    auth.login(people["engineer"])
    pid = site["pid"]
    refused = _sign(client, auth, pid, "P2", "accepted", "  ")
    assert refused.status_code == 422
    assert "reasons" in refused.get_json()["errors"]
    assert _signoff(app, pid, "P2")[0] is None
    # a pile that meets design needs reasons for any disposition other than accepted
    remedial = _sign(client, auth, pid, "S1", "remedial", "")
    assert remedial.status_code == 422 and "reasons" in remedial.get_json()["errors"]
    ok = _sign(client, auth, pid, "P2", "accepted with conditions",
               "Load test to 1.5 x working load before the cap is cast.")
    assert ok.status_code == 200
    signed, _ = _signoff(app, pid, "P2")
    assert signed.disposition == "accepted with conditions"
    assert signed.verdict == "needs engineer"


def test_unknown_disposition_is_422(client, auth, people, site):
    auth.login(people["engineer"])
    response = _sign(client, auth, site["pid"], "P1", "fine", "looks ok")
    assert response.status_code == 422
    assert "disposition" in response.get_json()["errors"]


def test_record_hash_is_sha256_of_what_was_signed(app, client, auth, people, site):
    auth.login(people["engineer"])
    body = _sign(client, auth, site["pid"], "P1").get_json()
    with app.app_context():
        conn = db.get_db()
        signoff, _ = _signoff(app, site["pid"], "P1")
        text = review_q.signed_json(conn, signoff.id)
    assert hashlib.sha256(text.encode("utf-8")).hexdigest() == body["record_hash"]
    signed = json.loads(text)
    assert signed["record"]["measured_depth"] == 22.0
    assert signed["verdict"] == "meets design"
    assert {c["code"] for c in signed["checks"]} >= {"axial_compression", "structural", "position"}
    assert signed["disposition"] == "accepted"
    assert signed["signer"]["email"] == people["engineer"]
    assert signed["rules_version"] == 1 and signed["version"] == 1


def test_second_signoff_of_the_same_version_is_refused(client, auth, people, site):
    auth.login(people["engineer"])
    assert _sign(client, auth, site["pid"], "P1").status_code == 200
    again = _sign(client, auth, site["pid"], "P1")
    assert again.status_code == 409
    assert again.get_json()["error"] == "locked"


def test_signing_a_version_other_than_the_one_reviewed_is_refused(client, auth, people, site):
    auth.login(people["engineer"])
    response = _sign(client, auth, site["pid"], "P1", version=7)
    assert response.status_code == 409
    assert response.get_json()["error"] == "conflict"


# --- lock and amendment -------------------------------------------------------------------------------------

def _put(client, auth, pid, mark, record, base_version, **extra):
    return client.put(f"/api/v1/projects/{pid}/piles/{mark}/record",
                      json={"client_id": uuid.uuid4().hex, "base_version": base_version, "record": record,
                            **extra},
                      headers={"X-CSRFToken": auth.token()})


def test_signed_record_is_locked_and_an_amendment_needs_its_own_signoff(app, client, auth, people, site):
    pid = site["pid"]
    auth.login(people["engineer"])
    first = _sign(client, auth, pid, "P1").get_json()["record_hash"]
    auth.logout()
    auth.login(people["inspector"])
    record = good_record(site["piles"]["P1"], notes="cage spacer found loose")
    locked = _put(client, auth, pid, "P1", record, 1)
    assert locked.status_code == 409
    assert locked.get_json()["error"] == "locked"
    no_reason = _put(client, auth, pid, "P1", record, 1, amendment={"reason": " "})
    assert no_reason.status_code == 409 and no_reason.get_json()["error"] == "locked"
    with app.app_context():
        assert piles_q.get_pile(db.get_db(), pid, "P1").current_version == 1  # nothing saved

    amended = _put(client, auth, pid, "P1", record, 1, amendment={"reason": "Spacer note added after pour"})
    assert amended.status_code == 200, amended.get_json()
    assert amended.get_json()["version"] == 2
    signed, locked_now = _signoff(app, pid, "P1")
    assert signed is None and not locked_now           # version 2 waits for its own sign-off
    with app.app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, pid, "P1")
        assert review_q.signoff_for(conn, pile.id, 1).record_hash == first   # version 1 stays signed
        (amendment,) = review_q.amendments_for_pile(conn, pile.id)
        assert (amendment.from_version, amendment.version) == (1, 2)
        assert amendment.reason == "Spacer note added after pour"
        assert amendment.by == "Inspector"
    assert "amendment" in _actions(app, pid)

    auth.logout()
    auth.login(people["engineer"])
    second = _sign(client, auth, pid, "P1")
    assert second.status_code == 200
    assert second.get_json()["version"] == 2 and second.get_json()["record_hash"] != first
    assert _signoff(app, pid, "P1")[1] is True


def test_remedial_record_links_back(app, client, auth, people, site):
    pid = site["pid"]
    auth.login(people["engineer"])
    assert _sign(client, auth, pid, "P2", "remedial", "Re-bore and extend the toe to 78.0 m").status_code == 200
    amended = _put(client, auth, pid, "P2", good_record(site["piles"]["P2"]), 1,
                   amendment={"reason": "Remedial: toe extended to 78.0 m"})
    assert amended.status_code == 200 and amended.get_json()["verdict"] == "meets design"
    assert _sign(client, auth, pid, "P2", "accepted", "").status_code == 200
    with app.app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, pid, "P2")
        first, second = review_q.signoffs_for_pile(conn, pile.id)
    assert first.disposition == "remedial" and second.remedial_of == first.id
    assert (second.remedial_of_mark, second.remedial_of_version) == ("P2", 1)


# --- the screen ---------------------------------------------------------------------------------------------

def test_queue_lists_needs_engineer_worst_first_with_pictures(app, client, auth, people, site):
    pid = site["pid"]
    worse = save(app, pid, "S1", good_record(site["piles"]["S1"], measured_depth=9.0))
    assert worse.verdict == "needs engineer"
    with app.app_context():
        utils = {m: piles_q.get_pile(db.get_db(), pid, m).worst_utilisation for m in ("P2", "S1")}
    auth.login(people["viewer"])
    html = client.get(f"/projects/{pid}/review").get_data(as_text=True)
    first, second = sorted(utils, key=lambda m: -utils[m])
    assert html.index(f'id="pile-{first}"') < html.index(f'id="pile-{second}"')
    assert 'id="pile-P1"' not in html                    # meets design: not in the needs list
    assert html.count("<svg") >= 6                         # three pictures per pile
    assert "Capacity against toe level" in html and "interaction" in html and "Cap C1 in plan" in html
    assert "axial_compression" in html
    assert "do not replace the engineer" in html           # the caution
    assert 'name="password"' not in html                   # a viewer gets no signing form


def test_pile_page_shows_history_and_the_form_to_engineers(app, client, auth, people, site):
    auth.login(people["engineer"])
    html = client.get(f"/projects/{site['pid']}/review/piles/P2").get_data(as_text=True)
    assert 'name="disposition"' in html and 'name="password"' in html
    assert "Required: this pile needs the engineer" in html
    assert "record saved" in html                          # who did what


def test_form_signoff_with_wrong_password_signs_nothing(app, client, auth, people, site):
    auth.login(people["engineer"])
    response = client.post(f"/projects/{site['pid']}/review/piles/P2/signoff",
                           data={"csrf_token": auth.token(), "disposition": "rejected",
                                 "reasons": "Toe far too high", "password": "wrong", "version": "1"})
    assert response.status_code == 403
    assert "nothing was signed" in response.get_data(as_text=True)
    assert _signoff(app, site["pid"], "P2")[0] is None
    ok = client.post(f"/projects/{site['pid']}/review/piles/P2/signoff",
                     data={"csrf_token": auth.token(), "disposition": "rejected",
                           "reasons": "Toe far too high", "password": PASSWORD, "version": "1"})
    assert ok.status_code == 302
    signed, locked = _signoff(app, site["pid"], "P2")
    assert signed.disposition == "rejected" and locked
    page = client.get(f"/projects/{site['pid']}/review/piles/P2").get_data(as_text=True)
    assert signed.record_hash in page and "Engineer" in page


def test_batch_signs_only_clear_piles(app, client, auth, people, site):
    pid = site["pid"]
    auth.login(people["engineer"])
    html = client.get(f"/projects/{pid}/review").get_data(as_text=True)
    assert 'value="P1:1"' in html and 'value="S1:1"' in html and 'value="P2:1"' not in html
    wrong = client.post(f"/projects/{pid}/review/batch",
                        data={"csrf_token": auth.token(), "password": "nope", "pile": ["P1:1", "S1:1"]})
    assert wrong.status_code == 302
    assert _signoff(app, pid, "P1")[0] is None and _signoff(app, pid, "S1")[0] is None
    done = client.post(f"/projects/{pid}/review/batch",
                       data={"csrf_token": auth.token(), "password": PASSWORD, "pile": ["P1:1", "S1:1", "P2:1"]})
    assert done.status_code == 302
    p1, s1, p2 = (_signoff(app, pid, m)[0] for m in ("P1", "S1", "P2"))
    assert p1.batch and s1.batch and p1.disposition == "accepted" and p2 is None
    assert _actions(app, pid).count("sign-off") == 2


def test_inspector_cannot_batch_sign(client, auth, people, site):
    auth.login(people["inspector"])
    response = client.post(f"/projects/{site['pid']}/review/batch",
                           data={"csrf_token": auth.token(), "password": PASSWORD, "pile": ["P1:1"]})
    assert response.status_code == 403


# --- drawings ---------------------------------------------------------------------------------------------

class _Curve:
    toe_levels = [95.0, 90.0, 85.0, 80.0]
    design = [100.0, 600.0, 1100.0, 1600.0]
    ultimate = [250.0, 1500.0, 2750.0, 4000.0]


def test_capacity_figure_draws_the_toes_at_their_levels():
    fig = capacity_figures.capacity_figure(_Curve(), 1000.0, 86.0, 88.0, 85.0)
    lines = [s for s in fig.items if isinstance(s, drawings.Line) and s.width >= 1.4 and s.y1 == s.y2
             and s.x2 - s.x1 > 100]   # lines across the plot, not the legend's
    ys = {s.stroke: s.y1 for s in lines}
    asbuilt, required = ys[drawings.SHORT], ys[drawings.WARN]
    assert asbuilt < required                      # 88.0 m is above 86.0 m: drawn higher (smaller y)
    text = " ".join(s.text for s in fig.items if isinstance(s, drawings.Text))
    assert "as-built toe 88.00 m (above required)" in text and "required toe 86.00 m" in text
    load = [s for s in fig.items if isinstance(s, drawings.Line) and s.x1 == s.x2 and s.dash == (6, 3)]
    assert len(load) == 1


def test_svg_escapes_user_text():
    fig = plan_figures.cap_plan_figure("C<1>", [plan_figures.PlanPile("P&<b>", (0, 0), (0.05, 0), 0.6, 900.0)])
    svg = drawings.to_svg(fig)
    assert "<b>" not in svg and "P&amp;&lt;b&gt;" in svg and "C&lt;1&gt;" in svg


def test_deviation_exaggeration_is_stated():
    piles = [plan_figures.PlanPile("A", (0, 0), (0.06, 0.0), 0.6), plan_figures.PlanPile("B", (3, 0), None, 0.6)]
    # spacing 3 m, deviation 60 mm: a third of the spacing is 1 m, i.e. x16.7 -> x10
    assert plan_figures.choose_exaggeration([0.06], 3.0) == 10
    fig = plan_figures.cap_plan_figure("C9", piles)
    assert "drawn x10 (exaggerated)" in drawings.to_svg(fig)

