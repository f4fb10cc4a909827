"""Batch-record review and signing: the records waiting for a signature, one record with
its review by exception first, its PDF as a numbered controlled copy, and a signature with
the password typed again (the services of ``fluxledger record review``, ``record show``,
``record print`` and ``record sign``; every rule, role included, is theirs)."""

from __future__ import annotations

from typing import Any

from starlette.concurrency import run_in_threadpool
from starlette.responses import Response
from starlette.routing import Route

from ledger.errors import LedgerError, RefusedError
from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint

# The form field beside which an error of the service is shown ("_": above the form).
FIELDS = {"password": "password", "meaning": "meaning"}


def _run_id(v: Visit) -> int:
    return int(v.request.path_params["run_id"])


@endpoint
async def record_list_page(v: Visit) -> Response:
    """GET /records[?format=json]: records awaiting review or signature, then approved ones."""
    from ledger.records.desk import record_list

    v.require_user()
    waiting, approved = await v.read(record_list)
    if v.wants_json():
        return v.json({"awaiting": plain(waiting), "approved": plain(approved)})
    return v.page("record_list.html", waiting=waiting, approved=approved)


async def _desk(v: Visit, run_id: int, login: str | None = None) -> Any:
    """The record for the signed-in user (their account read again), or — after a failed
    signature, when the account may just have been locked — for the session's user."""
    from ledger.records.desk import desk

    if login is None:
        return await v.as_user(lambda s, a: desk(s, run_id, a.login, a.full_name, a.role))
    name, role = v.full_name or login, v.role or ""
    return await v.read(lambda s: desk(s, run_id, login, name, role))


def _twin(d: Any) -> dict[str, Any]:
    record = plain(d.context)
    # The charts' series are in the PDF; the page and its twin show the numbers.
    record["charts"] = [s["title"] for s in record["charts"]]
    return {
        "record_id": d.context.header.record_id,
        "revision": d.signing.revision,
        "issued": d.signing.issued,
        "revision_sha256": d.signing.sha256,
        "review": record["review"],
        "checks": record["checks"],
        "signing": plain(d.signing),
        "overview": plain(d.overview),
        "record": record,
    }


def _review(
    v: Visit, d: Any, status: int = 200, errors: dict[str, str] | None = None,
    chosen: str | None = None,
) -> Response:  # fmt: skip
    return v.page("record_review.html", status, d=d, ctx=d.context, s=d.signing,
                  errors=errors or {}, chosen=chosen or d.signing.default or "")  # fmt: skip


@endpoint
async def review_page(v: Visit) -> Response:
    """GET /records/{run_id}[?format=json]: the exceptions first, then the whole record,
    then the signing form."""
    d = await _desk(v, _run_id(v))
    if v.wants_json():
        return v.json(_twin(d))
    return _review(v, d)


@endpoint
async def sign_record(v: Visit) -> Response:
    """POST /records/{run_id}/sign (meaning, password): ``record sign`` with the password
    typed again; the receipt follows (303), or the review page with the error beside its
    field and nothing signed."""
    from ledger.logbook.workspace import sign_with_password
    from ledger.records.queries import signature_receipt
    from ledger.records.service import sign

    # Before the form: a session that timed out goes to sign-in, its token no longer valid.
    login = v.require_user()
    run_id = _run_id(v)
    form = await v.form()
    meaning = form.get("meaning", "").strip()
    password = form.get("password", "")

    def work(s: Any, a: Any) -> dict[str, Any]:
        return signature_receipt(s, sign(s, a, run_id, meaning))

    try:
        info = await run_in_threadpool(sign_with_password, v.app.engine, login, password, work)
    except LedgerError as err:
        status = 403 if isinstance(err, RefusedError) else 400
        if v.wants_json():
            return v.json({"error": str(err), "field": err.field}, status)
        d = await _desk(v, run_id, login)
        errors = {FIELDS.get(err.field or "", "_"): str(err)}
        return _review(v, d, status, errors, meaning)
    if v.wants_json():
        return v.json(info)
    return v.redirect(f"/records/{run_id}/signatures/{info['signature']}")


@endpoint
async def sign_again(v: Visit) -> Response:
    """GET /records/{run_id}/sign (e.g. after signing in again): the signing form."""
    v.require_user()
    return v.redirect(f"/records/{_run_id(v)}#sign")


@endpoint
async def receipt_page(v: Visit) -> Response:
    """GET /records/{run_id}/signatures/{signature_id}[?format=json]: what was signed."""
    from ledger.records.desk import receipt

    v.require_user()
    run_id, number = _run_id(v), int(v.request.path_params["signature_id"])
    info = await v.read(lambda s: receipt(s, run_id, number))
    if v.wants_json():
        return v.json(info)
    return v.page("record_signed.html", r=info, run_id=run_id)


@endpoint
async def record_pdf(v: Visit) -> Response:
    """POST /records/{run_id}/pdf: a numbered, audited controlled copy as ``record print``
    writes it (the current revision with its signatures, or a draft). A POST, because each
    copy is a write: a prefetch or a reload of a GET must not number new copies."""
    from ledger import __version__
    from ledger.records import copies
    from ledger.records.pdf import render
    from ledger.records.service import record_of

    run_id = _run_id(v)
    v.require_user()
    await v.form()

    def work(s: Any, a: Any) -> tuple[str, bytes]:
        issued = record_of(s, run_id)
        ctx = issued.context
        issue = issued.revision.as_of if issued.revision else None
        names: list[str] = []

        def name(copy: Any) -> str:
            names.append(copies.copy_file_name(ctx, copy))
            return names[-1]

        def produce(copy: Any) -> bytes:
            return render(ctx, software_version=__version__, issued=issue, copy=copy)

        _, data = copies.make_copy(s, a, run_id, issued, "print", name=name, produce=produce)
        return names[-1], data

    name, data = await v.write(work)
    return Response(
        data,
        media_type="application/pdf",
        headers={"content-disposition": f'attachment; filename="{name}"'},
    )


routes = [
    Route("/records", record_list_page),
    Route("/records/{run_id:int}", review_page),
    Route("/records/{run_id:int}/pdf", record_pdf, methods=["POST"]),
    Route("/records/{run_id:int}/sign", sign_record, methods=["POST"]),
    Route("/records/{run_id:int}/sign", sign_again, methods=["GET"]),
    Route("/records/{run_id:int}/signatures/{signature_id:int}", receipt_page),
]
