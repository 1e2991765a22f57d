"""The digital signature of an issued record: a PAdES signature made with pyHanko.

Each project has a signing key kept in the data folder (``record-signing/project-<id>.key.pem``,
readable by the owner only) with a self-signed certificate for the project
(``project-<id>.cert.pem``), made with ``cryptography`` on the first issue, as the site's
certificate authority is (``fieldapp.https``). The certificate names the project; the record's
audit head (project id, seq, hash) and revision are written into the PDF's document information
before signing, so the signature covers them.

``verify(path, data_dir, conn)`` checks a file: the signature is intact and covers the whole
file (nothing appended after signing), the signer is this data folder's key of the project the
file names, and the head it embeds is still in the project's chain.
"""

from __future__ import annotations

import asyncio
import datetime as dt
import hashlib
import os
import sqlite3
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from pathlib import Path

from asn1crypto import pem as asn1_pem
from asn1crypto import x509 as asn1_x509
from cryptography import x509
from cryptography.hazmat.primitives import hashes, serialization
from cryptography.hazmat.primitives.asymmetric import ec
from cryptography.x509.oid import NameOID
from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
from pyhanko.pdf_utils.reader import PdfFileReader
from pyhanko.sign import fields, signers
from pyhanko.sign.validation import validate_pdf_signature
from pyhanko_certvalidator import ValidationContext

from fieldapp.queries import audit

FOLDER = "record-signing"
# keys of the PDF document information that carry the record's audit head
META_PROJECT, META_SEQ, META_HASH, META_REVISION = ("/ToelineProject", "/ToelineHeadSeq", "/ToelineHeadHash",
                                                    "/ToelineRevision")
VALID_YEARS = 30


@dataclass(frozen=True)
class SigningKey:
    """Where a project's signing key and certificate live."""

    key_path: Path
    cert_path: Path


def _outside_any_loop(fn, *args, **kwargs):
    """Call one of pyHanko's synchronous functions, which run their own asyncio loop: in this
    thread when no loop runs here, else in a short-lived thread of its own (a caller inside an
    event loop, such as a test session driving a browser, would make asyncio.run refuse)."""
    try:
        asyncio.get_running_loop()
    except RuntimeError:
        return fn(*args, **kwargs)
    with ThreadPoolExecutor(max_workers=1) as pool:
        return pool.submit(fn, *args, **kwargs).result()


def key_paths(data_dir: str | Path, project_id: int) -> SigningKey:
    folder = Path(data_dir) / FOLDER
    return SigningKey(folder / f"project-{project_id}.key.pem", folder / f"project-{project_id}.cert.pem")


def ensure_key(data_dir: str | Path, project_id: int, project_name: str) -> SigningKey:
    """The project's signing key, made (ECDSA P-256, self-signed) when it does not exist yet."""
    paths = key_paths(data_dir, project_id)
    if paths.key_path.exists() and paths.cert_path.exists():
        return paths
    paths.key_path.parent.mkdir(parents=True, exist_ok=True)
    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, f"Toeline record signing: project {project_id}"),
                      x509.NameAttribute(NameOID.ORGANIZATION_NAME, (project_name or "project")[:64])])
    now = dt.datetime.now(dt.timezone.utc)
    cert = (x509.CertificateBuilder().subject_name(name).issuer_name(name).public_key(key.public_key())
            .serial_number(x509.random_serial_number())
            .not_valid_before(now - dt.timedelta(days=1))
            .not_valid_after(now + dt.timedelta(days=365 * VALID_YEARS))
            .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
            .add_extension(x509.KeyUsage(digital_signature=True, content_commitment=True,
                                         key_encipherment=False, data_encipherment=False, key_agreement=False,
                                         key_cert_sign=False, crl_sign=False, encipher_only=False,
                                         decipher_only=False), critical=True)
            .sign(key, hashes.SHA256()))
    pem = key.private_bytes(serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8,
                            serialization.NoEncryption())
    tmp = paths.key_path.with_name(paths.key_path.name + ".tmp")
    fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(fd, "wb") as fh:
        fh.write(pem)
    os.replace(tmp, paths.key_path)
    paths.cert_path.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    return paths


