"""A self-signed seal identity (certificate and key) for the demo and the tests.

``make_identity`` writes a fresh ECDSA P-256 key and a self-signed certificate whose key usage
is digitalSignature + nonRepudiation, in the three forms ``ledger.records.seal.seal`` accepts:
``seal.p12`` (PKCS#12, protected by the passphrase), ``seal-key.pem`` (PKCS#8, encrypted with
the passphrase) and ``seal-cert.pem``.

This is for demonstrations and tests only. A site seals its batch records with a certificate
issued by its own PKI (or a qualified trust service), whose CA certificate QA then passes to
``verify --trust``; a self-signed certificate proves only that the file is unchanged since
whoever holds this key sealed it.

Example (invented organisation)::

    make_identity(Path("keys"), common_name="QA Seal, Site Nordhafen",
                  organization="Quellmoor Biotherapeutics (invented)", passphrase=b"...")
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path

from ledger.errors import InputError


@dataclass(frozen=True)
class Identity:
    """The files ``make_identity`` wrote, and the certificate's SHA-256 fingerprint (hex)."""

    p12: Path
    key: Path
    cert: Path
    fingerprint: str


def _write_private(path: Path, data: bytes) -> None:
    # Key material: readable by the owner only, set before any byte is written.
    fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o600)
    with os.fdopen(fd, "wb") as f:
        f.write(data)


def make_identity(
    out_dir: Path,
    *,
    common_name: str,
    organization: str,
    passphrase: bytes,
    days: int = 365,
) -> Identity:
    """Create a self-signed seal certificate and key in ``out_dir`` (created if missing).

    The certificate is valid from one minute ago (clock skew between machines) for ``days``
    days. Raises ``InputError`` for an empty name or passphrase or a non-positive ``days``.
    """
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.hazmat.primitives.serialization import pkcs12
    from cryptography.x509.oid import NameOID

    if not common_name.strip():
        raise InputError(
            "common_name is empty",
            field="common_name",
            value=common_name,
            expected="the name the seal shows, e.g. 'QA Seal, Site Nordhafen'",
        )
    if not organization.strip():
        raise InputError(
            "organization is empty",
            field="organization",
            value=organization,
            expected="the organisation that seals the records",
        )
    if not passphrase:
        raise InputError(
            "passphrase is empty",
            field="passphrase",
            value="(empty)",
            expected="a non-empty passphrase to protect the key files",
        )
    if days < 1:
        raise InputError(
            f"days = {days!r} is out of range",
            field="days",
            value=days,
            expected="a validity of at least 1 day",
        )

    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name(
        [
            x509.NameAttribute(NameOID.COMMON_NAME, common_name),
            x509.NameAttribute(NameOID.ORGANIZATION_NAME, organization),
        ]
    )
    now = datetime.now(UTC)
    usage = x509.KeyUsage(
        digital_signature=True,
        content_commitment=True,  # nonRepudiation: what PAdES validators expect of a signer
        key_encipherment=False,
        data_encipherment=False,
        key_agreement=False,
        key_cert_sign=False,
        crl_sign=False,
        encipher_only=False,
        decipher_only=False,
    )
    cert = (
        x509.CertificateBuilder()
        .subject_name(name)
        .issuer_name(name)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - timedelta(minutes=1))
        .not_valid_after(now + timedelta(days=days))
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(usage, critical=True)
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(key.public_key()), critical=False)
        .sign(key, hashes.SHA256())
    )

    out_dir.mkdir(parents=True, exist_ok=True)
    encryption = serialization.BestAvailableEncryption(passphrase)
    identity = Identity(
        p12=out_dir / "seal.p12",
        key=out_dir / "seal-key.pem",
        cert=out_dir / "seal-cert.pem",
        fingerprint=cert.fingerprint(hashes.SHA256()).hex(),
    )
    _write_private(
        identity.p12,
        pkcs12.serialize_key_and_certificates(common_name.encode(), key, cert, None, encryption),
    )
    _write_private(
        identity.key,
        key.private_bytes(
            serialization.Encoding.PEM, serialization.PrivateFormat.PKCS8, encryption
        ),
    )
    identity.cert.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    return identity
