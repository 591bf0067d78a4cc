"""API keys from the admin route and the command line: scopes, sites, expiry, revocation,
last use, a listing without secrets; and webhook secrets sealed at rest with the settings' key.

A sealed secret is opened here with the ``cryptography`` package's own Fernet, the reference
implementation of the Fernet specification, not with the service's code.
"""

from __future__ import annotations

import os
import stat
import subprocess
import sys
from pathlib import Path

import sqlalchemy as sa
from cryptography.fernet import Fernet
from fastapi.testclient import TestClient

from tecfleet.api.app import create_app
from tecfleet.api.auth import create_key, hash_key
from tecfleet.ingest import db
from tecfleet.ingest.settings import Settings
from tests.api.fleet import populate


def bearer(key: str) -> dict[str, str]:
    return {"Authorization": f"Bearer {key}"}


def test_admin_route_makes_lists_and_revokes_keys(engine: sa.Engine) -> None:
    fleet = populate(engine)
    settings = Settings.model_validate({"api_key_touch_s": 0})
    client = TestClient(create_app(engine, settings=settings))
    admin = bearer(fleet.keys["admin"])
    made = client.post(
        "/v1/keys",
        json={
            "name": "stock system",
            "scope": "read",
            "sites": ["North"],
            "expires_at": "2099-01-01T00:00:00Z",
        },
        headers=admin,
    )
    assert made.status_code == 201
    new = made.json()
    assert (new["scope"], new["sites"], new["expires_at"]) == (
        "read",
        ["North"],
        "2099-01-01T00:00:00.000Z",
    )
    assert new["last_used_at"] is None and new["active"] is True
    own = bearer(new["key"])
    # The key reaches North and nothing else.
    assert client.get("/v1/devices/cab-n1", headers=own).status_code == 200
    assert client.get("/v1/devices/cab-s1", headers=own).status_code == 404
    listed = client.get("/v1/keys", headers=admin)
    assert new["key"] not in listed.text and hash_key(new["key"]) not in listed.text
    mine = next(k for k in listed.json()["items"] if k["id"] == new["id"])
    assert mine["last_used_at"] is not None and "key" not in mine
    revoked = client.post(f"/v1/keys/{new['id']}/revoke", headers=admin)
    assert revoked.status_code == 200 and revoked.json()["active"] is False
    refused = client.get("/v1/devices/cab-n1", headers=own)
    assert refused.status_code == 401 and refused.json()["code"] == "key_revoked"
    assert client.post("/v1/keys/999999/revoke", headers=admin).status_code == 404


def test_admin_route_refuses_bad_keys(engine: sa.Engine) -> None:
    client = TestClient(create_app(engine))
    admin = bearer(create_key(engine, "root", "admin"))
    for body, field in (
        ({"name": "x", "scope": "owner"}, "scope"),
        ({"name": "x", "scope": "read", "expires_at": "2001-01-01T00:00:00Z"}, "expires_at"),
        ({"name": "x", "scope": "read", "expires_at": "soon"}, "expires_at"),
        ({"name": "x", "scope": "read", "sites": []}, "sites"),
        ({"name": " ", "scope": "read"}, "name"),
    ):
        answer = client.post("/v1/keys", json=body, headers=admin)
        assert answer.status_code == 422, body
        assert answer.json()["field"] == field, body


def _cli(url: str, *args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [sys.executable, "-m", "tecfleet.api.cli", "keys", *args],
        env=dict(os.environ, TECFLEET_DATABASE_URL=url),
        capture_output=True,
        text=True,
        check=True,
    )


def test_command_line_makes_lists_and_revokes_keys(sqlite_url: str) -> None:
    made = _cli(
        sqlite_url,
        "create",
        "--name",
        "planner",
        "--scope",
        "read",
        "--site",
        "North",
        "--expires",
        "2099-01-01T00:00:00Z",
    )
    key = made.stdout.splitlines()[0]
    assert key.startswith("tfk_") and " " not in key
    listing = _cli(sqlite_url, "list").stdout
    assert "planner" in listing and "North" in listing and key not in listing
    key_id = listing.split("\t")[0]
    _cli(sqlite_url, "revoke", key_id)
    engine = db.make_engine(sqlite_url)
    with engine.connect() as conn:
        row = conn.execute(sa.select(db.api_keys)).one()
    assert row.revoked_ms is not None and row.sites == ["North"]
    engine.dispose()


def test_webhook_secrets_are_sealed_with_the_settings_key(engine: sa.Engine) -> None:
    old, new = Fernet.generate_key(), Fernet.generate_key()
    admin = bearer(create_key(engine, "root", "admin"))
    made = []
    for keys in (old.decode(), f"{new.decode()},{old.decode()}"):
        app = create_app(engine, settings=Settings.model_validate({"secret_key": keys}))
        app.state.webhook_allow_private = True
        answer = TestClient(app).post(
            "/v1/webhooks", json={"url": "http://127.0.0.1:9/h"}, headers=admin
        )
        made.append(answer.json())
    with engine.connect() as conn:
        stored = dict(conn.execute(sa.select(db.webhooks.c.id, db.webhooks.c.secret)).all())
    first, second = made
    assert stored[first["id"]] != first["secret"] and first["secret"] not in stored[first["id"]]
    assert Fernet(old).decrypt(stored[first["id"]].encode()).decode() == first["secret"]
    # After rotation the new key seals; the old one still opens what it sealed.
    assert Fernet(new).decrypt(stored[second["id"]].encode()).decode() == second["secret"]
    rotated = Settings.model_validate({"secret_key": f"{new.decode()},{old.decode()}"})
    from tecfleet.api.sealing import sealer_for

    assert sealer_for(rotated).open(stored[first["id"]]) == first["secret"]


def test_a_key_file_is_made_once_readable_by_its_owner_only(tmp_path: Path) -> None:
    from tecfleet.api.sealing import sealer_for

    path = tmp_path / "keys" / "secret.key"
    sealer = sealer_for(Settings.model_validate({"secret_key_file": str(path)}))
    sealed = sealer.seal("whsec_abc")
    assert stat.S_IMODE(path.stat().st_mode) == 0o600
    assert Fernet(path.read_bytes().strip()).decrypt(sealed.encode()) == b"whsec_abc"
