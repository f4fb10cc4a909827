"""Checkpoints of the audit chain: the head (event number, digest, key ID, time) signed with the
site's signing key (the X.509 key that seals batch-record PDFs) and written to a file the site
keeps away from the database.

A checkpoint pins every event up to its number: the chain links each event to the one before,
so if event N's digest is still the one the checkpoint signed, nothing at or before N was
rewritten — even by someone who holds the site key. Events after the newest checkpoint rest on
the key alone; verification says how many there are.

The file is JSON (UTF-8): the fields below plus the signer's certificate (PEM) and a signature
over the canonical JSON of every other field — RSA PKCS#1 v1.5, ECDSA or Ed25519 with SHA-256,
whichever the key is. No time-stamp authority is asked: the signed time is the host's clock.
"""

from __future__ import annotations

import base64
import json
import os
from dataclasses import dataclass
from datetime import datetime
from pathlib import Path
from typing import Any

from sqlmodel import Session

from ledger.canonical import canonical
from ledger.errors import InputError
from ledger.store.audit import Problem
from ledger.store.tables import AuditEvent, AuditHead
from ledger.store.types import utc_now

KIND = "fluxledger audit checkpoint"
VERSION = 1
MAX_FILE_BYTES = 1_000_000
_SIGNED = ("kind", "version", "database", "seq", "hash", "key_id", "made_at", "certificate")


@dataclass(frozen=True)
class Checkpoint:
    """One checkpoint as read from its file (``file`` names it in messages)."""

    file: str
    seq: int
    hash: str
    key_id: str | None
    made_at: str
    signer: str


@dataclass(frozen=True)
class CheckpointReport:
    """What checking the checkpoints found: problems, the newest event they cover, and how
    many events after it no checkpoint covers yet."""

    checked: int
    covered_seq: int
    uncovered_events: int
    problems: tuple[Problem, ...]
    notes: tuple[str, ...] = ()


def _sign(key: Any, payload: bytes) -> tuple[str, bytes]:
    from cryptography.hazmat.primitives import hashes
    from cryptography.hazmat.primitives.asymmetric import ec, ed25519, padding, rsa

    if isinstance(key, rsa.RSAPrivateKey):
        return "rsa-pkcs1v15-sha256", key.sign(payload, padding.PKCS1v15(), hashes.SHA256())
    if isinstance(key, ec.EllipticCurvePrivateKey):
        return "ecdsa-sha256", key.sign(payload, ec.ECDSA(hashes.SHA256()))
    if isinstance(key, ed25519.Ed25519PrivateKey):
        return "ed25519", key.sign(payload)
    raise InputError(
        f"--key: a {type(key).__name__} cannot sign checkpoints",
        field="--key",
        expected="an RSA, EC or Ed25519 key",
    )


def _check_signature(cert: Any, algorithm: str, signature: bytes, payload: bytes) -> bool:
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives import hashes
    from cryptography.hazmat.primitives.asymmetric import ec, padding

    public = cert.public_key()
    try:
        if algorithm == "rsa-pkcs1v15-sha256":
            public.verify(signature, payload, padding.PKCS1v15(), hashes.SHA256())
        elif algorithm == "ecdsa-sha256":
            public.verify(signature, payload, ec.ECDSA(hashes.SHA256()))
        elif algorithm == "ed25519":
            public.verify(signature, payload)
        else:
            return False
    except (InvalidSignature, TypeError, ValueError):
        return False
    return True


def make(
    session: Session,
    database: str,
    out_dir: Path,
    *,
    key_file: Path,
    cert_file: Path | None,
    passphrase: bytes | None,
    now: datetime | None = None,
) -> Path:
    """Sign the current chain head and write it as a new file in ``out_dir`` (never over an
    existing one); returns the file's path."""
    from cryptography.hazmat.primitives import serialization

    from ledger.records.seal import key_and_cert

    key, cert, _ = key_and_cert(key_file, cert_file, passphrase)
    head = session.get(AuditHead, 1)
    if head is None:
        raise RuntimeError("audit_head row is missing; the schema was not created by init")
    made = (now or utc_now()).isoformat(timespec="seconds")
    body: dict[str, Any] = {
        "kind": KIND,
        "version": VERSION,
        "database": database,
        "seq": head.seq,
        "hash": head.hash,
        "key_id": head.key_id,
        "made_at": made,
        "certificate": cert.public_bytes(serialization.Encoding.PEM).decode("ascii"),
    }
    algorithm, signature = _sign(key, canonical(body).encode())
    body["algorithm"] = algorithm
    body["signature"] = base64.b64encode(signature).decode("ascii")
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(
            f"--out {out_dir} is a file, not a folder",
            field="--out",
            value=str(out_dir),
            expected="a folder for checkpoint files",
        )
    out_dir.mkdir(parents=True, exist_ok=True)
    stamp = made.replace("-", "").replace(":", "").replace("+0000", "Z")
    path = out_dir / f"checkpoint-{head.seq:08d}-{stamp}.json"
    try:
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
    except FileExistsError:
        raise InputError(
            f"{path} exists already; a checkpoint file is never overwritten",
            field="--out",
            value=str(path),
            expected="a folder without a checkpoint of this head at this second",
        ) from None
    with os.fdopen(fd, "w", encoding="utf-8") as f:
        f.write(json.dumps(body, indent=1, sort_keys=True) + "\n")
    return path


