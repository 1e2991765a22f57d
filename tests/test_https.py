"""HTTPS for tablets on the site network (issue 7): the site certificate authority, the server
certificate, serving over TLS, and a service worker registering from a made-up host name.

The browser test maps ``tablet.test`` onto loopback in Chromium (``--host-resolver-rules``) and
trusts the site authority by its public-key hash (``--ignore-certificate-errors-spki-list``).
"""

from __future__ import annotations

import datetime as dt
import os
import shutil
import socket
import ssl
import stat
import threading
import urllib.request

import pytest
from cryptography import x509
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import ExtendedKeyUsageOID

from fieldapp import create_app, https


def _verify(issuer: x509.Certificate, cert: x509.Certificate) -> None:
    """Raise unless ``cert`` carries a valid signature by ``issuer``'s key."""
    issuer.public_key().verify(cert.signature, cert.tbs_certificate_bytes,
                               ec.ECDSA(cert.signature_hash_algorithm))


@pytest.fixture
def certs(tmp_path):
    paths = https.ensure_certificates(tmp_path, ["tablet.test", "192.168.1.20"], detect=False)
    return tmp_path, paths


def test_site_authority_is_a_ca_that_signs_itself(certs):
    data, paths = certs
    ca = https.load_ca_cert(data)
    basic = ca.extensions.get_extension_for_class(x509.BasicConstraints)
    assert basic.critical and basic.value.ca is True
    usage = ca.extensions.get_extension_for_class(x509.KeyUsage).value
    assert usage.key_cert_sign and usage.crl_sign
    assert ca.subject == ca.issuer
    _verify(ca, ca)
    assert ca.not_valid_after_utc - ca.not_valid_before_utc > dt.timedelta(days=3000)


def test_server_certificate_is_signed_by_the_ca_for_every_name(certs):
    data, paths = certs
    ca = https.load_ca_cert(data)
    server = https.load_server_cert(data)
    assert server.issuer == ca.subject
    _verify(ca, server)
    sans = server.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    assert {"localhost", "tablet.test"} <= set(sans.get_values_for_type(x509.DNSName))
    assert {"127.0.0.1", "192.168.1.20"} <= {str(a) for a in sans.get_values_for_type(x509.IPAddress)}
    assert server.extensions.get_extension_for_class(x509.BasicConstraints).value.ca is False
    eku = server.extensions.get_extension_for_class(x509.ExtendedKeyUsage).value
    assert ExtendedKeyUsageOID.SERVER_AUTH in eku
    # Apple platforms refuse TLS server certificates valid for more than 825 days.
    assert server.not_valid_after_utc - server.not_valid_before_utc <= dt.timedelta(days=825)
    # The chain file sends the authority after the server certificate.
    chain = x509.load_pem_x509_certificates(paths.server_cert.read_bytes())
    assert [c.subject for c in chain] == [server.subject, ca.subject]


@pytest.mark.skipif(os.name != "posix", reason="file modes are POSIX")
def test_private_keys_are_readable_by_the_owner_only(certs):
    _, paths = certs
    for key in (paths.ca_key, paths.server_key):
        assert stat.S_IMODE(key.stat().st_mode) == 0o600


def test_certificates_are_kept_and_the_ca_survives_a_new_name(certs):
    data, paths = certs
    ca_before = https.load_ca_cert(data).serial_number
    server_before = https.load_server_cert(data).serial_number
    https.ensure_certificates(data, ["tablet.test", "192.168.1.20"], detect=False)
    assert https.load_server_cert(data).serial_number == server_before  # nothing changed: kept
    https.ensure_certificates(data, ["tablet.test", "192.168.1.20", "10.1.2.3"], detect=False)
    renewed = https.load_server_cert(data)
    assert renewed.serial_number != server_before  # a new address: a new server certificate
    assert https.load_ca_cert(data).serial_number == ca_before  # tablets keep trusting the CA
    sans = renewed.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    assert "10.1.2.3" in {str(a) for a in sans.get_values_for_type(x509.IPAddress)}


def test_spki_hash_is_base64_sha256():
    _, ca = https.make_ca("test")
    pin = https.spki_sha256_base64(ca)
    assert len(pin) == 44 and pin.endswith("=")


def test_cli_serve_offers_https(runner):
    from fieldapp.cli import main

    result = runner.invoke(main, ["serve", "--help"])
    assert result.exit_code == 0 and "--https" in result.output and "--name" in result.output


@pytest.fixture
def tls_server(tmp_path):
    """The app served over TLS by cheroot (as ``toeline serve --https``) on a free port."""
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data")})
    paths = https.ensure_certificates(app.config["DATA_DIR"], ["tablet.test"], detect=False)
    server = https.make_server(app, "127.0.0.1", 0, paths, threads=4)
    server.prepare()
    port = server.bind_addr[1]
    thread = threading.Thread(target=server.serve, daemon=True)
    thread.start()
    yield {"app": app, "port": port, "paths": paths}
    server.stop()
    thread.join(timeout=5)


