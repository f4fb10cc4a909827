"""`fluxledger record ...`: batch records — print, sign, correct, seal and verify them."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.describe import SITE_NOTE
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, read, read_secret
from ledger.errors import InputError

app = typer.Typer(
    help="Batch records: print the PDF, sign it (performed, verified, reviewed, approved), "
    "correct it as a new revision, seal it digitally, verify a printed file.",
    no_args_is_help=True,
)
RUN = typer.Argument(..., help="The run's number (see `fluxledger run list`).")
REVISION = typer.Option(
    None, "--revision", help="Which revision (default: the current one, else a draft)."
)


def _user(user: str | None, password_stdin: bool) -> str:
    if user:
        return user
    if password_stdin:
        return read_secret("User ID", from_stdin=True)
    return str(typer.prompt("User ID"))


def _out(out: Path | None, default: str) -> Path:
    path = out or Path(default)
    if path.is_dir():
        path = path / default
    if not path.parent.exists():
        raise InputError(
            f"--out {path}: the folder {path.parent} does not exist",
            field="out",
            value=str(path),
            expected="a file path in an existing folder",
        )
    return path


def _software() -> str:
    from ledger import __version__

    return __version__


def _file_name(ctx: Any, suffix: str = "") -> str:
    h = ctx.header
    rev = f"rev{h.revision}" if h.revision else "draft"
    return f"{h.record_id}-{rev}{suffix}.pdf"


@app.command("print")
@guarded
def print_record(
    run: int = RUN,
    revision: int | None = REVISION,
    out: Path | None = typer.Option(None, "--out", help="PDF file or folder (default: ./)."),
    no_charts: bool = typer.Option(False, "--no-charts", help="Leave the charts out."),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Write the batch record as PDF: the current revision with its signatures, or a draft."""
    from ledger.records.pdf import render, write_atomic
    from ledger.records.service import record_of

    issued = read(db, lambda s: record_of(s, run, revision))
    ctx = issued.context
    path = _out(out, _file_name(ctx))
    data = render(ctx, software_version=_software(), charts=not no_charts)
    write_atomic(path, data)
    _written(path, ctx, data, as_json)


def _written(path: Path, ctx: Any, data: bytes, as_json: bool, sealed: bool = False) -> None:
    import hashlib

    h = ctx.header
    info = {
        "file": str(path),
        "record": h.record_id,
        "revision": h.revision,
        "revision_sha256": ctx.sha256(),
        "signatures": [s.meaning for s in ctx.signatures if s.revision == h.revision],
        "bytes": len(data),
        "file_sha256": hashlib.sha256(data).hexdigest(),
        "sealed": sealed,
    }
    if as_json:
        import json

        typer.echo(json.dumps(info, ensure_ascii=False))
        return
    what = "draft (not issued for signature)" if not h.revision else f"revision {h.revision}"
    signed = ", ".join(info["signatures"]) or "none"
    typer.echo(
        f"{path}: {h.record_id} {what}, {len(data):,} bytes; signatures: {signed}"
        + ("; digitally sealed" if sealed else "")
    )
    typer.echo(SITE_NOTE)


