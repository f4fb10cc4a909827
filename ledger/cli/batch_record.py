"""`fluxledger record ...`: batch records — print, sign, correct, seal, archive and verify them."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

import typer

from ledger.cli.common import JSON_OPTION, guarded
from ledger.cli.session import DB_OPTION, PASSWORD_STDIN, read, read_secret
from ledger.errors import InputError
from ledger.rules.signing import MEANINGS

app = typer.Typer(
    help=f"Batch records: print the PDF, sign it ({', '.join(MEANINGS)}), "
    "correct it as a new revision, seal it digitally, archive it as PDF/A-3b, verify a "
    "printed file.",
    no_args_is_help=True,
)
RUN = typer.Argument(..., help="The run's number (see `fluxledger run list`).")
REVISION = typer.Option(
    None, "--revision", help="Which revision (default: the current one, else a draft)."
)
FORCE = typer.Option(False, "--force", help="Overwrite the file if it exists.")


def _user(user: str | None, password_stdin: bool) -> str:
    if user:
        return user
    if password_stdin:
        return read_secret("User ID", from_stdin=True)
    return str(typer.prompt("User ID"))


def _out(out: Path | None, default: str, force: bool) -> Path:
    """The file to write: ``out``, or ``default`` in the folder ``out`` (or ./); an existing
    file is overwritten only with --force."""
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
    if path.exists() and not force:
        raise InputError(
            f"--out {path}: the file exists; nothing was written",
            field="out",
            value=str(path),
            expected="a file name not yet taken, or --force to overwrite it",
        )
    return path


def _software() -> str:
    from ledger import __version__

    return __version__


PRINT_USER = typer.Option(
    None,
    "--user",
    help="Your user ID (asked for when not given); the password is always asked for: every "
    "copy is numbered and audited.",
)


def _make_copy(
    db: str | None,
    login: str,
    password_stdin: bool,
    work: Any,
) -> tuple[Any, Any, Path, bytes]:
    """Run ``work(session, actor)`` -> (issued, copy, staged file, bytes) as one audited write,
    then put the staged file in place: a file under its final name is a registered copy."""
    from ledger.cli.session import write

    staged: list[Any] = []
    try:
        issued, copy, file, data = write(db, login, password_stdin,
                                         lambda s, a: work(s, a, staged))  # fmt: skip
    except BaseException:
        for f in staged:
            f.discard()
        raise
    file.place()
    return issued, copy, file.path, data


@app.command("print")
@guarded
def print_record(
    run: int = RUN,
    revision: int | None = REVISION,
    out: Path | None = typer.Option(None, "--out", help="PDF file or folder (default: ./)."),
    no_charts: bool = typer.Option(False, "--no-charts", help="Leave the charts out."),
    force: bool = FORCE,
    user: str | None = PRINT_USER,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Write a controlled copy of the batch record as PDF: the current revision with its
    signatures, or a draft. Each copy is numbered and audited; a revision not fully signed
    carries its state on every page and in the file name. An existing file is kept unless
    --force is given (and then no copy is registered)."""
    from ledger.records import copies
    from ledger.records.pdf import Staged, render
    from ledger.records.service import record_of

    def work(s: Any, a: Any, staged: list[Any]) -> tuple[Any, Any, Any, bytes]:
        issued = record_of(s, run, revision)
        ctx = issued.context
        issue = issued.revision.as_of if issued.revision else None
        paths: list[Path] = []

        def name(copy: Any) -> str:
            paths.append(_out(out, copies.copy_file_name(ctx, copy), force))
            return paths[-1].name

        def produce(copy: Any) -> bytes:
            return render(ctx, software_version=_software(), charts=not no_charts,
                          issued=issue, copy=copy)  # fmt: skip

        copy, data = copies.make_copy(s, a, run, issued, "print", name=name, produce=produce)
        staged.append(Staged(paths[-1], data))
        return issued, copy, staged[-1], data

    login = _user(user, password_stdin)
    issued, copy, path, data = _make_copy(db, login, password_stdin, work)
    _written(path, issued.context, copy, data, as_json)


def _written(
    path: Path,
    ctx: Any,
    copy: Any,
    data: bytes,
    as_json: bool,
    sealed: bool = False,
    archived: bool = False,
) -> None:
    import hashlib

    h = ctx.header
    info = {
        "file": str(path),
        "record": h.record_id,
        "revision": h.revision,
        "revision_sha256": ctx.sha256(),
        "copy": copy.number,
        "state": copy.state,
        "signatures": list(copy.meanings),
        "bytes": len(data),
        "file_sha256": hashlib.sha256(data).hexdigest(),
        "sealed": sealed,
    }
    if archived:
        info["archive"] = "PDF/A-3b, record.json attached"
    if as_json:
        import json

        typer.echo(json.dumps(info, ensure_ascii=False))
        return
    what = "draft (not issued for signature)" if not h.revision else f"revision {h.revision}"
    signed = ", ".join(info["signatures"]) or "none"
    typer.echo(
        f"{path}: {h.record_id} {what}, copy {copy.number} ({copy.state}), {len(data):,} "
        f"bytes; signatures: {signed}"
        + ("; digitally sealed" if sealed else "")
        + ("; archive copy (PDF/A-3b, record.json attached)" if archived else "")
    )


