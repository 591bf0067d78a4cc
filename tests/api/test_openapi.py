"""The OpenAPI document states every route's answer: a success with a schema, and the error
answers the route can give.

What a response object holds follows the OpenAPI Specification 3.1 ("Responses Object",
"Media Type Object", "Reference Object"); that a 204 answer carries no body is RFC 9110,
section 15.3.5. Which errors a route can give is the contract's REST section: missing key 401,
too little scope 403, unknown device 404, invalid input 422.
"""

from __future__ import annotations

from typing import Any

import pytest

from tecfleet.api.app import create_app
from tecfleet.ingest import db

#: Routes the contract serves without a key.
PUBLIC = {("/healthz", "get"), ("/readyz", "get")}
#: Path parameters that name something stored; an unknown one answers 404.
LOOKUP_PARAMS = ("{device_id}", "{alert_id}", "{webhook_id}")
#: Routes with such a parameter that create what they name instead of looking it up.
UPSERTS = {("/v1/devices/{device_id}", "put")}
METHODS = ("get", "put", "post", "delete", "patch")


@pytest.fixture(scope="module")
def document(tmp_path_factory: pytest.TempPathFactory) -> dict[str, Any]:
    engine = db.make_engine(f"sqlite:///{tmp_path_factory.mktemp('openapi') / 'tecfleet.db'}")
    try:
        return create_app(engine).openapi()
    finally:
        engine.dispose()


def operations(document: dict[str, Any]) -> list[tuple[str, str, dict[str, Any]]]:
    return [
        (path, method, op)
        for path, item in document["paths"].items()
        for method, op in item.items()
        if method in METHODS
    ]


def resolve(document: dict[str, Any], schema: dict[str, Any]) -> dict[str, Any]:
    """Follow a local ``$ref`` (``#/components/schemas/Name``) to the schema it names."""
    ref = schema.get("$ref")
    if ref is None:
        return schema
    *_, name = ref.split("/")
    named: dict[str, Any] = document["components"]["schemas"][name]
    return named


def typed(document: dict[str, Any], schema: dict[str, Any]) -> bool:
    """A schema that states a shape: an object with its properties (or typed values), an
    array of typed items, a scalar type, or a choice among such schemas. A bare ``{}`` or an
    object of anything (``additionalProperties: true``) does not count."""
    target = resolve(document, schema)
    parts = target.get("anyOf") or target.get("oneOf") or target.get("allOf")
    if parts:
        return all(typed(document, part) for part in parts)
    kind = target.get("type")
    if kind == "object" or (kind is None and "properties" in target):
        values = target.get("additionalProperties")
        return bool(target.get("properties")) or (
            isinstance(values, dict) and typed(document, values)
        )
    if kind == "array":
        return typed(document, target.get("items", {}))
    return kind is not None


def test_every_contract_route_is_documented(document: dict[str, Any]) -> None:
    documented = {(path, method) for path, method, _ in operations(document)}
    for route in (
        ("/healthz", "get"),
        ("/readyz", "get"),
        ("/metrics", "get"),
        ("/v1/devices", "get"),
        ("/v1/devices/{device_id}", "put"),
        ("/v1/devices/{device_id}", "get"),
        ("/v1/devices/{device_id}/readings", "get"),
        ("/v1/devices/{device_id}/health", "get"),
        ("/v1/alerts", "get"),
        ("/v1/alerts/{alert_id}/ack", "post"),
        ("/v1/rejects", "get"),
    ):
        assert route in documented, route


def test_every_route_documents_a_success_with_a_schema(document: dict[str, Any]) -> None:
    for path, method, op in operations(document):
        successes = {code: r for code, r in op["responses"].items() if code.startswith("2")}
        assert successes, (path, method)
        for code, response in successes.items():
            if code == "204":
                assert not response.get("content"), (path, method)  # no body, RFC 9110
                continue
            content = response.get("content")
            assert content, (path, method, code)
            for media_type, media in content.items():
                schema = media.get("schema")
                assert schema and typed(document, schema), (path, method, code, media_type)


def test_every_route_documents_the_errors_it_can_answer(document: dict[str, Any]) -> None:
    for path, method, op in operations(document):
        codes = set(op["responses"])
        if (path, method) not in PUBLIC:
            assert {"401", "403"} <= codes, (path, method)
        if any(p in path for p in LOOKUP_PARAMS) and (path, method) not in UPSERTS:
            assert "404" in codes, (path, method)
        if op.get("parameters") or op.get("requestBody"):
            assert "422" in codes, (path, method)
        for code in codes - {"200", "201", "204"}:
            content = op["responses"][code].get("content", {})
            schema = content.get("application/json", {}).get("schema")
            assert schema and typed(document, schema), (path, method, code)


def test_alert_answers_name_the_contract_fields(document: dict[str, Any]) -> None:
    op = document["paths"]["/v1/alerts/{alert_id}/ack"]["post"]
    schema = resolve(document, op["responses"]["200"]["content"]["application/json"]["schema"])
    assert set(schema["properties"]) >= {
        "id",
        "device_id",
        "kind",
        "severity",
        "state",
        "opened_at",
        "updated_at",
        "resolved_at",
        "summary",
        "evidence",
    }
