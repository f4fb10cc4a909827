"""A module's wear history and its charts (the service of ``fluxledger history``)."""

from __future__ import annotations

from starlette.concurrency import run_in_threadpool
from starlette.responses import Response
from starlette.routing import Route

from ledger.web.show import plain
from ledger.web.visit import Visit, endpoint


async def _trend(v: Visit) -> object:
    from ledger.logbook.module_trend import module_trend

    v.require_user()
    serial = v.request.path_params["serial"]
    return await v.read(lambda s: module_trend(s, serial, None))


@endpoint
async def history_page(v: Visit) -> Response:
    """GET /modules/{serial}[?format=json]."""
    trend = await _trend(v)
    if v.wants_json():
        return v.json({"history": plain(trend)})
    from ledger.logbook.auth import RECORDERS

    # The links to the forms for the roles that may record; the services check again.
    return v.page("history.html", t=trend, may_record=v.role in RECORDERS)


@endpoint
async def history_chart(v: Visit) -> Response:
    """GET /modules/{serial}/charts.png: the same charts as ``history --png``."""
    from ledger.records.wear_report import history_drawing, png_bytes

    trend = await _trend(v)
    data = await run_in_threadpool(lambda: png_bytes(history_drawing(trend)))  # type: ignore[arg-type]
    return Response(data, media_type="image/png")


routes = [
    Route("/modules/{serial}", history_page),
    Route("/modules/{serial}/charts.png", history_chart),
]
