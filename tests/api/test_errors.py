"""One JSON error shape everywhere: a machine code, a sentence, and the offending field (with
where it is), never a stack trace; and the OpenAPI document states every shared answer
(422, 429 with ``Retry-After``, 500) with that shape and an example of it.

Statuses: RFC 9110 section 15 (404, 405, 413, 422), RFC 6585 section 4 (429); the document's
parts: OpenAPI Specification 3.1, "Responses Object", "Header Object", "Example Object".
"""

from __future__ import annotations

from collections.abc import Iterator

import pytest
import sqlalchemy as sa
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest.settings import Settings
from tests.services import migrated

SHAPE = {"code", "message", "field", "location", "errors"}


@pytest.fixture
def engine(sqlite_url: str) -> Iterator[sa.Engine]:
    yield from migrated(sqlite_url)


def test_every_error_answers_the_one_shape(engine: sa.Engine) -> None:
    settings = Settings.model_validate({"api_rate_per_minute": 3, "api_max_body_bytes": 1024})
    app = create_app(engine, settings=settings)

    def broken() -> None:
        raise RuntimeError("secret internals /etc/passwd")

    app.add_api_route("/v1/broken", broken)
    client = TestClient(app, raise_server_exceptions=False)
    write = {"Authorization": f"Bearer {create_key(engine, 'w', 'write')}"}
    answers = {
        "key_missing": client.get("/v1/devices"),
        "scope_too_small": client.get("/v1/webhooks", headers=write),
        "not_found": client.get("/v1/devices/ghost", headers=write),
        "invalid_input": client.put(
            "/v1/devices/ward", json={"module": {"i_max_a": -1}}, headers=write
        ),
    }
    answers["method_not_allowed"] = client.delete("/v1/devices", headers=write)
    answers["body_too_large"] = client.put(
        "/v1/devices/ward", json={"label": "x" * 2000}, headers=write
    )
    answers["rate_limited"] = client.get("/v1/devices", headers=write)
    other = {"Authorization": f"Bearer {create_key(engine, 'admin', 'admin')}"}
    answers["internal_error"] = client.get("/v1/broken", headers=other)
    for code, answer in answers.items():
        body = answer.json()
        assert set(body) == SHAPE, code
        assert body["code"] == code, (code, body)
        assert body["message"] and isinstance(body["message"], str), code
    invalid = answers["invalid_input"].json()
    assert (invalid["field"], invalid["location"]) == ("module.i_max_a", "body")
    assert invalid["errors"][0]["field"] == "module.i_max_a"
    assert answers["rate_limited"].status_code == 429
    failed = answers["internal_error"]
    assert failed.status_code == 500
    assert "secret" not in failed.text and "Traceback" not in failed.text


def test_the_document_states_the_shared_answers(engine: sa.Engine) -> None:
    document = TestClient(create_app(engine)).get("/openapi.json").json()
    error = document["components"]["schemas"]["ErrorOut"]
    assert set(error["properties"]) == SHAPE
    assert document["components"]["securitySchemes"]["bearer"]["scheme"] == "bearer"
    for path, item in document["paths"].items():
        for method, op in item.items():
            responses = op["responses"]
            assert "500" in responses, (path, method)
            if path not in ("/healthz", "/readyz"):
                limited = responses["429"]
                assert "Retry-After" in limited["headers"], (path, method)
                assert op["security"] == [{"bearer": []}], (path, method)
            if "requestBody" in op:
                assert "413" in responses, (path, method)
            for status, answer in responses.items():
                if not status.startswith(("4", "5")) or (path, status) == ("/readyz", "503"):
                    continue  # a success, or /readyz's own readiness body
                media = answer["content"]["application/json"]
                assert media["schema"] == {"$ref": "#/components/schemas/ErrorOut"}, (
                    path,
                    method,
                    status,
                )
                assert "example" in media, (path, method, status)
