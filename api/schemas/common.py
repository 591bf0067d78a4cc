"""Shapes shared by every resource: the page of a list and the documented error answers."""

from __future__ import annotations

from typing import Any, Generic, TypeVar

from pydantic import BaseModel, Field

T = TypeVar("T")


class Page(BaseModel, Generic[T]):
    """Every list answers one page and the cursor of the next (null on the last)."""

    items: list[T]
    next_cursor: str | None


class FieldErrorOut(BaseModel):
    """One problem with the input: where it is and what is wrong."""

    code: str = Field(description="machine code of the problem")
    message: str
    field: str | None = Field(None, description="dotted name of the offending field")
    location: str | None = Field(None, description="body, query, path or header")


class ErrorOut(BaseModel):
    """Every error answer: a machine code, a sentence, and the offending field if any."""

    code: str = Field(description="machine code, stable across versions")
    message: str = Field(description="one sentence a person can act on")
    field: str | None = Field(None, description="dotted name of the offending field")
    location: str | None = Field(None, description="body, query, path or header")
    errors: list[FieldErrorOut] = Field(default_factory=list, description="every problem found")


def _example(code: str, message: str, field: str | None = None, where: str | None = None) -> Any:
    problem = {"code": code, "message": message, "field": field}
    if where is not None:
        problem["location"] = where
    return {
        "code": code,
        "message": message,
        "field": field,
        "location": where,
        "errors": [problem],
    }


#: Error answers by status: description and an example of the body.
ERROR_EXAMPLES: dict[int, tuple[str, Any]] = {
    401: (
        "No key, or an unknown, revoked or expired one.",
        _example("key_missing", "missing API key: send Authorization: Bearer <key>"),
    ),
    403: (
        "The key's scope is too small, or the key is limited to other sites.",
        _example("scope_too_small", "this route needs a key with scope 'write'"),
    ),
    404: (
        "The device, alert, webhook, key or offset is not known (or not on the key's sites).",
        _example("not_found", "device 'cab-1' is not known"),
    ),
    413: (
        "The request body is larger than the service accepts.",
        _example("body_too_large", "the request body is over 1048576 bytes"),
    ),
    422: (
        "Invalid input; ``field`` names the first offending field, ``errors`` every one.",
        _example(
            "invalid_input", "limit: Input should be less than or equal to 1000", "limit", "query"
        ),
    ),
    429: (
        "The key made too many requests; ``Retry-After`` says when to try again.",
        _example("rate_limited", "over 600 requests per minute; retry after 12 s"),
    ),
    500: (
        "The service failed; the failure is logged, no detail is given out.",
        _example("internal_error", "the service failed to answer; the failure is logged"),
    ),
    503: (
        "The database is unavailable.",
        _example("store_unavailable", "the database is unavailable; try again shortly"),
    ),
}

_ERRORS: dict[int, dict[str, Any]] = {
    code: {
        "model": ErrorOut,
        "description": text,
        "content": {"application/json": {"example": example}},
    }
    for code, (text, example) in ERROR_EXAMPLES.items()
}


def error_responses(*codes: int) -> dict[int | str, dict[str, Any]]:
    """The ``responses`` argument of a route that can answer with these error codes.

    422, 413, 429 and 500 are added to every route they apply to by
    :func:`tecfleet.api.schemas.openapi.finish_document`.
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
            "description": ERROR_EXAMPLES[code][0],
            "content": {"application/json": {"schema": ref, "example": ERROR_EXAMPLES[code][1]}},
        }
        for code in codes
    }


#: Errors of a route behind a key, and of one that also names a device, alert or webhook.
KEYED = error_responses(401, 403, 503)
KEYED_LOOKUP = error_responses(401, 403, 404, 503)