def sign(src: str | Path, out: str | Path, key: SigningKey, reason: str) -> str:
    """Sign ``src`` into ``out`` (PAdES baseline, SHA-256) and return the SHA-256 of ``out``."""
    signer = signers.SimpleSigner.load(str(key.key_path), str(key.cert_path))
    meta = signers.PdfSignatureMetadata(field_name="RecordSignature", md_algorithm="sha256",
                                        subfilter=fields.SigSeedSubFilter.PADES, reason=reason)
    out = Path(out)
    tmp = out.with_name(out.name + ".signing")
    with open(src, "rb") as inf, open(tmp, "wb") as outf:
        _outside_any_loop(signers.sign_pdf, IncrementalPdfFileWriter(inf, strict=False), meta,
                          signer=signer, output=outf)
    os.replace(tmp, out)
    return file_sha256(out)


def file_sha256(path: str | Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


@dataclass(frozen=True)
class Verification:
    """What ``verify`` found: ok, why not, and what the file says."""

    ok: bool
    problems: tuple[str, ...]
    project_id: int | None
    revision: int | None
    head_seq: int | None
    head_hash: str


def embedded_head(reader: PdfFileReader) -> tuple[int | None, int | None, int | None, str]:
    """(project id, revision, head seq, head hash) from the document information."""
    info = reader.trailer_view.get("/Info")
    info = info.get_object() if info is not None else {}

    def number(key):
        try:
            return int(str(info.get(key)))
        except (TypeError, ValueError):
            return None
    return number(META_PROJECT), number(META_REVISION), number(META_SEQ), str(info.get(META_HASH) or "")


def verify(path: str | Path, data_dir: str | Path, conn: sqlite3.Connection,
           project_id: int | None = None) -> Verification:
    """Check an issued record against this data folder (see the module docstring)."""
    problems: list[str] = []
    try:
        fh = open(path, "rb")
    except OSError as exc:
        return Verification(False, (f"the file cannot be read: {exc}",), None, None, None, "")
    with fh:
        try:
            reader = PdfFileReader(fh, strict=False)
            sigs = reader.embedded_signatures
            pid, revision, seq, head = embedded_head(reader)
        except Exception as exc:   # any damage to the file's structure
            return Verification(False, (f"the file is not a readable PDF ({type(exc).__name__}: {exc})",),
                                None, None, None, "")
        if pid is None or seq is None or not head:
            problems.append("the file carries no audit head of a Toeline record")
            return Verification(False, tuple(problems), pid, revision, seq, head)
        if project_id is not None and pid != project_id:
            problems.append(f"the file is the record of project {pid}, not of project {project_id}")
        if not sigs:
            problems.append("the file has no digital signature")
            return Verification(False, tuple(problems), pid, revision, seq, head)
        paths = key_paths(data_dir, pid)
        if not paths.cert_path.exists():
            problems.append(f"this data folder has no signing key of project {pid}: the file was not issued here")
            return Verification(False, tuple(problems), pid, revision, seq, head)
        raw = paths.cert_path.read_bytes()
        cert = asn1_x509.Certificate.load(asn1_pem.unarmor(raw)[2])
        sig = sigs[-1]
        try:
            status = _outside_any_loop(validate_pdf_signature, sig, ValidationContext(trust_roots=[cert]))
        except Exception as exc:
            problems.append(f"the signature cannot be checked ({type(exc).__name__}: {exc})")
            return Verification(False, tuple(problems), pid, revision, seq, head)
        if not status.intact:
            problems.append("the signature is broken: the file was changed after it was signed")
        elif not status.valid:
            problems.append("the signature does not verify with this project's signing key")
        elif not status.trusted:
            problems.append(f"the file was signed by another key, not project {pid}'s key in this data folder")
        if status.intact and status.coverage.name != "ENTIRE_FILE":
            problems.append("something was added to the file after it was signed")
    failure = audit.check_anchor(conn, audit.Anchor("the file's audit head", pid, seq, head))
    if failure is not None:
        problems.append(failure)
    return Verification(not problems, tuple(problems), pid, revision, seq, head)
