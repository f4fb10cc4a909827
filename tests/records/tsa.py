"""A local RFC 3161 time-stamp authority for tests (invented names, test use only).

``local_tsa(folder)`` makes its own test CA (ECDSA P-256) and a TSA certificate (RSA 2048, as
pyHanko's ``DummyTimeStamper`` signs with RSA only; extended key usage timeStamping, critical),
serves HTTP POST ``application/timestamp-query`` on 127.0.0.1 at a free port from a
background thread, answers with ``DummyTimeStamper``, and yields the URL, the CA certificate
file (a trust anchor for the time stamp) and a count of the requests it answered.
"""

from __future__ import annotations

import threading
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, datetime, timedelta
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer
from pathlib import Path
from typing import Any

ORG = "Quellmoor Biotherapeutics (invented)"


@dataclass
class LocalTSA:
    """A running local time-stamp authority."""

    url: str
    ca_cert: Path
    answered: list[int] = field(default_factory=list)  # one entry per answered request


def _certificates(folder: Path) -> tuple[Any, Any, Path]:
    """The TSA certificate and key (asn1crypto, for pyHanko) and the CA certificate file."""
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec, rsa
    from cryptography.x509.oid import ExtendedKeyUsageOID, NameOID
    from pyhanko.keys import load_certs_from_pemder_data, load_private_key_from_pemder_data

    def name(cn: str) -> x509.Name:
        return x509.Name(
            [
                x509.NameAttribute(NameOID.COMMON_NAME, cn),
                x509.NameAttribute(NameOID.ORGANIZATION_NAME, ORG),
            ]
        )

    now = datetime.now(UTC)
    ca_key = ec.generate_private_key(ec.SECP256R1())
    ca = (
        x509.CertificateBuilder()
        .subject_name(name("Test Time-Stamp CA"))
        .issuer_name(name("Test Time-Stamp CA"))
        .public_key(ca_key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - timedelta(minutes=5))
        .not_valid_after(now + timedelta(days=2))
        .add_extension(x509.BasicConstraints(ca=True, path_length=0), critical=True)
        .add_extension(
            x509.KeyUsage(False, False, False, False, False, True, True, False, False),
            critical=True,
        )
        .add_extension(x509.SubjectKeyIdentifier.from_public_key(ca_key.public_key()), False)
        .sign(ca_key, hashes.SHA256())
    )
    tsa_key = rsa.generate_private_key(public_exponent=65537, key_size=2048)
    tsa = (
        x509.CertificateBuilder()
        .subject_name(name("Test Time-Stamp Unit 1"))
        .issuer_name(ca.subject)
        .public_key(tsa_key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - timedelta(minutes=5))
        .not_valid_after(now + timedelta(days=1))
        .add_extension(x509.BasicConstraints(ca=False, path_length=None), critical=True)
        .add_extension(
            x509.KeyUsage(True, True, False, False, False, False, False, False, False),
            critical=True,
        )
        .add_extension(x509.ExtendedKeyUsage([ExtendedKeyUsageOID.TIME_STAMPING]), critical=True)
        .add_extension(
            x509.AuthorityKeyIdentifier.from_issuer_public_key(ca_key.public_key()), False
        )
        .sign(ca_key, hashes.SHA256())
    )
    ca_path = folder / "tsa-ca.pem"
    ca_path.write_bytes(ca.public_bytes(serialization.Encoding.PEM))
    der = serialization.Encoding.DER
    tsa_asn1 = next(iter(load_certs_from_pemder_data(tsa.public_bytes(der))))
    key_asn1 = load_private_key_from_pemder_data(
        tsa_key.private_bytes(der, serialization.PrivateFormat.PKCS8, serialization.NoEncryption()),
        None,
    )
    return tsa_asn1, key_asn1, ca_path


@contextmanager
def local_tsa(folder: Path) -> Iterator[LocalTSA]:
    """Run a time-stamp authority on 127.0.0.1 for the duration of the ``with`` block."""
    from asn1crypto import tsp  # type: ignore[import-untyped]
    from pyhanko.sign.timestamps.dummy_client import DummyTimeStamper

    tsa_cert, tsa_key, ca_path = _certificates(folder)
    stamper = DummyTimeStamper(tsa_cert=tsa_cert, tsa_key=tsa_key)
    answered: list[int] = []

    class Handler(BaseHTTPRequestHandler):
        def do_POST(self) -> None:
            body = self.rfile.read(int(self.headers.get("Content-Length", "0")))
            if self.headers.get("Content-Type") != "application/timestamp-query":
                self.send_error(415, "expected application/timestamp-query")
                return
            reply = stamper.request_tsa_response(tsp.TimeStampReq.load(body)).dump()
            answered.append(len(reply))
            self.send_response(200)
            self.send_header("Content-Type", "application/timestamp-reply")
            self.send_header("Content-Length", str(len(reply)))
            self.end_headers()
            self.wfile.write(reply)

        def log_message(self, format: str, *args: Any) -> None:  # keep test output clean
            pass

    server = ThreadingHTTPServer(("127.0.0.1", 0), Handler)
    thread = threading.Thread(target=server.serve_forever, name="local-tsa", daemon=True)
    thread.start()
    try:
        host, port = server.server_address[:2]
        yield LocalTSA(url=f"http://{host}:{port}/tsa", ca_cert=ca_path, answered=answered)
    finally:
        server.shutdown()
        server.server_close()
        thread.join(timeout=5)