def test_tls_server_answers_with_a_chain_the_ca_verifies(tls_server):
    context = ssl.create_default_context(cafile=str(tls_server["paths"].ca_cert))
    with socket.create_connection(("127.0.0.1", tls_server["port"]), timeout=10) as sock:
        with context.wrap_socket(sock, server_hostname="tablet.test") as tls:
            assert tls.version() in ("TLSv1.2", "TLSv1.3")
    opener = urllib.request.build_opener(urllib.request.HTTPSHandler(context=context))
    # urllib checks the name "localhost" against the certificate as well.
    with opener.open(f"https://localhost:{tls_server['port']}/healthz", timeout=10) as response:
        assert response.status == 200
    untrusting = ssl.create_default_context()
    with socket.create_connection(("127.0.0.1", tls_server["port"]), timeout=10) as sock:
        with pytest.raises(ssl.SSLCertVerificationError):
            untrusting.wrap_socket(sock, server_hostname="tablet.test")


def test_site_ca_page_offers_the_authority_with_a_qr_code(tls_server):
    app = tls_server["app"]
    client = app.test_client()
    page = client.get("/site-ca", base_url="https://tablet.test:8443")
    html = page.get_data(as_text=True)
    assert page.status_code == 200
    ca = https.load_ca_cert(app.config["DATA_DIR"])
    assert https.fingerprint_sha256(ca) in html
    assert "https://tablet.test:8443/site-ca/toeline-site-ca.crt" in html
    assert "<svg" in html and "<script>" not in html
    download = client.get("/site-ca/toeline-site-ca.crt")
    assert download.status_code == 200
    assert x509.load_pem_x509_certificate(download.data) == ca


def test_site_ca_page_before_https_says_how(client):
    page = client.get("/site-ca").get_data(as_text=True)
    assert "toeline serve --https" in page
    assert client.get("/site-ca/toeline-site-ca.crt").status_code == 404


CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]


@pytest.mark.browser
def test_service_worker_registers_over_https_from_a_site_name(tls_server, tmp_path, browser_type):
    if not os.path.exists(CHROMIUM):
        if os.environ.get("CI"):
            pytest.fail("chromium is required in CI (.ci/run installs it)")
        pytest.skip("chromium is not installed")
    pin = https.spki_sha256_base64(https.load_ca_cert(tls_server["app"].config["DATA_DIR"]))
    args = CHROMIUM_ARGS + ["--host-resolver-rules=MAP tablet.test 127.0.0.1",
                            f"--ignore-certificate-errors-spki-list={pin}"]
    origin = f"https://tablet.test:{tls_server['port']}"
    context = browser_type.launch_persistent_context(str(tmp_path / "profile"), executable_path=CHROMIUM,
                                                   args=args, headless=True)
    try:
        page = context.new_page()
        page.goto(origin + "/login")
        assert page.evaluate("window.isSecureContext") is True
        state = page.evaluate("""async () => {
            const reg = await navigator.serviceWorker.ready;
            const sw = reg.active;
            if (sw.state !== 'activated') {
                await new Promise((r) => sw.addEventListener('statechange', () => {
                    if (sw.state === 'activated') r(); }));
            }
            return {state: sw.state, scope: reg.scope, url: sw.scriptURL};
        }""")
        assert state == {"state": "activated", "scope": origin + "/", "url": origin + "/sw.js"}
        page.reload()
        assert page.evaluate("navigator.serviceWorker.controller !== null") is True
    finally:
        context.close()


@pytest.mark.browser
def test_without_trusting_the_authority_the_browser_refuses_the_site(tls_server, tmp_path, browser_type):
    """The other half of the test above: the trust in the site CA is what makes it work."""
    if not os.path.exists(CHROMIUM):
        if os.environ.get("CI"):
            pytest.fail("chromium is required in CI (.ci/run installs it)")
        pytest.skip("chromium is not installed")
    from playwright.sync_api import Error as PlaywrightError

    args = CHROMIUM_ARGS + ["--host-resolver-rules=MAP tablet.test 127.0.0.1"]
    context = browser_type.launch_persistent_context(str(tmp_path / "profile"), executable_path=CHROMIUM,
                                                     args=args, headless=True)
    try:
        page = context.new_page()
        with pytest.raises(PlaywrightError, match="ERR_CERT"):
            page.goto(f"https://tablet.test:{tls_server['port']}/login")
    finally:
        context.close()


@pytest.mark.browser
def test_plain_http_from_a_site_name_gets_no_worker_and_the_page_says_so(tmp_path, browser_type):
    """Why --https exists: over plain HTTP from a site address the browser gives no service
    worker (not a secure context), and the page tells the inspector what to do."""
    if not os.path.exists(CHROMIUM):
        if os.environ.get("CI"):
            pytest.fail("chromium is required in CI (.ci/run installs it)")
        pytest.skip("chromium is not installed")
    from werkzeug.serving import make_server

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data")})
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    args = CHROMIUM_ARGS + ["--host-resolver-rules=MAP tablet.test 127.0.0.1"]
    context = browser_type.launch_persistent_context(str(tmp_path / "profile"), executable_path=CHROMIUM,
                                                     args=args, headless=True)
    try:
        page = context.new_page()
        page.goto(f"http://tablet.test:{server.server_port}/login")
        assert page.evaluate("window.isSecureContext") is False
        assert page.evaluate("'serviceWorker' in navigator") is False
        notice = page.locator("#outbox-insecure")
        notice.wait_for()
        assert "https://" in notice.inner_text()
        assert notice.locator("a").get_attribute("href") == "/site-ca"
    finally:
        context.close()
        server.shutdown()
        thread.join(timeout=5)
