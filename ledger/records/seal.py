"""The digital seal of a finished batch-record PDF (PAdES, pyHanko), and examining a sealed file.

``seal`` signs the PDF as PAdES baseline B-B — or B-T with an RFC 3161 time stamp from a
time-stamp authority — in an incremental update, so the printed document stays byte for byte
the prefix of the sealed file. ``examine`` reads a file's seal and says, in words a QA
reviewer understands, whether it is intact, whether anything was added after it, who sealed it,
when, and (given trust anchors) whether the sealer's certificate chains to one of them.
Examining works offline: nothing is fetched (no CRL, OCSP or certificate download).

pyHanko is imported inside the functions: it is heavy, and logging commands must start fast.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass
from io import BytesIO
from pathlib import Path
from typing import Any

from ledger.errors import InputError
from ledger.secrets import mask_secrets

SEAL_FIELD = "FluxledgerSeal"
PADES_SUBFILTER = "/ETSI.CAdES.detached"
NO_ANCHOR = "no trust anchor given: the signer was not checked"
NO_ANCHOR_TSA = "no trust anchor given: neither the signer nor the time-stamp authority was checked"

_KEY_EXPECTED = "a PKCS#12 file (.p12/.pfx), or a PEM private key together with --cert"
_CERT_EXPECTED = "the PEM (or DER) certificate of the --key"
_PASSWORD_EXPECTED = "the password the key file was protected with"


@dataclass(frozen=True)
class SealReport:
    """What ``examine`` found; ``problems`` names every failed check in plain words."""

    sealed: bool
    intact: bool
    whole_file: bool
    signer: str | None = None
    signed_at: str | None = None
    level: str | None = None
    timestamp_at: str | None = None
    trusted: bool | None = None
    signed_length: int | None = None
    problems: tuple[str, ...] = ()


def _quiet_pyhanko() -> None:
    # pyHanko logs some validation and loading failures with their traceback; with no logging
    # configured, Python's last-resort handler would print them. Our caller reports the
    # failure in words instead. Records still reach any handler an application configures.
    for name in ("pyhanko", "pyhanko_certvalidator"):
        log = logging.getLogger(name)
        if not any(isinstance(h, logging.NullHandler) for h in log.handlers):
            log.addHandler(logging.NullHandler())


def _read(path: Path, option: str, expected: str) -> bytes:
    try:
        return path.read_bytes()
    except FileNotFoundError:
        raise InputError(
            f"{option} {path}: no such file", field=option, value=str(path), expected=expected
        ) from None
    except OSError as exc:
        raise InputError(
            f"{option} {path}: cannot be read ({exc.strerror})",
            field=option,
            value=str(path),
            expected=expected,
        ) from None


def _looks_like_pkcs12(data: bytes) -> bool:
    """A DER PFX: SEQUENCE { INTEGER 3, ContentInfo SEQUENCE ... } (RFC 7292 §4)."""
    if len(data) < 8 or data[0] != 0x30:
        return False
    i = 2 + (data[1] & 0x7F if data[1] & 0x80 else 0)
    return data[i : i + 3] == b"\x02\x01\x03" and data[i + 3 : i + 4] == b"\x30"


def _wrong_password(key_file: Path, passphrase: bytes | None) -> InputError:
    if not passphrase:
        return InputError(
            f"--key-password: {key_file} is protected by a password and none was given",
            field="--key-password",
            value="(none)",
            expected=_PASSWORD_EXPECTED,
        )
    return InputError(
        f"--key-password: the password given does not open {key_file}",
        field="--key-password",
        value="(not shown)",
        expected=_PASSWORD_EXPECTED,
    )


def _not_a_key(key_file: Path, why: str) -> InputError:
    return InputError(
        f"--key {key_file} {why}", field="--key", value=str(key_file), expected=_KEY_EXPECTED
    )


def _pkcs12_material(data: bytes, key_file: Path, passphrase: bytes | None) -> tuple[Any, ...]:
    from cryptography.hazmat.primitives.serialization import pkcs12

    if not _looks_like_pkcs12(data):
        hint = ": a PEM key needs --cert" if b"-----BEGIN" in data else ""
        raise _not_a_key(key_file, f"is not a PKCS#12 file{hint}")
    try:
        key, cert, others = pkcs12.load_key_and_certificates(data, passphrase)
    except ValueError:
        raise _wrong_password(key_file, passphrase) from None
    if key is None or cert is None:
        raise _not_a_key(key_file, "holds no private key with its certificate")
    return key, cert, tuple(others)


def _pem_material(
    data: bytes, key_file: Path, cert_file: Path, passphrase: bytes | None
) -> tuple[Any, ...]:
    from cryptography import x509
    from cryptography.exceptions import UnsupportedAlgorithm
    from cryptography.hazmat.primitives import serialization

    pem = b"-----BEGIN" in data
    load_key = serialization.load_pem_private_key if pem else serialization.load_der_private_key
    try:
        key = load_key(data, None)
    except TypeError:  # the key is encrypted
        if not passphrase:
            raise _wrong_password(key_file, passphrase) from None
        try:
            key = load_key(data, passphrase)
        except ValueError:
            raise _wrong_password(key_file, passphrase) from None
    except (ValueError, UnsupportedAlgorithm):
        why = (
            "is a PKCS#12 file: leave out --cert"
            if _looks_like_pkcs12(data)
            else "is not a PEM or DER private key"
        )
        raise _not_a_key(key_file, why) from None
    cert_data = _read(cert_file, "--cert", _CERT_EXPECTED)
    try:
        cert = (
            x509.load_pem_x509_certificate
            if b"-----BEGIN" in cert_data
            else x509.load_der_x509_certificate
        )(cert_data)
    except ValueError:
        raise InputError(
            f"--cert {cert_file} is not a PEM or DER certificate",
            field="--cert",
            value=str(cert_file),
            expected=_CERT_EXPECTED,
        ) from None
    spki = serialization.Encoding.DER, serialization.PublicFormat.SubjectPublicKeyInfo
    if key.public_key().public_bytes(*spki) != cert.public_key().public_bytes(*spki):
        raise InputError(
            f"--cert {cert_file} is not the certificate of the key {key_file}",
            field="--cert",
            value=str(cert_file),
            expected=_CERT_EXPECTED,
        )
    return key, cert, ()


def key_and_cert(
    key_file: Path, cert_file: Path | None, passphrase: bytes | None
) -> tuple[Any, Any, tuple[Any, ...]]:
    """(private key, certificate, other certificates) from the seal's key files
    (cryptography objects), each failure named by its option."""
    data = _read(key_file, "--key", _KEY_EXPECTED)
    if cert_file is None:
        key, cert, others = _pkcs12_material(data, key_file, passphrase)
    else:
        key, cert, others = _pem_material(data, key_file, cert_file, passphrase)
    return key, cert, tuple(others)


def _signer(key_file: Path, cert_file: Path | None, passphrase: bytes | None) -> Any:
    """A pyHanko SimpleSigner from the key files, each failure named by its option.

    pyHanko's own ``SimpleSigner.load``/``load_pkcs12`` log a traceback and return None on any
    failure, so the files are read here and the material handed over already checked.
    """
    from cryptography.hazmat.primitives import serialization
    from pyhanko.keys import load_certs_from_pemder_data, load_private_key_from_pemder_data
    from pyhanko.sign.signers import SimpleSigner
    from pyhanko_certvalidator.registry import SimpleCertificateStore

    key, cert, others = key_and_cert(key_file, cert_file, passphrase)
    der = serialization.Encoding.DER
    pkcs8 = key.private_bytes(der, serialization.PrivateFormat.PKCS8, serialization.NoEncryption())
    store = SimpleCertificateStore()
    for extra in others:
        store.register_multiple(load_certs_from_pemder_data(extra.public_bytes(der)))
    return SimpleSigner(
        signing_cert=next(iter(load_certs_from_pemder_data(cert.public_bytes(der)))),
        signing_key=load_private_key_from_pemder_data(pkcs8, None),
        cert_registry=store,
    )


def _tsa_failure(exc: BaseException) -> BaseException | None:
    from pyhanko.sign.timestamps import TimestampRequestError

    seen: BaseException | None = exc
    while seen is not None:
        if isinstance(seen, TimestampRequestError):
            return seen.__cause__ or seen
        seen = seen.__cause__ or seen.__context__
    return None


def seal(
    pdf: bytes,
    *,
    key_file: Path,
    cert_file: Path | None = None,
    passphrase: bytes | None = None,
    tsa_url: str | None = None,
    reason: str = "Batch record approved and sealed",
    location: str | None = None,
) -> bytes:
    """Seal ``pdf`` with a PAdES signature (B-B; B-T with ``tsa_url``) as an incremental update.

    The key is a PKCS#12 file (``cert_file`` None) or a PEM/DER key with its PEM/DER
    certificate. The result starts with the unchanged ``pdf`` bytes. Bad key files, a wrong
    password or a time-stamp authority that does not answer raise ``InputError`` naming the
    option (``--key``, ``--cert``, ``--key-password``, ``--tsa``).
    """
    from pyhanko.pdf_utils.incremental_writer import IncrementalPdfFileWriter
    from pyhanko.pdf_utils.misc import PdfError
    from pyhanko.sign import signers
    from pyhanko.sign.fields import SigSeedSubFilter
    from pyhanko.sign.timestamps import HTTPTimeStamper

    _quiet_pyhanko()
    signer = _signer(key_file, cert_file, passphrase)
    meta = signers.PdfSignatureMetadata(
        field_name=SEAL_FIELD,
        subfilter=SigSeedSubFilter.PADES,
        md_algorithm="sha256",
        reason=reason,
        location=location,
    )
    try:
        writer = IncrementalPdfFileWriter(BytesIO(pdf))
    except PdfError as exc:
        raise InputError(
            f"the document to seal is not a readable PDF ({exc})",
            field="pdf",
            value=f"{len(pdf)} bytes",
            expected="a PDF file",
        ) from None
    timestamper = HTTPTimeStamper(tsa_url) if tsa_url else None
    try:
        out = signers.sign_pdf(writer, meta, signer=signer, timestamper=timestamper)
    except Exception as exc:  # pyHanko may wrap a TSA failure; anything else stays a bug
        cause = _tsa_failure(exc)
        if cause is None:
            raise
        shown = mask_secrets(tsa_url or "")
        raise InputError(
            f"--tsa {shown}: no time stamp from this time-stamp authority "
            f"({mask_secrets(_why(cause))})",
            field="--tsa",
            value=shown,
            expected="the URL of a reachable RFC 3161 time-stamp authority",
        ) from None
    return bytes(out.getvalue())


def _anchors(trust: Sequence[Path]) -> list[Any]:
    from pyhanko.keys import load_certs_from_pemder_data

    anchors: list[Any] = []
    for path in trust:
        data = _read(path, "--trust", "a PEM or DER certificate file")
        try:
            found = list(load_certs_from_pemder_data(data))
        except Exception:  # asn1crypto raises assorted errors on bytes that are not DER
            found = []
        if not found:
            raise InputError(
                f"--trust {path} holds no PEM or DER certificate",
                field="--trust",
                value=str(path),
                expected="a PEM or DER certificate file",
            )
        anchors += found
    return anchors


def _signed_length(reader: Any, revision: int, pdf: bytes) -> int | None:
    """Where the seal's incremental update starts: the length of the document it sealed."""
    if revision == 0:
        return None  # the signature was written with the document, not added to it
    xrefs = reader.xrefs
    starts = [offset for _, offset in xrefs.get_xref_data(revision).standard_xrefs.values()]
    starts.append(xrefs.get_xref_container_info(revision).start_location)
    length = int(min(starts))
    # The sealed document ends with its own end-of-file marker; anything else is not a
    # document that was sealed by appending to it.
    return length if pdf[:length].rstrip().endswith(b"%%EOF") else None


