"""Shapes shared by every resource: the page of a list and the documented error answers."""

from __future__ import annotations

from typing import Any, Generic, TypeVar

from pydantic import BaseModel

T = TypeVar("T")


class Page(BaseModel, Generic[T]):
    """Every list answers one page and the cursor of the next (null on the last)."""

    items: list[T]
    next_cursor: str | None


class ErrorOut(BaseModel):
    """An error answer: what went wrong, in words."""

    detail: str


_ERRORS: dict[int, dict[str, Any]] = {
    401: {"model": ErrorOut, "description": "No key, or an unknown or revoked one."},
    403: {"model": ErrorOut, "description": "The key's scope is too small for this route."},
    404: {"model": ErrorOut, "description": "The device, alert or webhook is not known."},
    503: {"model": ErrorOut, "description": "The database is unavailable."},
}


def error_responses(*codes: int) -> dict[int | str, dict[str, Any]]:
    """The ``responses`` argument of a route that can answer with these error codes.

    422 is not listed: FastAPI documents it on every route that takes parameters or a body,
    and the handlers' own 422 answers use the same shape.
    """
    return {code: _ERRORS[code] for code in codes}


def json_error_responses(*codes: int) -> dict[int | str, dict[str, Any]]:
    """``error_responses`` for a route whose success is not JSON: the errors still are.

    Named by reference, since FastAPI files a ``model`` under the route's own media type;
    ``ErrorOut`` is in the document through the routes that use ``error_responses``.
    """
    ref = {"$ref": "#/components/schemas/ErrorOut"}
    return {
        code: {
            "description": _ERRORS[code]["description"],
            "content": {"application/json": {"schema": ref}},
        }
        for code in codes
    }


#: Errors of a route behind a key, and of one that also names a device, alert or webhook.
KEYED = error_responses(401, 403, 503)
KEYED_LOOKUP = error_responses(401, 403, 404, 503)
