"""A pile surveyed out of position changes its cap-mates' shares: they are rechecked too."""

from __future__ import annotations

import pytest

from fieldapp import db
from fieldapp.queries import piles, records
from tests.test_record_api import full_record, make_site, put


@pytest.fixture
def site(app, people):
    """The record API tests' small site: cap A with piles A1 and A2 on one ground model."""
    facts = make_site(app, people["own"])
    facts.update(people)
    return facts


def _state(app, project_id, mark):
    with app.app_context():
        conn = db.get_db()
        pile = piles.get_pile(conn, project_id, mark)
        return pile.current_version, pile.verdict, records.current(conn, pile.id)


def test_a_small_move_that_changes_no_status_makes_no_new_version(app, client, auth, site):
    auth.login(site["inspector"])
    body = put(client, auth, site["own"], "A2", full_record(site, "A2")).get_json()
    assert body["verdict"] == "meets design"
    version_before, _, _ = _state(app, site["own"], "A2")
    # A1 20 mm off: within the 75 mm tolerance and A2's share moves by a few kN only
    put(client, auth, site["own"], "A1", full_record(site, "A1", easting=500.02))
    version_after, verdict_after, _ = _state(app, site["own"], "A2")
    assert version_after == version_before and verdict_after == "meets design"


def test_cap_mate_whose_status_changes_gets_a_new_version_naming_the_mover(app, client, auth, site):
    auth.login(site["inspector"])
    put(client, auth, site["own"], "A2", full_record(site, "A2"))
    v0, verdict0, _ = _state(app, site["own"], "A2")
    # a large survey error on A1 puts A2 well off the centroid: A2's share rises past its
    # resistance (hand check with the rigid-cap rule N/n + M x / sum x^2, the cap load acting at the design
    # centroid)
    put(client, auth, site["own"], "A1", full_record(site, "A1", easting=502.0))
    v1, verdict1, current = _state(app, site["own"], "A2")
    share = next(c for c in current.checks if c["code"] == "group_share")
    assert share["ok"] is False and verdict1 == "needs engineer" and verdict0 == "meets design"
    assert v1 == v0 + 1
    assert any("position of A1" in note for note in current.notes)
