"""HTTPS on the site network: a site certificate authority and a server certificate.

A tablet that reaches the site laptop by plain HTTP (``http://192.168.1.20:8000``) is not in a
secure context, so its browser refuses the service worker and the app cannot work offline.
``toeline serve --https`` fixes that without any outside service:

1. On first use it makes a *site certificate authority* (an EC P-256 key and a self-signed CA
   certificate valid for 10 years) and keeps both in ``<data>/tls/`` (the key with mode 600).
   Each tablet installs the authority's certificate once (the page ``/site-ca`` shows how).
2. It makes a *server certificate* signed by that authority for the laptop's names and
   addresses (host name, ``<host>.local``, ``localhost``, every local IPv4 address found, and
   any ``--name`` given), valid for 397 days (under the 825-day limit Apple platforms apply to
   every TLS server certificate). It is made again, by the same authority, when it is near its
   end or when the laptop's names or addresses change (a new DHCP lease), so tablets never
   have to install anything twice.
3. It serves the app over TLS with cheroot (pure Python, runs on Windows, macOS and Linux; the
   server file holds the certificate followed by the authority so the whole chain is sent).

Everything here uses the ``cryptography`` package; nothing is fetched from outside.
"""

from __future__ import annotations

import base64
import datetime as dt
import hashlib
import ipaddress
import os
import socket
from dataclasses import dataclass
from pathlib import Path

from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID

CA_DAYS = 3650
SERVER_DAYS = 397
RENEW_BEFORE_DAYS = 30
TLS_DIR = "tls"
CA_CERT = "site-ca.crt"
CA_KEY = "site-ca.key"
SERVER_CERT = "server.pem"  # server certificate followed by the CA certificate (the chain)
SERVER_KEY = "server.key"


@dataclass(frozen=True)
class SiteCertificates:
    """Paths of the site authority and the server certificate in the data folder."""

    folder: Path
    ca_cert: Path
    ca_key: Path
    server_cert: Path
    server_key: Path

    @classmethod
    def in_folder(cls, data_dir: str | Path) -> "SiteCertificates":
        folder = Path(data_dir) / TLS_DIR
        return cls(folder, folder / CA_CERT, folder / CA_KEY, folder / SERVER_CERT, folder / SERVER_KEY)


def _now() -> dt.datetime:
    return dt.datetime.now(dt.timezone.utc)


def _write_private(path: Path, data: bytes) -> None:
    """Write a private key readable by the owner only (mode 600), replacing any old file."""
    tmp = path.with_suffix(path.suffix + ".tmp")
    if tmp.exists():
        tmp.unlink()
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
    with os.fdopen(fd, "wb") as fh:
        fh.write(data)
    os.replace(tmp, path)


def _write_public(path: Path, data: bytes) -> None:
    tmp = path.with_suffix(path.suffix + ".tmp")
    tmp.write_bytes(data)
    os.replace(tmp, path)


def _key_pem(key: ec.EllipticCurvePrivateKey) -> bytes:
    return key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                             serialization.NoEncryption())


def local_names() -> tuple[list[str], list[str]]:
    """(DNS names, IP addresses) by which tablets may reach this machine.

    Names: ``localhost``, the host name and ``<host>.local`` (mDNS). Addresses: loopback, every
    IPv4 address the host name resolves to, and the address of the interface that carries the
    default route (found by "connecting" a UDP socket, which sends no packet).
    """
    names = ["localhost"]
    host = socket.gethostname().strip().lower()
    if host and host != "localhost":
        names.append(host)
        short = host.split(".")[0]
        if short != host:
            names.append(short)
        names.append(f"{short}.local")
    addresses = ["127.0.0.1", "::1"]
    try:
        for info in socket.getaddrinfo(host, None, socket.AF_INET):
            addresses.append(info[4][0])
    except OSError:
        pass
    for probe in ("10.255.255.255", "192.168.255.255"):
        try:
            with socket.socket(socket.AF_INET, socket.SOCK_DGRAM) as s:
                s.connect((probe, 1))
                addresses.append(s.getsockname()[0])
        except OSError:
            pass
    return _unique(names), _unique(a for a in addresses if not a.startswith("0."))


def _unique(items) -> list[str]:
    seen: list[str] = []
    for item in items:
        if item and item not in seen:
            seen.append(item)
    return seen