def _bad(path: Path, why: str) -> InputError:
    return InputError(
        f"{path.name} is not a fluxledger checkpoint: {why}",
        field="checkpoints",
        value=str(path),
        expected="a file written by `fluxledger audit checkpoint`",
        source=str(path),
    )


def read(path: Path) -> tuple[Checkpoint | None, Problem | None]:
    """A checkpoint file, checked against its own certificate: (checkpoint, None), or
    (None, a problem naming the file) when its signature does not hold."""
    from cryptography import x509

    from ledger.userfiles import read_user_file

    data = read_user_file(path, "checkpoints", MAX_FILE_BYTES)
    try:
        body = json.loads(data.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError, RecursionError) as exc:
        raise _bad(path, f"not JSON ({type(exc).__name__})") from None
    if not isinstance(body, dict) or body.get("kind") != KIND:
        raise _bad(path, f'no "kind": "{KIND}"')
    try:
        signed = {k: body[k] for k in _SIGNED}
        seq, digest = int(body["seq"]), str(body["hash"])
        cert = x509.load_pem_x509_certificate(str(body["certificate"]).encode("ascii"))
        signature = base64.b64decode(str(body["signature"]), validate=True)
        algorithm = str(body["algorithm"])
        payload = canonical(signed).encode()
    except (KeyError, TypeError, ValueError, UnicodeEncodeError) as exc:
        raise _bad(path, f"a field is missing or malformed ({exc})") from None
    if not _check_signature(cert, algorithm, signature, payload):
        what = ("signature invalid: the checkpoint file was altered after it was signed, or "
                "not signed by the certificate it carries")  # fmt: skip
        return None, Problem("checkpoint", path.name, what)
    signer = cert.subject.rfc4514_string()
    key_id = body["key_id"] if body["key_id"] is None else str(body["key_id"])
    return Checkpoint(path.name, seq, digest, key_id, str(body["made_at"]), signer), None


def check(session: Session, folder: Path) -> CheckpointReport:
    """Every checkpoint file in ``folder`` against the stored chain."""
    if not folder.is_dir():
        raise InputError(
            f"--checkpoints {folder} is not a folder",
            field="checkpoints",
            value=str(folder),
            expected="the folder `fluxledger audit checkpoint --out` wrote to",
        )
    head = session.get(AuditHead, 1)
    last = head.seq if head is not None else 0
    current = head.key_id if head is not None else None
    rekeyed = _old_heads(session)
    problems: list[Problem] = []
    notes: list[str] = []
    covered, checked = 0, 0
    for path in sorted(folder.glob("*.json")):
        point, bad = read(path)
        checked += 1
        if bad is not None:
            problems.append(bad)
            continue
        assert point is not None
        event = session.get(AuditEvent, point.seq) if point.seq > 0 else None
        who = f"checkpoint {point.file} (signed {point.made_at} by {point.signer})"
        if point.key_id != current and point.key_id in rekeyed:
            # Made before a re-key rewrote every digest: only the old head it recorded is
            # left to compare with.
            old_seq, old_hash, at_event = rekeyed[point.key_id]
            if point.seq > old_seq or (point.seq == old_seq and point.hash != old_hash):
                what = (f"re-chained: {who} does not match the head that the re-key at event "
                        f"{at_event} recorded")  # fmt: skip
                problems.append(Problem("audit_event", f"1–{point.seq}", what))
            elif point.seq == old_seq:
                covered = max(covered, point.seq)
            else:
                notes.append(f"{who} predates the re-key at event {at_event} and cannot be "
                             "checked against the re-keyed chain")  # fmt: skip
            continue
        if point.seq > 0 and event is None:
            what = f"deleted: {who} names event {point.seq} but the chain ends at event {last}"
            problems.append(Problem("audit_event", str(point.seq), what))
        elif event is not None and event.hash != point.hash:
            what = (f"re-chained: event {point.seq}'s digest differs from {who}; events up to "
                    f"{point.seq} were rewritten after it was made")  # fmt: skip
            problems.append(Problem("audit_event", f"1–{point.seq}", what))
        else:
            covered = max(covered, point.seq)
    return CheckpointReport(checked, covered, max(0, last - covered), tuple(problems), tuple(notes))


def _old_heads(session: Session) -> dict[str | None, tuple[int, str, int]]:
    """Per old key ID, the head (seq, digest) each re-key recorded and the re-key's event."""
    from sqlmodel import select

    out: dict[str | None, tuple[int, str, int]] = {}
    for ev in session.exec(select(AuditEvent).where(AuditEvent.action == "rekey")):
        try:
            old = json.loads(ev.old_value or "{}")
            out[old.get("key_id")] = (int(old["seq"]), str(old["hash"]), ev.seq)
        except (ValueError, KeyError, TypeError):
            continue
    return out


def verify_with(session: Session, folder: Path | None) -> tuple[Any, CheckpointReport | None]:
    """The audit verification (ledger.store.audit.verify) and, with ``folder``, the check of
    its checkpoints, in one read."""
    from ledger.store.audit import verify

    result = verify(session)
    return result, (check(session, folder) if folder is not None else None)
