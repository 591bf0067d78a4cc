"""Every route behind a key refuses what the contract says it must, on a real server over a
real database (SQLite and PostgreSQL). The list of routes comes from the app itself, so a route
added later is checked without being named here.

The rules are the contract's REST section: a missing key 401, too little scope 403; and issue
21: a revoked or expired key 401, a key limited to other sites 403 or 404 (a list answers
only what lies on the key's sites). 401 carries ``WWW-Authenticate: Bearer`` as RFC 6750,
section 3 asks.
"""

from __future__ import annotations

import re
import time
from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any

import httpx
import pytest
import sqlalchemy as sa
from fastapi.routing import APIRoute, iter_route_contexts

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key
from tecfleet.api.deps import Require
from tecfleet.ingest import db
from tecfleet.ingest.db import now_ms
from tests.api.fleet import Fleet, populate, served

PUBLIC = {"/healthz", "/readyz", "/"}
SCOPES = ("read", "write", "admin")
#: A range within the populated fleet's readings (1_790_000_000 s is 2026-09-21T14:13:20Z).
RANGE = {"start": "2026-09-21T00:00:00Z", "end": "2026-09-22T00:00:00Z"}
#: Values of the other required query parameters.
REQUIRED = {**RANGE, "keys": "module.zt"}
#: Optional query parameters a route needs to do anything, naming North's things.
QUERIES: dict[tuple[str, str], dict[str, str]] = {
    ("GET", "/v1/reports/cold-chain.pdf"): {"device": "cab-n1"},
}
#: A body each writing route accepts from a key allowed to use it, naming North's things.
BODIES: dict[tuple[str, str], Any] = {
    ("PUT", "/v1/devices/{device_id}"): {"label": "north fridge"},
    ("POST", "/v1/alerts/{alert_id}/ack"): {"note": "seen"},
    ("POST", "/v1/maintenance"): {
        "device_id": "cab-n1",
        "start": "2026-09-21T15:00:00Z",
        "end": "2026-09-21T16:00:00Z",
    },
    ("PUT", "/v1/alert-policies/{scope}/{name}"): {"excursion_delay_s": 600},
    ("POST", "/v1/webhooks"): {"url": "http://127.0.0.1:9/other"},
    ("POST", "/v1/keys"): {"name": "planner", "scope": "read"},
    ("POST", "/v1/devices/{device_id}/calibration"): {
        "sensor": "t_ambient",
        "offset": 0.3,
        "valid_from": "2026-09-21T14:00:00Z",
    },
    ("POST", "/v1/keys/{key_id}/revoke"): None,
    ("DELETE", "/v1/webhooks/{webhook_id}"): None,
    ("DELETE", "/v1/devices/{device_id}/calibration/{offset_id}"): None,
}


@dataclass(frozen=True)
class Call:
    method: str
    template: str
    url: str
    scope: str
    fleet_wide: bool
    query: dict[str, str]
    body: Any
    names_north: bool


def _guard(route: APIRoute) -> Require:
    found: list[Require] = []

    def walk(dependant: Any) -> None:
        for dep in dependant.dependencies:
            if isinstance(dep.call, Require):
                found.append(dep.call)
            walk(dep)

    walk(route.dependant)
    assert found, f"{route.path} has no key guard"
    return max(found, key=lambda g: (SCOPES.index(g.scope), g.fleet_wide))


def _path_values(fleet: Fleet) -> dict[str, str]:
    return {
        "device_id": "cab-n1",
        "alert_id": str(fleet.alert_id),
        "webhook_id": str(fleet.webhook_id),
        "key_id": str(fleet.key_id),
        "offset_id": str(fleet.offset_id),
        "key": "module.zt",
        "scope": "device",
        "name": "cab-n1",
    }