def _split_names(names: list[str]) -> tuple[list[str], list[str]]:
    """Sort extra names given by the user into DNS names and IP addresses."""
    dns, ips = [], []
    for name in names:
        name = name.strip().lower()
        if not name:
            continue
        try:
            ips.append(str(ipaddress.ip_address(name)))
        except ValueError:
            dns.append(name)
    return dns, ips


def make_ca(common_name: str) -> tuple[ec.EllipticCurvePrivateKey, x509.Certificate]:
    """A new site certificate authority: key and self-signed CA certificate (10 years)."""
    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, common_name),
                      x509.NameAttribute(NameOID.ORGANIZATION_NAME, "Toeline site")])
    now = _now()
    public = key.public_key()
    cert = (
        x509.CertificateBuilder()
        .subject_name(name).issuer_name(name).public_key(public)
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=CA_DAYS))
        .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
        .add_extension(x509.KeyUsage(digital_signature=False, content_commitment=False,
                                     key_encipherment=False, data_encipherment=False,
                                     key_agreement=False, key_cert_sign=True, crl_sign=True,
                                     encipher_only=False, decipher_only=False), critical=True)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(public), critical=False)
        .sign(key, hashes.SHA256())
    )
    return key, cert


def make_server_cert(ca_key: ec.EllipticCurvePrivateKey, ca_cert: x509.Certificate,
                     dns_names: list[str], ip_addresses: list[str]
                     ) -> tuple[ec.EllipticCurvePrivateKey, x509.Certificate]:
    """A server key and certificate signed by the site authority, with the names as SANs."""
    if not dns_names and not ip_addresses:
        raise ValueError("a server certificate needs at least one name or address")
    key = ec.generate_private_key(ec.SECP256R1())
    common = dns_names[0] if dns_names else ip_addresses[0]
    sans: list[x509.GeneralName] = [x509.DNSName(n) for n in dns_names]
    sans += [x509.IPAddress(ipaddress.ip_address(a)) for a in ip_addresses]
    now = _now()
    cert = (
        x509.CertificateBuilder()
        .subject_name(x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, common[:64])]))
        .issuer_name(ca_cert.subject).public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=SERVER_DAYS))
        .add_extension(x509.SubjectAlternativeName(sans), critical=False)
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(x509.KeyUsage(digital_signature=True, content_commitment=False,
                                     key_encipherment=False, data_encipherment=False,
                                     key_agreement=False, key_cert_sign=False, crl_sign=False,
                                     encipher_only=False, decipher_only=False), critical=True)
        .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.SERVER_AUTH]), critical=False)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()), critical=False)
        .add_extension(x509.AuthorityKeyIdentifier.from_issuer_public_key(ca_key.public_key()),
                       critical=False)
        .sign(ca_key, hashes.SHA256())
    )
    return key, cert


def _sans(cert: x509.Certificate) -> tuple[set[str], set[str]]:
    try:
        ext = cert.extensions.get_extension_for_class(x509.SubjectAlternativeName).value
    except x509.ExtensionNotFound:
        return set(), set()
    return (set(ext.get_values_for_type(x509.DNSName)),
            {str(a) for a in ext.get_values_for_type(x509.IPAddress)})


def load_ca_cert(data_dir: str | Path) -> x509.Certificate | None:
    """The site authority's certificate, or None when HTTPS was never set up."""
    path = SiteCertificates.in_folder(data_dir).ca_cert
    if not path.exists():
        return None
    return x509.load_pem_x509_certificate(path.read_bytes())


def load_server_cert(data_dir: str | Path) -> x509.Certificate | None:
    """The current server certificate (the first one in the chain file), or None."""
    path = SiteCertificates.in_folder(data_dir).server_cert
    if not path.exists():
        return None
    return x509.load_pem_x509_certificates(path.read_bytes())[0]


