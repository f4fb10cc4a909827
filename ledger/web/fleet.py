"""The fleet page: every module, most urgent first (the service of ``fluxledger fleet``)."""

from __future__ import annotations

from starlette.responses import Response
from starlette.routing import Route

from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint


@endpoint
async def fleet_page(v: Visit) -> Response:
    """GET /fleet[?type=T&product=P][&format=json]."""
    from ledger.logbook.fleet import fleet

    v.require_user()
    q = v.request.query_params
    type_code, product = q.get("type") or None, q.get("product") or None
    rows = await v.read(lambda s: fleet(s, type_code, product))
    if v.wants_json():
        return v.json({"fleet": plain(rows)})
    return v.page("fleet.html", rows=rows, type_code=type_code or "", product=product or "")


routes = [Route("/fleet", fleet_page)]
