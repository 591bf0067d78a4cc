"""The served OpenAPI document, finished so that it states what every route does.

FastAPI writes each route's own responses; the answers every route shares are added here in
one place so that a route added later is described the same way: invalid input (422) in the
one error shape, an over-large body (413), the rate limit (429 with ``Retry-After``), an
unexpected failure (500), the bearer key, and page sizes as the settings bound them.
"""

from __future__ import annotations

from typing import Any

from tecfleet.api.schemas.common import ERROR_EXAMPLES

_METHODS = ("get", "put", "post", "delete", "patch")
_ERROR_REF = {"$ref": "#/components/schemas/ErrorOut"}
#: Paths served without a key (the contract's ``/healthz`` and ``/readyz``).
PUBLIC_PATHS = frozenset({"/healthz", "/readyz"})


def _error(code: int, headers: dict[str, Any] | None = None) -> dict[str, Any]:
    text, example = ERROR_EXAMPLES[code]
    answer: dict[str, Any] = {
        "description": text,
        "content": {"application/json": {"schema": _ERROR_REF, "example": example}},
    }
    if headers:
        answer["headers"] = headers
    return answer


_RETRY_AFTER = {
    "Retry-After": {
        "description": "seconds to wait before the next request (RFC 9110, section 10.2.3)",
        "schema": {"type": "integer", "minimum": 1},
    }
}


def _finish_operation(path: str, op: dict[str, Any], max_page: int) -> None:
    responses = op.setdefault("responses", {})
    if "422" in responses or op.get("parameters") or op.get("requestBody"):
        responses["422"] = _error(422)
    if op.get("requestBody"):
        responses["413"] = _error(413)
    responses["500"] = _error(500)
    if path not in PUBLIC_PATHS:
        responses["429"] = _error(429, _RETRY_AFTER)
        op["security"] = [{"bearer": []}]
    for param in op.get("parameters", []):
        schema = param.get("schema", {})
        if param.get("in") == "query" and param.get("name") == "limit":
            schema["maximum"] = min(int(schema.get("maximum", max_page)), max_page)
            if "default" in schema:
                schema["default"] = min(int(schema["default"]), max_page)


def finish_document(document: dict[str, Any], max_page: int) -> dict[str, Any]:
    """Add the shared answers, the bearer scheme and the page-size bound to ``document``."""
    for path, item in document.get("paths", {}).items():
        for method, op in item.items():
            if method in _METHODS:
                _finish_operation(path, op, max_page)
    components = document.setdefault("components", {})
    components.setdefault("securitySchemes", {})["bearer"] = {
        "type": "http",
        "scheme": "bearer",
        "description": "an API key made by `tecfleet keys create` or `POST /v1/keys`",
    }
    schemas = components.get("schemas", {})
    for unused in ("HTTPValidationError", "ValidationError"):
        schemas.pop(unused, None)
    return document