@app.command("sign")
@guarded
def sign(
    run: int = RUN,
    meaning: str = typer.Option(
        ...,
        "--meaning",
        help=f"What your signature means: {', '.join(MEANINGS[:-1])} or {MEANINGS[-1]} "
        "(in the master record's order).",
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
    from ledger.cli.session import write
    from ledger.records.queries import signature_receipt
    from ledger.records.service import sign as do_sign

    login = _user(user, password_stdin)
    info = write(
        db, login, password_stdin, lambda s, a: signature_receipt(s, do_sign(s, a, run, meaning))
    )
    if as_json:
        import json

        typer.echo(json.dumps(info, ensure_ascii=False))
        return
    typer.echo(
        f"{info['record']} revision {info['revision']} signed: {info['meaning']} by "
        f"{info['name']} ({info['user']}, {info['role']}) at {info['signed_at']}\n"
        f"revision SHA-256 {info['revision_sha256']}"
    )
    if info["run_status"] == "approved":
        typer.echo("the record is approved and locked; a correction makes a new revision")


@app.command("correct")
@guarded
def correct(
    run: int = RUN,
    reason: str = typer.Option(..., "--reason", help="Why the record must be corrected."),
    user: str = typer.Option(..., "--user", help="Your user ID; the password is asked for."),
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Open a record in review or approved for correction (engineer or QA).

    The current revision is superseded and keeps its signatures; the run goes back to
    finished so its data can be corrected, and its next submission is signed as a new
    revision whose reason is REASON.
    """
    from ledger.cli.session import write
    from ledger.records.queries import correction_receipt
    from ledger.records.service import correct as do_correct

    info = write(
        db, user, password_stdin, lambda s, a: correction_receipt(do_correct(s, a, run, reason))
    )
    if as_json:
        import json

        typer.echo(json.dumps(info, ensure_ascii=False))
        return
    typer.echo(
        f"run {run} is open for correction; correct its data, then `fluxledger run "
        "submit` and sign the new revision"
    )


@app.command("review")
@guarded
def review(
    run: int = RUN,
    revision: int | None = REVISION,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """What a reviewer must look at first: failed or missing checks, deviations, overrides,
    late entries, voids and corrections, import warnings, log against run times."""
    from ledger.cli.output import Report
    from ledger.records.service import record_of

    issued = read(db, lambda s: record_of(s, run, revision))
    ctx = issued.context
    found = sum(len(t.findings) for t in ctx.review)
    which = f"revision {ctx.header.revision}" if issued.revision else "draft"
    report = Report(
        f"record review {ctx.header.record_id} ({which})",
        verdict=f"{found} to look at" if found else "nothing to look at",
    )
    if not ctx.review:
        report.section("Review").add(
            "note", "this revision was issued before records carried a review summary"
        )
    for t in ctx.review:
        sec = report.section(t.topic.capitalize())
        key = t.topic.replace(" ", "_")
        if not t.findings:
            sec.add(key, "none", "found")
        for i, f in enumerate(t.findings, start=1):
            sec.add(f"{key}_{i}", f, f"{i}")
    report.print(as_json)


@app.command("show")
@guarded
def show(run: int = RUN, db: str | None = DB_OPTION, as_json: bool = JSON_OPTION) -> None:
    """List the record's revisions and signatures, and the signature that comes next."""
    from ledger.cli.output import Report, Table
    from ledger.records.queries import overview

    o = read(db, lambda s: overview(s, run))
    report = Report(f"record {o.record}", verdict=o.run_status.replace("_", " "))
    sec = report.section("Record")
    sec.add("run_status", o.run_status, "run status")
    sec.add("current_revision", o.current_revision, "current revision")
    if o.next_signature:
        roles = " or ".join(o.next_signers)
        sec.add("next_signature", f"{o.next_signature} (by {roles})", "next signature")
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
    for r in o.revisions:
        t.rows.append(
            [
                r.number,
                r.reason,
                r.issued_at,
                r.sha256,
                f"{r.superseded_at}: {r.superseded_reason}" if r.superseded_at else None,
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
    for x in o.signatures:
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
    force: bool = FORCE,
    user: str | None = PRINT_USER,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Print the approved record as a numbered, audited copy and seal the file digitally
    (PAdES, pyHanko). Your password is asked for first, then the key's. An existing file is
    kept unless --force is given (and then no copy is registered)."""
    from ledger.records import copies
    from ledger.records.pdf import Staged, render
    from ledger.records.seal import seal as do_seal
    from ledger.records.service import approved_record

    read(db, lambda s: approved_record(s, run, revision))  # refused before any password
    login = _user(user, password_stdin)

    def work(s: Any, a: Any, staged: list[Any]) -> tuple[Any, Any, Any, bytes]:
        # Asked before the session's first statement, so the prompt holds no lock.
        password = read_secret("Key password", from_stdin=key_password_stdin)
        issued = approved_record(s, run, revision)
        ctx = issued.context
        issue = issued.revision.as_of if issued.revision else None
        paths: list[Path] = []

        def name(copy: Any) -> str:
            paths.append(_out(out, copies.copy_file_name(ctx, copy, "-sealed"), force))
            return paths[-1].name

        def produce(copy: Any) -> bytes:
            return do_seal(
                render(ctx, software_version=_software(), issued=issue, copy=copy),
                key_file=key,
                cert_file=cert,
                passphrase=password.encode() or None,
                tsa_url=tsa or os.environ.get("FLUXLEDGER_TSA_URL") or None,
                reason=f"Batch record {ctx.header.record_id} revision {ctx.header.revision}, "
                f"approved, copy {copy.number}",
            )

        copy, sealed = copies.make_copy(s, a, run, issued, "sealed", name=name, produce=produce)
        staged.append(Staged(paths[-1], sealed))
        return issued, copy, staged[-1], sealed

    issued, copy, path, data = _make_copy(db, login, password_stdin, work)
    _written(path, issued.context, copy, data, as_json, sealed=True)


@app.command("archive")
@guarded
def archive(
    run: int = RUN,
    revision: int | None = REVISION,
    out: Path | None = typer.Option(None, "--out", help="PDF file or folder (default: ./)."),
    force: bool = FORCE,
    user: str | None = PRINT_USER,
    password_stdin: bool = PASSWORD_STDIN,
    db: str | None = DB_OPTION,
    as_json: bool = JSON_OPTION,
) -> None:
    """Write the approved record as a numbered, audited archive copy: PDF/A-3b, with the
    record's content and signatures attached as record.json. An existing file is kept unless
    --force is given (and then no copy is registered)."""
    from ledger.records import copies
    from ledger.records.archive import archive_copy
    from ledger.records.pdf import Staged
    from ledger.records.service import approved_record

    read(db, lambda s: approved_record(s, run, revision))  # refused before any password
    login = _user(user, password_stdin)

    def work(s: Any, a: Any, staged: list[Any]) -> tuple[Any, Any, Any, bytes]:
        issued = approved_record(s, run, revision)
        ctx = issued.context
        paths: list[Path] = []

        def name(copy: Any) -> str:
            paths.append(_out(out, copies.copy_file_name(ctx, copy, "-archive"), force))
            return paths[-1].name

        def produce(copy: Any) -> bytes:
            return archive_copy(issued, copy, software_version=_software())

        copy, data = copies.make_copy(s, a, run, issued, "archive", name=name, produce=produce)
        staged.append(Staged(paths[-1], data))
        return issued, copy, staged[-1], data

    issued, copy, path, data = _make_copy(db, login, password_stdin, work)
    _written(path, issued.context, copy, data, as_json, archived=True)


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
    """Check a record file against the database: seal, file content, revision, signatures,
    the controlled copy and the audit trail. Exit 1 naming each problem: a copy that claims
    more than the database holds is one; a copy older than the current state is stated."""
    from ledger.cli.output import Report
    from ledger.records.verify import MAX_RECORD_BYTES, verify_file
    from ledger.userfiles import read_user_file

    data = read_user_file(file, "file", MAX_RECORD_BYTES)
    result = read(db, lambda s: verify_file(s, data, trust=trust))
    report = Report("record verify", verdict="verified" if result.ok else "PROBLEMS FOUND")
    sec = report.section("File")
    sec.add("file", str(file))
    sec.add("record", result.record)
    sec.add("revision", result.revision)
    if result.copy is not None:
        sec.add("copy", result.copy, "copy")
        sec.add("state", result.state, "state")
        sec.add("signatures", ", ".join(result.signatures) or "none", "signatures")
        if result.revision:
            sec.add("lacks", ", ".join(result.lacks) or "nothing", "lacks")
    for title, items in (("Passed", result.passed), ("Problems", result.problems)):
        if items:
            s = report.section(title)
            for i, text in enumerate(items, start=1):
                s.add(f"{title.lower()}_{i}", text, str(i))
    # Report notes, not a "Notes" section: in JSON a section of that name was overwritten.
    report.notes += result.notes
    report.print(as_json)
    if not result.ok:
        raise typer.Exit(1)
