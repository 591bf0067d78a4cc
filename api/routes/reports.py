"""Report routes: the printable cold-chain report of a unit or a site, as PDF."""

from __future__ import annotations

import io

from fastapi import APIRouter, Response

from tecfleet.api.deps import EngineDep, Reader
from tecfleet.api.errors import ApiError, unprocessable
from tecfleet.api.report import write_report
from tecfleet.api.schemas.common import json_error_responses
from tecfleet.ingest.db import sites as sites_db

router = APIRouter(tags=["reports"])


@router.get(
    "/v1/reports/cold-chain.pdf",
    response_class=Response,
    responses={
        200: {
            "content": {"application/pdf": {"schema": {"type": "string", "format": "binary"}}},
            "description": "the report (PDF)",
        },
        **json_error_responses(401, 403, 404, 503),
    },
)
def cold_chain_report(
    engine: EngineDep,
    who: Reader,
    start: str,
    end: str,
    device: str | None = None,
    site: str | None = None,
) -> Response:
    """The cold-chain report of one unit (``device``) or every unit of a ``site`` from
    ``start`` to ``end`` (dates, the end day included, or RFC 3339 times)."""
    if (device is None) == (site is None):
        raise unprocessable("query", "device", "give exactly one of device and site")
    if who.sites is not None:
        site = site if device is None else sites_db.device_site(engine, device)
        if site is not sites_db.UNKNOWN and not who.sees_site(site):
            raise ApiError(404, "not_found", f"{device or site!r} is not known")
    out = io.BytesIO()
    try:
        write_report(engine, out, start, end, device_id=device, site=site)
    except ValueError as exc:
        raise unprocessable("query", "start", str(exc)) from exc
    name = (device or site or "report").replace('"', "")
    return Response(
        out.getvalue(),
        media_type="application/pdf",
        headers={"Content-Disposition": f'attachment; filename="cold-chain-{name}.pdf"'},
    )
