"""Audit routes (admin of the whole fleet): the trail, newest first, and its CSV export."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter
from fastapi.responses import StreamingResponse

from tecfleet.api.deps import FLEET_ADMIN, EngineDep, LogLimit, time_bounds
from tecfleet.api.errors import unprocessable
from tecfleet.api.schemas import KEYED, Page, json_error_responses
from tecfleet.api.schemas.audit import AuditOut
from tecfleet.api.services import audit
from tecfleet.api.services.export import csv_stream

router = APIRouter(tags=["audit"])

_ACTION_HELP = "only this kind of change: " + ", ".join(audit.ACTIONS)


def _action(action: str | None) -> str | None:
    if action is not None and action not in audit.ACTIONS:
        raise unprocessable("query", "action", "unknown action")
    return action


@router.get(
    "/v1/audit",
    response_model=Page[AuditOut],
    dependencies=[FLEET_ADMIN],
    responses=KEYED,
)
def audit_list(
    engine: EngineDep,
    action: str | None = None,
    start: str | None = None,
    end: str | None = None,
    limit: LogLimit = 100,
    cursor: str | None = None,
) -> dict[str, Any]:
    """Who changed what and when, newest first."""
    bounds = time_bounds(start, end)
    items, next_cursor = audit.list_entries(
        engine,
        limit,
        cursor,
        action=_action(action),
        start_ms=bounds.start_ms,
        end_ms=bounds.end_ms,
    )
    return {"items": items, "next_cursor": next_cursor}


@router.get(
    "/v1/audit/export.csv",
    dependencies=[FLEET_ADMIN],
    response_class=StreamingResponse,
    responses={
        200: {
            "description": "The trail oldest first as CSV (RFC 4180); `detail` holds JSON.",
            "content": {"text/csv": {"schema": {"type": "string"}}},
        },
        **json_error_responses(401, 403, 503),
    },
)
def audit_export(
    engine: EngineDep, action: str | None = None, start: str | None = None, end: str | None = None
) -> StreamingResponse:
    """The whole trail (or a range of it) as CSV, streamed."""
    bounds = time_bounds(start, end)
    rows = audit.export_rows(
        engine, action=_action(action), start_ms=bounds.start_ms, end_ms=bounds.end_ms
    )
    return StreamingResponse(
        csv_stream(audit.EXPORT_COLUMNS, rows),
        media_type="text/csv",
        headers={"Content-Disposition": 'attachment; filename="audit.csv"'},
    )
