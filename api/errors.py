"""Exceptions of the API stage: requests that cannot be served and delivery that failed."""

from __future__ import annotations

from fastapi import HTTPException

from tecfleet.ingest.errors import TecfleetError

__all__ = ["CursorError", "WebhookError", "unprocessable"]


class WebhookError(TecfleetError):
    """A webhook cannot be registered or delivered (bad URL, refused address, HTTP failure)."""


class CursorError(TecfleetError, ValueError):
    """A page cursor that this service did not hand out, or that no longer decodes."""


def unprocessable(where: str, field: str, msg: str) -> HTTPException:
    """A 422 answer naming the field, in the shape of FastAPI's own validation errors."""
    return HTTPException(422, [{"loc": [where, field], "msg": msg, "type": "value_error"}])