def _coverage(emb: Any, reader: Any, coverage: Any, size: int) -> tuple[bool, list[str]]:
    from pyhanko.sign.validation import SignatureCoverageLevel as Cover

    problems = []
    if coverage is None or coverage < Cover.ENTIRE_REVISION:
        problems.append(
            "the seal's byte range does not cover its own revision of the file: "
            "the file was assembled around the seal"
        )
    later = reader.xrefs.total_revisions - 1 - emb.signed_revision
    if later > 0:
        plural = "s" if later != 1 else ""
        problems.append(f"the file was changed after sealing: {later} later revision{plural}")
    elif coverage == Cover.ENTIRE_REVISION:
        _, _, start2, len2 = (int(x) for x in emb.byte_range)
        problems.append(
            f"the file was changed after sealing: {size - start2 - len2} bytes "
            "follow the sealed range"
        )
    return coverage == Cover.ENTIRE_FILE and later <= 0, problems


def _why(exc: BaseException) -> str:
    return str(exc) or type(exc).__name__


def examine(pdf: bytes, *, trust: Sequence[Path] = ()) -> SealReport:
    """Examine the first seal of ``pdf`` offline; see :class:`SealReport`.

    ``trust`` names PEM or DER certificate files the sealer's (and the time-stamp
    authority's) certificate must chain to; without them ``trusted`` is None. A file that
    cannot be parsed gives ``sealed=False`` with the reason in ``problems``.
    """
    from pyhanko.pdf_utils.reader import PdfFileReader
    from pyhanko.sign.validation import validate_pdf_signature
    from pyhanko_certvalidator import ValidationContext

    anchors = _anchors(trust)
    _quiet_pyhanko()
    try:
        reader = PdfFileReader(BytesIO(pdf))
        reader.root  # noqa: B018 - parse the catalog now, so a damaged file is caught here
    except Exception as exc:  # a damaged file may break the parser anywhere: it is a finding
        return SealReport(
            False,
            False,
            False,
            problems=(
                f"the file cannot be read as a PDF ({_why(exc)}): it is damaged or not a PDF",
            ),
        )
    try:
        seals = reader.embedded_regular_signatures
    except Exception as exc:  # the signature dictionary or its CMS blob does not parse
        return SealReport(
            True,
            False,
            False,
            problems=(
                f"the seal's signature data cannot be read ({_why(exc)}): it was damaged or "
                "altered",
            ),
        )
    if not seals:
        return SealReport(False, False, False, problems=("the file carries no digital seal",))
    emb = seals[0]
    context = ValidationContext(trust_roots=anchors, allow_fetching=False)
    try:
        status = validate_pdf_signature(emb, signer_validation_context=context, skip_diff=True)
    except Exception as exc:  # validating untrusted bytes: any failure is a finding
        # The byte-range coverage is computed before the CMS checks, so it is still known.
        whole_file, cover_problems = _coverage(emb, reader, emb.coverage, len(pdf))
        return SealReport(
            True,
            False,
            whole_file,
            problems=(
                f"the seal could not be validated ({_why(exc)}): its signature data is malformed "
                "or was altered",
                *cover_problems,
            ),
            signed_length=_signed_length(reader, emb.signed_revision, pdf),
        )

    problems: list[str] = []
    if not status.intact:
        problems.append(
            "the seal's digest does not match: the file was altered inside the sealed byte range"
        )
    if not status.valid:
        problems.append(
            "the seal's signature does not verify with the signer's certificate: "
            "the signature or its signed attributes were altered"
        )
    whole_file, cover_problems = _coverage(emb, reader, status.coverage, len(pdf))
    problems += cover_problems

    pades = str(emb.sig_object.get("/SubFilter", "")) == PADES_SUBFILTER
    stamp = status.timestamp_validity
    level = ("B-T" if stamp is not None else "B-B") if pades else None
    if stamp is not None and not (stamp.intact and stamp.valid):
        problems.append(
            "the seal's time stamp does not match the seal: it was altered or "
            "belongs to another signature"
        )

    trusted: bool | None = None
    if not anchors:
        problems.append(NO_ANCHOR_TSA if stamp is not None else NO_ANCHOR)
    else:
        trusted = status.trust_problem_indic is None and status.validation_path is not None
        if not trusted:
            indic = status.trust_problem_indic
            why = str(indic.standard_name).lower().replace("_", " ") if indic else "no chain"
            problems.append(
                "the signer's certificate does not chain to any of the trusted "
                f"certificates given ({why})"
            )
        if stamp is not None and not stamp.trusted:
            problems.append(
                "the time-stamp authority's certificate does not chain to any of "
                "the trusted certificates given"
            )

    reported = status.signer_reported_dt
    return SealReport(
        sealed=True,
        intact=bool(status.intact and status.valid),
        whole_file=whole_file,
        signer=status.signing_cert.subject.human_friendly,
        signed_at=reported.isoformat() if reported is not None else None,
        level=level,
        timestamp_at=stamp.timestamp.isoformat() if stamp is not None else None,
        trusted=trusted,
        signed_length=_signed_length(reader, emb.signed_revision, pdf),
        problems=tuple(problems),
    )
