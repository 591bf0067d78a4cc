"""Reject routes: payloads that could not be stored, newest first."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter

from tecfleet.api.deps import FLEET_READ, EngineDep, PageLimit
from tecfleet.api.schemas import KEYED, Page, RejectOut
from tecfleet.api.services import rejects

router = APIRouter(tags=["rejects"])


@router.get(
    "/v1/rejects", response_model=Page[RejectOut], dependencies=[FLEET_READ], responses=KEYED
)
def rejects_list(
    engine: EngineDep, limit: PageLimit = 100, cursor: str | None = None
) -> dict[str, Any]:
    """Payloads that could not be stored, newest first (keys of every site only)."""
    items, next_cursor = rejects.list_rejects(engine, limit, cursor)
    return {"items": items, "next_cursor": next_cursor}
