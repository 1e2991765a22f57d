"""Sign-in: only same-site paths are followed afterwards (issue 15, item 4), and a correct
password from an address the user signed in from before passes the per-address limit (item 14)."""

from __future__ import annotations

import re
from urllib.parse import quote

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from reliability_kit import LOGINS, make_app

from fieldapp.auth import safe_next

_META = re.compile(r'<meta name="csrf-token" content="([^"]+)"')

EVIL = [
    "/%09/evil.example/phish", "/%0A/evil.example", "/%0D%0A/evil.example", "//evil.example",
    "///evil.example", "/\\evil.example", "\\\\evil.example", "/%5Cevil.example", "/%5C%5Cevil.example",
    "https://evil.example/", "http:evil.example", "javascript:alert(1)", "evil.example",
    "/%2F/evil.example", "%2F%2Fevil.example", " /evil", "/\t/evil", "/%00/evil",
    "data:text/html,x", "/%2f%2fevil", "/\x7f/evil", "/%7F/evil",
]
GOOD = ["/", "/projects/1/piles", "/projects/1/review?state=short", "/projects/1/rig/P1"]


def _login(client, next_value: str, role: str = "engineer"):
    email, password = LOGINS[role]
    page = client.get("/login").get_data(as_text=True)
    token = _META.search(page).group(1)
    return client.post(f"/login?next={quote(next_value, safe='')}",
                       data={"email": email, "password": password, "csrf_token": token})


@pytest.fixture
def app(demo_data):
    return make_app(demo_data)


@pytest.mark.parametrize("target", EVIL)
def test_an_off_site_next_goes_to_the_start_page(app, target):
    answer = _login(app.test_client(), target)
    assert answer.status_code == 302, answer.get_data(as_text=True)[:200]
    assert answer.headers["Location"] == "/", f"{target!r} -> {answer.headers['Location']!r}"


@pytest.mark.parametrize("target", GOOD)
def test_a_same_site_path_is_followed(app, target):
    answer = _login(app.test_client(), target)
    assert answer.status_code == 302 and answer.headers["Location"] == target


def test_the_raw_encoded_forms_from_the_report(app):
    """The addresses exactly as reported (already percent-encoded in the query string)."""
    for raw in ("/%09/evil.example/phish", "/%0A/evil.example/phish", "//evil.example"):
        client = app.test_client()
        email, password = LOGINS["viewer"]
        token = _META.search(client.get("/login").get_data(as_text=True)).group(1)
        answer = client.post(f"/login?next={raw}", data={"email": email, "password": password,
                                                           "csrf_token": token})
        assert answer.status_code == 302 and answer.headers["Location"] == "/", raw


def test_a_path_with_letters_outside_ascii_is_followed_escaped(app):
    answer = _login(app.test_client(), "/projects/1/rig/Pé 2")
    assert answer.status_code == 302 and answer.headers["Location"] == "/projects/1/rig/P%C3%A9%202"


@settings(max_examples=300, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.text(max_size=40))
def test_whatever_is_followed_is_a_plain_same_site_path(target):
    followed = safe_next(target)
    if followed is not None:
        from urllib.parse import unquote

        for text in (followed, unquote(followed)):
            assert text.startswith("/") and not text.startswith("//")
            assert not any(ch < " " or ch in "\x7f\\" for ch in text)
        assert all(" " < ch < "\x7f" for ch in followed), "a Location header holds only plain ASCII"


def _try(client, email, password, ip):
    token = _META.search(client.get("/login", environ_base={"REMOTE_ADDR": ip}).get_data(as_text=True)).group(1)
    return client.post("/login", data={"email": email, "password": password, "csrf_token": token},
                       environ_base={"REMOTE_ADDR": ip})


def test_a_known_address_passes_the_per_address_limit_with_the_right_password(app):
    site, elsewhere = "10.1.2.3", "10.9.9.9"
    limit = app.config["LOGIN_MAX_FAILURES_PER_IP"]
    engineer, inspector = LOGINS["engineer"], LOGINS["inspector"]
    assert _try(app.test_client(), *engineer, site).status_code == 302  # signed in here before
    assert _try(app.test_client(), *inspector, elsewhere).status_code == 302  # never from the site
    attacker = app.test_client()
    for n in range(limit):
        assert _try(attacker, f"guess{n}@toeline.example", "wrong password", site).status_code == 401
    # The address is locked: a stranger's next try, and a user who never signed in from here.
    assert _try(attacker, "guess@toeline.example", "wrong password", site).status_code == 429
    assert _try(app.test_client(), *inspector, site).status_code == 429
    # The engineer who signed in from here before gets in with the right password ...
    assert _try(app.test_client(), *engineer, site).status_code == 302
    # ... but not with a wrong one, which still counts.
    answer = _try(app.test_client(), engineer[0], "wrong password", site)
    assert answer.status_code == 429
    # The per-email limit is kept for everyone, known address or not.
    for _ in range(app.config["LOGIN_MAX_FAILURES"]):
        _try(app.test_client(), engineer[0], "wrong password", site)
    assert _try(app.test_client(), *engineer, site).status_code == 429
