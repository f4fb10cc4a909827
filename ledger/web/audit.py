"""The audit trail page: events filtered and paged, newest first, each change in words, and
on request the chain's check (the services of ``fluxledger audit show`` and ``audit verify``).

Any signed-in user may read it, as anyone who may read the logbook may run ``audit show``."""

from __future__ import annotations

from typing import Any
from urllib.parse import urlencode

from starlette.responses import Response
from starlette.routing import Route

from ledger.errors import InputError
from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint, field_errors

PAGE_SIZE = 100
FILTERS = ("user", "action", "entity", "module", "run", "since", "until")
# Errors of the services name their own field; on this page it is the filter's box.
BOXES = {"serial": "module"}


@endpoint
async def audit_page(v: Visit) -> Response:
    """GET /audit[?user=&action=&entity=&module=&run=&since=&until=&page=][&verify=1]
    [&format=json]: the trail, 100 events a page; ``verify=1`` also checks the chain."""
    from ledger.entries.audit_filters import trail_query
    from ledger.logbook.audit_trail import chain_state, choices, trail
    from ledger.logbook.site import site_zone

    v.require_user()
    q = v.request.query_params
    typed = {k: q.get(k, "") for k in (*FILTERS, "page")}
    verify = q.get("verify") == "1"

    def work(session: Any, user: Any) -> tuple[Any, Any, Any]:
        query = trail_query(typed, site_zone(session))
        offset = (query.page - 1) * PAGE_SIZE
        found = trail(session, query.filter, limit=PAGE_SIZE, offset=offset)
        return found, choices(session), chain_state(session) if verify else None

    try:
        found, options, chain = await v.as_user(work)
    except InputError as err:
        err.field = BOXES.get(err.field or "", err.field)
        if v.wants_json():
            return v.json({"error": str(err), "field": err.field}, 400)
        options = await v.as_user(lambda s, u: choices(s))
        errors = field_errors(err)
        box = err.field or "_"
        # Beside its box the message need not name the option it comes from.
        errors[box] = errors[box].removeprefix(f"--{box}: ")
        return v.page(
            "audit.html", 400, found=None, options=options, chain=None, typed=typed,
            errors=errors, links={},
        )  # fmt: skip
    if v.wants_json():
        return v.json(
            {
                "events": plain(found.events),
                "total": found.total,
                "offset": found.offset,
                "page_size": PAGE_SIZE,
                "verification": plain(chain) if chain is not None else None,
            }
        )
    return v.page(
        "audit.html", found=found, options=options, chain=chain, typed=typed, errors={},
        links=_links(typed, found),
    )  # fmt: skip


def _links(typed: dict[str, str], found: Any) -> dict[str, str]:
    """The addresses of the newer and older pages, the check and the JSON twin of this view."""
    given = {k: typed[k] for k in FILTERS if typed.get(k)}
    page = found.offset // PAGE_SIZE + 1

    def at(**extra: object) -> str:
        query = urlencode({**given, **{k: str(x) for k, x in extra.items()}})
        return "/audit" + (f"?{query}" if query else "")

    links = {"first": at(), "verify": at(page=page, verify=1), "json": at(page=page, format="json")}
    if found.has_newer:
        links["newer"] = at(page=page - 1)
    if found.has_older:
        links["older"] = at(page=page + 1)
    return links


routes = [Route("/audit", audit_page)]