def calls(app: Any, fleet: Fleet) -> list[Call]:
    """One call per method of every keyed route, filled in from the route's own parameters."""
    values = _path_values(fleet)
    document = app.openapi()
    out = []
    for route in (context.route for context in iter_route_contexts(app.routes)):
        if not isinstance(route, APIRoute) or route.path in PUBLIC:
            continue
        guard = _guard(route)
        names = re.findall(r"{(\w+)}", route.path)
        missing = [n for n in names if n not in values]
        assert not missing, f"add a value for {missing} of {route.path}"
        url = route.path.format(**{n: values[n] for n in names})
        for method in sorted(route.methods or ()):
            op = document["paths"][route.path][method.lower()]
            query = dict(QUERIES.get((method, route.path), {}))
            for param in op.get("parameters", []):
                if param["in"] != "query":
                    continue
                if param["name"] == "follow":
                    query["follow"] = "false"  # a stream that ends, so its body can be read
                elif param.get("required"):
                    assert param["name"] in REQUIRED, f"add a value for {param['name']} of {url}"
                    query[param["name"]] = REQUIRED[param["name"]]
            body = BODIES.get((method, route.path))
            if "requestBody" in op:
                assert (method, route.path) in BODIES, f"add a body for {method} {route.path}"
            north = (
                bool({"device_id", "alert_id", "name"} & set(names))
                or (isinstance(body, dict) and body.get("device_id") == "cab-n1")
                or "cab-n1" in query.values()
            )
            out.append(
                Call(method, route.path, url, guard.scope, guard.fleet_wide, query, body, north)
            )
    return out


@pytest.fixture
def fleet_server(db_url: str) -> Iterator[tuple[sa.Engine, Fleet, list[Call], str]]:
    engine = db.make_engine(db_url)
    db.migrate(engine)
    fleet = populate(engine)
    app = create_app(engine)
    app.state.webhook_allow_private = True
    with served(app) as base:
        yield engine, fleet, calls(app, fleet), base
    engine.dispose()


def _send(client: httpx.Client, call: Call, key: str | None) -> httpx.Response:
    headers = {"Authorization": f"Bearer {key}"} if key else {}
    kwargs: dict[str, Any] = {"params": call.query, "headers": headers}
    if call.body is not None:
        kwargs["json"] = call.body
    with client.stream(call.method, call.url, **kwargs) as response:
        response.read()
        return response


def test_every_keyed_route_refuses_missing_revoked_and_expired_keys(
    fleet_server: tuple[sa.Engine, Fleet, list[Call], str],
) -> None:
    engine, fleet, routes, base = fleet_server
    assert len(routes) >= 25  # every route of the contract and of issue 21
    expired = create_key(engine, "short", "admin", expires_ms=now_ms() + 1000)
    time.sleep(1.1)
    with httpx.Client(base_url=base, timeout=30) as client:
        for call in routes:
            for key, code in (
                (None, "key_missing"),
                (fleet.keys["revoked"], "key_revoked"),
                (expired, "key_expired"),
            ):
                answer = _send(client, call, key)
                assert answer.status_code == 401, (call.method, call.url, code)
                assert answer.json()["code"] == code, (call.method, call.url)
                assert answer.headers["www-authenticate"] == "Bearer"


def test_every_route_refuses_a_key_of_too_small_a_scope(
    fleet_server: tuple[sa.Engine, Fleet, list[Call], str],
) -> None:
    _engine, fleet, routes, base = fleet_server
    below = {"write": "read", "admin": "write"}
    checked = 0
    with httpx.Client(base_url=base, timeout=30) as client:
        for call in routes:
            if call.scope not in below:
                continue  # read is the smallest scope: every key may use the route
            answer = _send(client, call, fleet.keys[below[call.scope]])
            assert answer.status_code == 403, (call.method, call.url)
            assert answer.json()["code"] == "scope_too_small"
            checked += 1
    assert checked >= 10


def test_a_key_of_other_sites_never_reaches_north(
    fleet_server: tuple[sa.Engine, Fleet, list[Call], str],
) -> None:
    engine, fleet, routes, base = fleet_server
    with engine.connect() as conn:
        audit_before = conn.execute(sa.select(sa.func.count()).select_from(db.audit_log)).scalar()
    with httpx.Client(base_url=base, timeout=30) as client:
        for call in routes:
            answer = _send(client, call, fleet.keys["south_admin"])
            where = (call.method, call.url)
            if call.fleet_wide:
                assert answer.status_code == 403, where
                assert answer.json()["code"] == "site_limited_key", where
            elif call.names_north:
                assert answer.status_code in (403, 404), where
            else:
                # A list: it answers, with nothing of North in it.
                assert answer.status_code == 200, where
                assert "cab-n1" not in answer.text and "North" not in answer.text, where
    with engine.connect() as conn:
        audit_after = conn.execute(sa.select(sa.func.count()).select_from(db.audit_log)).scalar()
    assert audit_after == audit_before  # nothing was changed
