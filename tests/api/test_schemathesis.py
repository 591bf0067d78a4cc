"""The served OpenAPI document, checked against the app by schemathesis (a property-based
tester of OpenAPI 3 services): on a populated fleet, no generated request gets a server error
(5xx), and every answer matches the status codes, content types, headers and schemas that the
document states for its route.

Bounded: a few examples per operation (hypothesis ``max_examples``) keep the run short.
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import pytest
import schemathesis
import sqlalchemy as sa
from hypothesis import HealthCheck, given, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi import checks

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.ingest.settings import Settings
from tests.api.fleet import populate
from tests.services import migrated

#: Examples generated per operation.
MAX_EXAMPLES = 12
#: What is checked on every answer: no server error, and the answer as documented. (Whether a
#: request the schema allows is accepted is not asked: a page cursor or an RFC 3339 text is
#: a string to the schema, but only some strings are cursors or times.)
CHECKS = [
    not_a_server_error,
    checks.status_code_conformance,
    checks.content_type_conformance,
    checks.response_headers_conformance,
    checks.response_schema_conformance,
]


@pytest.fixture(scope="module")
def engine(tmp_path_factory: pytest.TempPathFactory) -> Iterator[sa.Engine]:
    path = Path(tmp_path_factory.mktemp("schemathesis")) / "tecfleet.db"
    yield from migrated(f"sqlite:///{path}")


@pytest.fixture(scope="module")
def admin_key(engine: sa.Engine) -> str:
    return populate(engine).keys["admin"]


@pytest.fixture(scope="module")
def api_schema(engine: sa.Engine, admin_key: str) -> schemathesis.BaseSchema:
    # Streams end at once so that each answer can be read whole; no rate limit in the way.
    limits = Settings.model_validate({"api_rate_per_minute": 1_000_000, "api_events_max_s": 0.2})
    app = create_app(engine, settings=limits)
    app.state.webhook_allow_private = True
    return schemathesis.openapi.from_asgi("/openapi.json", app)


def test_the_document_states_what_the_api_does(
    api_schema: schemathesis.BaseSchema, engine: sa.Engine, admin_key: str
) -> None:
    operations = [result.ok() for result in api_schema.get_all_operations()]
    assert len(operations) >= 30

    for operation in operations:

        @given(case=operation.as_strategy())
        @settings(
            max_examples=MAX_EXAMPLES,
            deadline=None,
            suppress_health_check=list(HealthCheck),
            database=None,
            derandomize=True,
        )
        def check(case: schemathesis.Case) -> None:
            # A key of its own for each request: a generated revocation may hit any key.
            key = create_key(engine, "schemathesis", "admin")
            case.call_and_validate(headers={"Authorization": f"Bearer {key}"}, checks=CHECKS)

        check()
