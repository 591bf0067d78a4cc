"""API keys in and out: a key is listed without its secret, which only its creation shows."""

from __future__ import annotations

from typing import Literal

from pydantic import BaseModel, ConfigDict, Field


class KeyIn(BaseModel):
    """A new key: its name, scope, and optionally the sites it is limited to and its expiry."""

    model_config = ConfigDict(
        extra="forbid",
        json_schema_extra={
            "examples": [
                {
                    "name": "pharmacy stock system",
                    "scope": "read",
                    "sites": ["North clinic"],
                    "expires_at": "2027-06-30T00:00:00Z",
                }
            ]
        },
    )

    name: str = Field(min_length=1, max_length=200, pattern=r"\S")
    scope: Literal["read", "write", "admin"]
    sites: list[str] | None = Field(
        None,
        min_length=1,
        max_length=100,
        description="limit the key to devices at these sites; absent: every site",
    )
    expires_at: str | None = Field(None, description="RFC 3339; absent: the key never expires")


class KeyOut(BaseModel):
    """A key as listed: never its secret nor its hash."""

    id: int
    name: str
    scope: str
    prefix: str = Field(description="the key's first characters, to tell keys apart")
    sites: list[str] | None
    created_at: str | None
    created_by: str | None
    expires_at: str | None
    revoked_at: str | None
    last_used_at: str | None = Field(description="to within the settings' api_key_touch_s")
    active: bool = Field(description="neither revoked nor expired")


class KeyCreatedOut(KeyOut):
    """A new key, with the secret: the only time it is shown."""

    key: str
