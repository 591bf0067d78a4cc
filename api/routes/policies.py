"""Policy routes: threshold overrides for a device or a site."""

from __future__ import annotations

from typing import Annotated, Any

from fastapi import APIRouter
from fastapi import Path as PathParam

from tecfleet.analytics.errors import AlertError
from tecfleet.api.deps import Admin, EngineDep
from tecfleet.api.errors import ApiError, unprocessable
from tecfleet.api.schemas import KEYED, PolicyOut
from tecfleet.api.services import policies

router = APIRouter(tags=["alerts"])


@router.put(
    "/v1/alert-policies/{scope}/{name}",
    response_model=PolicyOut,
    responses=KEYED,
)
def policy_put(
    engine: EngineDep,
    who: Admin,
    scope: Annotated[str, PathParam(pattern="^(device|site)$")],
    name: str,
    thresholds: dict[str, Any],
) -> PolicyOut:
    """Threshold overrides for a device or a site (names of AlertPolicy fields)."""
    if not policies.within_sites(engine, who, scope, name):
        raise ApiError(403, "site_not_allowed", "the key may set policies only at its sites")
    try:
        return policies.set_policy(engine, who, scope, name, thresholds)
    except AlertError as exc:
        raise unprocessable("body", "thresholds", str(exc)) from exc