@app.command("sign")
@guarded
def sign(
    run: int = RUN,
    meaning: str = typer.Option(
        ...,
        "--meaning",
        help="What your signature means: performed, verified, reviewed or "
        "approved (in the master record's order).",
    ),
    user: str | None = typer.Option(
        None,
        "--user",
        help="Your user ID (asked for when not given); the password is always asked for.",
    ),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Sign the run's record with your user ID and password (21 CFR 11.200).

    The first signature issues the revision: its content is frozen and hashed, and every
    signature stores that hash. The last signature of the master record (approval) locks the
    record. Approval is refused while a check is FAIL without a closed deviation, or MISSING.
    """
    from ledger.cli.session import acting_user, open_ledger
    from ledger.records.service import sign as do_sign
    from ledger.store.engine import transaction

    login = _user(user, password_stdin)
    engine = open_ledger(db)
    actor = acting_user(engine, login, password_stdin)
    with transaction(engine) as session:
        sig = do_sign(session, actor, run, meaning)
        from ledger.records.assemble import iso, record_id
        from ledger.store.tables import Run

        status = session.get(Run, run).status  # type: ignore[union-attr]
        info = {
            "signature": sig.id,
            "record": record_id(run),
            "revision": sig.revision,
            "meaning": sig.meaning,
            "user": sig.login,
            "name": sig.full_name,
            "role": sig.role,
            "signed_at": iso(sig.signed_at),
            "revision_sha256": sig.revision_sha256,
            "run_status": status,
        }
    if as_json:
        import json

        typer.echo(json.dumps(info, ensure_ascii=False))
        return
    typer.echo(
        f"{info['record']} revision {info['revision']} signed: {info['meaning']} by "
        f"{info['name']} ({info['user']}, {info['role']}) at {info['signed_at']}\n"
        f"revision SHA-256 {info['revision_sha256']}"
    )
    if status == "approved":
        typer.echo("the record is approved and locked; a correction makes a new revision")


@app.command("correct")
@guarded
def correct(
    run: int = RUN,
    reason: str = typer.Option(..., "--reason", help="Why the record must be corrected."),
    user: str = typer.Option(..., "--user", help="Your user ID; the password is asked for."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
) -> None:
    """Open a record in review or approved for correction (engineer or QA).

    The current revision is superseded and keeps its signatures; the run goes back to
    finished so its data can be corrected, and its next submission is signed as a new
    revision whose reason is REASON.
    """
    from ledger.cli.session import write
    from ledger.records.service import correct as do_correct

    write(db, user, password_stdin, lambda s, a: do_correct(s, a, run, reason))
    typer.echo(
        f"run {run} is open for correction; correct its data, then `fluxledger run "
        "submit` and sign the new revision"
    )


@app.command("show")
@guarded
def show(run: int = RUN, db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """List the record's revisions and signatures, and the signature that comes next."""
    from ledger.cli.output import Report, Table
    from ledger.records.assemble import iso, record_id, signature_rows
    from ledger.records.service import current_revision, revisions
    from ledger.runs.service import get_run, run_template

    def gather(s: Any) -> tuple[Any, ...]:
        r = get_run(s, run)
        return (
            r.status,
            run_template(r),
            revisions(s, run),
            current_revision(s, run),
            signature_rows(s, run),
        )

    status, template, revs, current, sigs = read(db, gather)
    report = Report(f"record {record_id(run)}", verdict=status.replace("_", " "))
    sec = report.section("Record")
    sec.add("run_status", status, "run status")
    sec.add("current_revision", current.number if current else None, "current revision")
    done = {x.meaning for x in sigs if current and x.revision == current.number}
    following = next((m for m in template.signatures if m not in done), None)
    if status in ("in_review",) and following:
        roles = " or ".join(template.signers.get(following, ()))
        sec.add("next_signature", f"{following} (by {roles})", "next signature")
    t = Table(
        "Revisions",
        [
            ("number", "revision"),
            ("reason", "reason"),
            ("issued_at", "issued"),
            ("sha256", "SHA-256"),
            ("superseded", "superseded"),
        ],
    )
    for r in revs:
        t.rows.append(
            [
                r.number,
                r.reason,
                iso(r.as_of),
                r.sha256,
                f"{iso(r.superseded_at)}: {r.superseded_reason}" if r.superseded_at else None,
            ]
        )
    report.tables.append(t)
    t = Table(
        "Signatures",
        [
            ("revision", "rev"),
            ("meaning", "meaning"),
            ("login", "user"),
            ("name", "name"),
            ("signed_at", "signed"),
            ("revision_sha256", "signed hash"),
        ],
    )
    for x in sigs:
        t.rows.append([x.revision, x.meaning, x.login, x.full_name, x.signed_at, x.revision_sha256])
    report.tables.append(t)
    report.print(as_json)


@app.command("seal")
@guarded
def seal(
    run: int = RUN,
    key: Path = typer.Option(
        ..., "--key", help="PKCS#12 file (.p12/.pfx), or a PEM key with --cert."
    ),
    cert: Path | None = typer.Option(None, "--cert", help="PEM certificate for a PEM --key."),
    key_password_stdin: bool = typer.Option(
        False, "--key-password-stdin", help="Read the key's password from standard input."
    ),
    tsa: str | None = typer.Option(
        None,
        "--tsa",
        help="RFC 3161 time-stamp authority URL (PAdES B-T); default "
        "$FLUXLEDGER_TSA_URL, else none (B-B).",
    ),
    revision: int | None = REVISION,
    out: Path | None = typer.Option(None, "--out", help="PDF file or folder (default: ./)."),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Print the approved record and seal the file digitally (PAdES, pyHanko)."""
    from ledger.errors import RefusedError
    from ledger.records.pdf import render, write_atomic
    from ledger.records.seal import seal as do_seal
    from ledger.records.service import record_of

    issued = read(db, lambda s: record_of(s, run, revision))
    ctx = issued.context
    signed = {s.meaning for s in ctx.signatures if s.revision == ctx.header.revision}
    if issued.revision is None or not set(ctx.required_signatures) <= signed:
        raise RefusedError(
            f"{ctx.header.record_id} revision {ctx.header.revision} is not approved: only a "
            "fully signed revision is sealed",
            field="run",
            value=run,
        )
    password = read_secret("Key password", from_stdin=key_password_stdin)
    data = render(ctx, software_version=_software())
    sealed = do_seal(
        data,
        key_file=key,
        cert_file=cert,
        passphrase=password.encode() or None,
        tsa_url=tsa or os.environ.get("FLUXLEDGER_TSA_URL") or None,
        reason=f"Batch record {ctx.header.record_id} revision {ctx.header.revision}, approved",
    )
    path = _out(out, _file_name(ctx, "-sealed"))
    write_atomic(path, sealed)
    _written(path, ctx, sealed, as_json, sealed=True)


@app.command("verify")
@guarded
def verify(
    file: Path = typer.Argument(..., help="A batch-record PDF printed by fluxledger."),
    trust: list[Path] = typer.Option(
        [], "--trust", help="A certificate (PEM or DER) the seal must chain to; repeatable."
    ),
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Check a record file against the database: seal, file content, revision, signatures and
    audit trail. Exit 1 naming each problem."""
    from ledger.cli.output import Report
    from ledger.records.verify import verify_file

    try:
        data = file.read_bytes()
    except OSError as exc:
        raise InputError(
            f"cannot read {file}: {exc.strerror}",
            field="file",
            value=str(file),
            expected="a readable PDF file",
        ) from None
    result = read(db, lambda s: verify_file(s, data, trust=trust))
    report = Report("record verify", verdict="verified" if result.ok else "PROBLEMS FOUND")
    sec = report.section("File")
    sec.add("file", str(file))
    sec.add("record", result.record)
    sec.add("revision", result.revision)
    for title, items in (
        ("Passed", result.passed),
        ("Problems", result.problems),
        ("Notes", result.notes),
    ):
        if items:
            s = report.section(title)
            for i, text in enumerate(items, start=1):
                s.add(f"{title.lower()}_{i}", text, str(i))
    report.print(as_json)
    if not result.ok:
        raise typer.Exit(1)
