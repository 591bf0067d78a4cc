"""Exceptions of the API stage and the one JSON shape every error answer takes.

Every error answer is ``{"code", "message", "field", "location", "errors"}``: a machine code,
one sentence a person can act on, the offending field where there is one (``location`` says
whether it is in the body, the query, the path or a header), and for invalid input every
problem found. Unexpected failures answer 500 with the same shape and are logged here; no
answer ever carries a stack trace.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from http import HTTPStatus
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException as StarletteHTTPException

from tecfleet.ingest.errors import NotFoundError, StoreError, TecfleetError

__all__ = [
    "ApiError",
    "CursorError",
    "WebhookError",
    "error_body",
    "install_error_handlers",
    "unprocessable",
]

log = logging.getLogger("tecfleet.api")

#: Machine codes of answers not raised as :class:`ApiError` (Starlette's own 404/405 ...).
_CODE_BY_STATUS = {
    400: "bad_request",
    401: "key_missing",
    403: "scope_too_small",
    404: "not_found",
    405: "method_not_allowed",
    413: "body_too_large",
    415: "unsupported_media_type",
    422: "invalid_input",
    429: "rate_limited",
    500: "internal_error",
    503: "store_unavailable",
}
#: Where FastAPI's validation errors point, as the first element of their ``loc``.
_LOCATIONS = ("body", "query", "path", "header", "cookie")


class WebhookError(TecfleetError):
    """A webhook cannot be registered or delivered (bad URL, refused address, HTTP failure)."""


class CursorError(TecfleetError, ValueError):
    """A page cursor that this service did not hand out, or that no longer decodes."""


class ApiError(TecfleetError):
    """A request the API refuses, with the status and machine code of its answer."""

    def __init__(
        self,
        status: int,
        code: str,
        message: str,
        *,
        field: str | None = None,
        location: str | None = None,
        headers: dict[str, str] | None = None,
    ) -> None:
        super().__init__(message)
        self.status = status
        self.code = code
        self.message = message
        self.field = field
        self.location = location
        self.headers = headers or {}


def unprocessable(where: str, field: str, msg: str) -> ApiError:
    """A 422 answer naming the field and where it is (``body``, ``query``, ``path``)."""
    return ApiError(422, "invalid_input", f"{field}: {msg}", field=field, location=where)


def error_body(
    code: str,
    message: str,
    field: str | None = None,
    location: str | None = None,
    errors: Sequence[dict[str, Any]] = (),
) -> dict[str, Any]:
    """The JSON of an error answer (see the module's docstring)."""
    return {
        "code": code,
        "message": message,
        "field": field,
        "location": location,
        "errors": list(errors) or [{"code": code, "message": message, "field": field}],
    }


def _split_loc(loc: Sequence[Any]) -> tuple[str | None, str | None]:
    """``("body", "module", "i_max_a")`` -> (``"module.i_max_a"``, ``"body"``)."""
    parts = [str(p) for p in loc]
    location = parts.pop(0) if parts and parts[0] in _LOCATIONS else None
    return (".".join(parts) or None), location


async def _api_error(_request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, ApiError)
    body = error_body(exc.code, exc.message, exc.field, exc.location)
    return JSONResponse(body, status_code=exc.status, headers=exc.headers)


async def _invalid(_request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, RequestValidationError)
    problems = []
    for err in exc.errors():
        field, location = _split_loc(err.get("loc", ()))
        problems.append(
            {
                "code": str(err.get("type", "invalid")),
                "message": str(err.get("msg", "invalid value")),
                "field": field,
                "location": location,
            }
        )
    first: dict[str, Any] = (
        problems[0] if problems else {"field": None, "location": None, "message": "invalid"}
    )
    where = f"{first['field']}: " if first["field"] else ""
    body = error_body(
        "invalid_input", where + str(first["message"]), first["field"], first["location"], problems
    )
    return JSONResponse(body, status_code=422)


async def _http_error(_request: Request, exc: Exception) -> JSONResponse:
    assert isinstance(exc, StarletteHTTPException)
    code = _CODE_BY_STATUS.get(exc.status_code, f"http_{exc.status_code}")
    message = exc.detail if isinstance(exc.detail, str) else HTTPStatus(exc.status_code).phrase
    headers = dict(exc.headers or {})
    return JSONResponse(error_body(code, message), status_code=exc.status_code, headers=headers)


async def _not_found(_request: Request, exc: Exception) -> JSONResponse:
    return JSONResponse(error_body("not_found", str(exc)), status_code=404)


async def _bad_cursor(_request: Request, exc: Exception) -> JSONResponse:
    body = error_body("invalid_cursor", str(exc), "cursor", "query")
    return JSONResponse(body, status_code=422)


async def _store_down(_request: Request, exc: Exception) -> JSONResponse:
    log.error("database unavailable: %s", exc)
    body = error_body("store_unavailable", "the database is unavailable; try again shortly")
    return JSONResponse(body, status_code=503, headers={"Retry-After": "5"})


async def _unexpected(request: Request, exc: Exception) -> JSONResponse:
    log.exception("unexpected failure answering %s %s", request.method, request.url.path)
    body = error_body("internal_error", "the service failed to answer; the failure is logged")
    return JSONResponse(body, status_code=500)


def install_error_handlers(app: FastAPI) -> None:
    """Answer every error of ``app`` in the one JSON shape."""
    app.add_exception_handler(ApiError, _api_error)
    app.add_exception_handler(RequestValidationError, _invalid)
    app.add_exception_handler(StarletteHTTPException, _http_error)
    app.add_exception_handler(NotFoundError, _not_found)
    app.add_exception_handler(CursorError, _bad_cursor)
    app.add_exception_handler(StoreError, _store_down)
    app.add_exception_handler(Exception, _unexpected)