def ensure_certificates(data_dir: str | Path, extra_names: list[str] | None = None,
                        detect: bool = True) -> SiteCertificates:
    """Make the site authority (once) and a current server certificate; return the paths.

    The authority is never replaced once made (tablets trust it). The server certificate is
    made again when it is missing, ends within 30 days, was not signed by this authority, or
    does not cover every wanted name and address. ``detect=False`` uses only ``localhost``,
    loopback and ``extra_names`` (tests).
    """
    paths = SiteCertificates.in_folder(data_dir)
    paths.folder.mkdir(parents=True, exist_ok=True)
    if paths.ca_cert.exists() and paths.ca_key.exists():
        ca_key = serialization.load_pem_private_key(paths.ca_key.read_bytes(), password=None)
        ca_cert = x509.load_pem_x509_certificate(paths.ca_cert.read_bytes())
    else:
        host = socket.gethostname() or "site laptop"
        ca_key, ca_cert = make_ca(f"Toeline site CA ({host[:40]})")
        _write_private(paths.ca_key, _key_pem(ca_key))
        _write_public(paths.ca_cert, ca_cert.public_bytes(serialization.Encoding.PEM))
        for stale in (paths.server_cert, paths.server_key):
            if stale.exists():
                stale.unlink()

    if detect:
        dns, ips = local_names()
    else:
        dns, ips = ["localhost"], ["127.0.0.1"]
    extra_dns, extra_ips = _split_names(extra_names or [])
    dns, ips = _unique(dns + extra_dns), _unique(ips + extra_ips)

    current = load_server_cert(data_dir) if paths.server_key.exists() else None
    if current is not None:
        have_dns, have_ips = _sans(current)
        fresh = current.not_valid_after_utc - _now() > dt.timedelta(days=RENEW_BEFORE_DAYS)
        same_issuer = current.issuer == ca_cert.subject
        try:
            ca_cert.public_key().verify(current.signature, current.tbs_certificate_bytes,
                                        ec.ECDSA(current.signature_hash_algorithm))
            signed = True
        except Exception:  # noqa: BLE001 - any failure means "not ours": make a new one
            signed = False
        covered = set(dns) <= have_dns and set(ips) <= have_ips
        if fresh and same_issuer and signed and covered:
            return paths
    key, cert = make_server_cert(ca_key, ca_cert, dns, ips)
    _write_private(paths.server_key, _key_pem(key))
    chain = cert.public_bytes(serialization.Encoding.PEM) + ca_cert.public_bytes(serialization.Encoding.PEM)
    _write_public(paths.server_cert, chain)
    return paths


def fingerprint_sha256(cert: x509.Certificate) -> str:
    """The certificate's SHA-256 fingerprint as colon-separated hex (what phones display)."""
    digest = cert.fingerprint(hashes.SHA256()).hex().upper()
    return ":".join(digest[i:i + 2] for i in range(0, len(digest), 2))


def spki_sha256_base64(cert: x509.Certificate) -> str:
    """Base64 SHA-256 of the certificate's SubjectPublicKeyInfo (a public-key pin).

    This is the form Chromium's ``--ignore-certificate-errors-spki-list`` takes.
    """
    spki = cert.public_key().public_bytes(serialization.Encoding.DER,
                                          serialization.PublicFormat.SubjectPublicKeyInfo)
    return base64.b64encode(hashlib.sha256(spki).digest()).decode("ascii")


def make_server(app, host: str, port: int, paths: SiteCertificates, threads: int = 8):
    """A cheroot WSGI server for ``app`` with TLS from ``paths`` (not started)."""
    from cheroot import wsgi
    from cheroot.ssl.builtin import BuiltinSSLAdapter

    server = wsgi.Server((host, port), app, numthreads=threads, server_name="toeline")
    server.ssl_adapter = BuiltinSSLAdapter(str(paths.server_cert), str(paths.server_key))
    return server


def serve(app, host: str, port: int, threads: int = 8, extra_names: list[str] | None = None,
          echo=print) -> None:
    """Serve ``app`` over HTTPS until interrupted, making the certificates when needed."""
    paths = ensure_certificates(app.config["DATA_DIR"], extra_names)
    app.config["SESSION_COOKIE_SECURE"] = True
    app.config["PREFERRED_URL_SCHEME"] = "https"
    cert = load_server_cert(app.config["DATA_DIR"])
    dns, ips = _sans(cert)
    echo(f"Toeline serving {app.config['DATA_DIR']} over HTTPS on {host}:{port}  (Ctrl+C stops)")
    echo(f"  site certificate authority: {paths.ca_cert}")
    echo(f"  fingerprint (SHA-256): {fingerprint_sha256(load_ca_cert(app.config['DATA_DIR']))}")
    echo("  tablets reach it at: " + ", ".join(
        f"https://{n if ':' not in n else '[' + n + ']'}:{port}/" for n in sorted(dns) + sorted(ips)))
    echo(f"  install the authority on each tablet first: https://<address>:{port}/site-ca")
    if host in ("127.0.0.1", "localhost", "::1"):
        echo("  note: listening on loopback only; use --host 0.0.0.0 for tablets on the site network")
    server = make_server(app, host, port, paths, threads)
    try:
        server.safe_start()
    finally:
        server.stop()
