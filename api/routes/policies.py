"""Policy routes: threshold overrides for a device or a site."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter
from fastapi import Path as PathParam

from tecfleet.analytics.errors import AlertError
from tecfleet.api.deps import ADMIN, EngineDep
from tecfleet.api.errors import unprocessable
from tecfleet.api.schemas import KEYED, PolicyOut
from tecfleet.api.services import policies

router = APIRouter(tags=["alerts"])


@router.put(
    "/v1/alert-policies/{scope}/{name}",
    response_model=PolicyOut,
    dependencies=[ADMIN],
    responses=KEYED,
)
def policy_put(
    engine: EngineDep,
    scope: Annotated[str, PathParam(pattern="^(device|site)$")],
    name: str,
    thresholds: dict[str, Any],
) -> PolicyOut:
    """Threshold overrides for a device or a site (names of AlertPolicy fields)."""
    try:
        return policies.set_policy(engine, scope, name, thresholds)
    except AlertError as exc:
        raise unprocessable("body", "thresholds", str(exc)) from exc
